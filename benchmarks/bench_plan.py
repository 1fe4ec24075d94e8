"""Benchmark: experiment planning (``orienteer plan``), its value and its speed.

1. Value: 50 random DAGs on 20 nodes (each pair joined with chance 3/19, expected degree
   3), starting from the observational class (the CPDAG). Single-target experiments are
   added one at a time until the DAG is identified; after each, the current graph is the
   essential graph of the TRUE DAG under the experiments so far (what the experiment
   would show). Strategy "plan" acts on the top of the planner's ranking; strategy
   "random" on a variable drawn uniformly among those with an undirected edge. Reported:
   median (and mean, max) number of experiments over the 50 DAGs, beside the median lower
   bound (sum of w - 1 over the components, Eberhardt, Glymour & Scheines 2005).
2. Speed: ``plan_experiments`` with K = 2 targets per experiment and M = 3 experiments,
   every variable with an undirected edge a candidate, on (a) the CPDAG of a random
   200-node DAG (expected degree 3) and (b) a harder 200-node CPDAG with one large
   chordal component (a random chordal graph directed along its construction order,
   plus 10 random edges), there with K = 1; wall time, median of 3 runs.

Prints a table and appends it to benchmarks/RESULTS.md. Run from the repository root::

    python benchmarks/bench_plan.py
    python benchmarks/bench_plan.py --quick   # 10 DAGs, one run, not recorded
"""

from __future__ import annotations

import argparse
import datetime
import random
import statistics
import sys

import networkx as nx
from _common import append_results, load_average, machine, median_time
from bench_graphs import random_chordal, random_dag

from pipeline.graphs.counting import chain_components
from pipeline.graphs.essential import essential_graph
from pipeline.graphs.planning import Planner, plan_experiments


def er_dag(n: int, p: float, rng: random.Random) -> nx.DiGraph:
    """Each pair (i < j) joined i -> j with chance p, nodes X0..X{n-1}."""
    d = nx.DiGraph()
    d.add_nodes_from(f"X{i}" for i in range(n))
    d.add_edges_from((f"X{i}", f"X{j}") for i in range(n) for j in range(i + 1, n)
                     if rng.random() < p)
    return d


def experiments_needed(dag: nx.DiGraph, strategy: str, rng: random.Random) -> int:
    """Single-target experiments until the DAG is identified, chosen by `strategy`."""
    family: dict[str, list] = {}
    g = essential_graph(dag).graph
    while any(True for _ in g.undirected_edges()):
        open_nodes = [n for n in g.nodes if g.neighbors(n)]
        if strategy == "plan":
            target = Planner(g, seed=rng.randrange(2**31)).rank([(n,) for n in open_nodes])[0]
            pick = target.targets[0]
        else:
            pick = rng.choice(open_nodes)
        family[f"e{len(family)}"] = [pick]
        g = essential_graph(dag, family).graph
    return len(family)


def single_bound(dag: nx.DiGraph) -> int:
    g = essential_graph(dag).graph
    return Planner(g).bounds(1).single_target if any(True for _ in g.undirected_edges()) else 0


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="10 DAGs, one run, not recorded")
    args = parser.parse_args(argv)
    n_dags, runs = (10, 1) if args.quick else (50, 3)
    load = load_average()
    rng = random.Random(2026)

    # 1. value: experiments to full identification, plan against random
    counts: dict[str, list[int]] = {"plan": [], "random": []}
    bounds = []
    for _ in range(n_dags):
        dag = er_dag(20, 3 / 19, rng)
        bounds.append(single_bound(dag))
        for strategy in counts:
            counts[strategy].append(experiments_needed(dag, strategy, random.Random(
                rng.randrange(2**31))))
    wins = sum(p <= r for p, r in zip(counts["plan"], counts["random"], strict=True))
    value_rows = [(s, statistics.median(c), statistics.fmean(c), max(c))
                  for s, c in counts.items()]

    # 2. speed
    speed_rows = []
    er = essential_graph(random_dag(200, 3.0, rng)).graph
    t, p = median_time(lambda: plan_experiments(er, max_targets=2, experiments=3, seed=1), runs)
    comps = sorted((len(c) for c in chain_components(er)), reverse=True)
    speed_rows.append(("CPDAG of a random DAG, K = 2, M = 3",
                       f"200 nodes, {sum(1 for _ in er.undirected_edges())} undirected edges, "
                       f"largest components {comps[:3]}; {p.experiments_scored:,} experiments "
                       f"scored per step; plan {p.method}, exact {p.exact}", t))
    few = nx.DiGraph()
    few.add_nodes_from(f"X{i}" for i in range(200))
    for u, v in random_chordal(200, rng).edges:
        a, b = sorted((int(u[1:]), int(v[1:])))
        few.add_edge(f"X{a}", f"X{b}")
    target = few.number_of_edges() + 10
    while few.number_of_edges() < target:
        a, b = sorted(rng.sample(range(200), 2))
        few.add_edge(f"X{a}", f"X{b}")
    hard = essential_graph(few).graph
    t, p = median_time(lambda: plan_experiments(hard, max_targets=1, experiments=3, seed=1),
                       runs)
    comps = sorted((len(c) for c in chain_components(hard)), reverse=True)
    speed_rows.append(("one large chordal component, K = 1, M = 3",
                       f"200 nodes, {sum(1 for _ in hard.undirected_edges())} undirected edges, "
                       f"largest components {comps[:3]}; {p.experiments_scored:,} experiments "
                       f"scored per step; plan {p.method}, exact {p.exact}", t))

    command = "python benchmarks/bench_plan.py" + (" --quick" if args.quick else "")
    stamp = datetime.datetime.now().strftime("%Y-%m-%d %H:%M")
    lines = [f"## bench_plan: experiment planning, value and speed ({stamp})", "",
             f"- machine: {machine('networkx')}", f"- command: `{command}`",
             f"- load average at start (other work on the machine): {load}", "",
             f"### 1. single-target experiments to identify a random 20-node DAG "
             f"({n_dags} DAGs, expected degree 3, from the observational class)", "",
             "| strategy | median | mean | max |", "|---|---|---|---|"]
    lines += [f"| {s} | {m:g} | {a:.2f} | {x} |" for s, m, a, x in value_rows]
    lines += ["", f"plan needed no more experiments than random on {wins} of {n_dags} DAGs; "
              f"lower bound (sum of w - 1 over the components of the CPDAG): median "
              f"{statistics.median(bounds):g}, mean {statistics.fmean(bounds):.2f}", "",
              f"### 2. planning time, median of {runs} run(s), wall-clock seconds", "",
              "| case | size | median s |", "|---|---|---|"]
    lines += [f"| {a} | {b} | {c:.2f} |" for a, b, c in speed_rows]
    text = "\n".join(lines) + "\n"
    print(text)
    if args.quick:
        return 0  # a smoke run: not recorded
    append_results(text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
