"""Benchmark: the graph core (essential graphs, class sizes, uniform sampling).

Times, median of 3 runs:

1. the interventional essential graph of a random sparse DAG (2,000 nodes, expected
   degree 2) under 100 regimes of 1-3 random targets each;
2. the class size of the CPDAG of a sparse 500-node DAG with few v-structures (a random
   chordal graph directed along its construction order, which makes no v-structure,
   plus 10 random extra edges), so that its undirected components are large (the
   largest are reported);
3. the class size of a 500-node essential graph that is one connected chordal
   undirected component (the hard case: no edge directed at all);
4. drawing 1,000 DAGs uniformly from the class of case 3 (the count included).

Prints a table and appends it to benchmarks/RESULTS.md. Run from the repository root::

    python benchmarks/bench_graphs.py
    python benchmarks/bench_graphs.py --quick   # smaller sizes, one run, not recorded
"""

from __future__ import annotations

import argparse
import datetime
import random
import sys

import networkx as nx
from _common import append_results, machine, median_time

from pipeline.graphs.counting import chain_components, class_size
from pipeline.graphs.essential import essential_graph
from pipeline.graphs.pdag import PDAG
from pipeline.graphs.sampling import sample_dags, sample_orientations


def random_dag(n: int, degree: float, rng: random.Random) -> nx.DiGraph:
    """A random DAG on X0..X{n-1} (edges from lower to higher index), n*degree/2 edges."""
    names = [f"X{i}" for i in range(n)]
    d = nx.DiGraph()
    d.add_nodes_from(names)
    m = int(n * degree / 2)
    while d.number_of_edges() < m:
        i, j = sorted(rng.sample(range(n), 2))
        d.add_edge(names[i], names[j])
    return d


def random_chordal(n: int, rng: random.Random, kmax: int = 3) -> nx.Graph:
    """A connected chordal graph: each new vertex joins a vertex u and part of u's clique."""
    earlier: dict[int, list[int]] = {0: []}
    g = nx.Graph()
    g.add_node("X0")
    for v in range(1, n):
        u = rng.randrange(v)
        nb = [u] + [w for w in earlier[u] if rng.random() < 0.5][:kmax]
        earlier[v] = nb
        g.add_edges_from((f"X{v}", f"X{w}") for w in nb)
    return g


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller sizes, one run")
    args = parser.parse_args(argv)
    runs = 1 if args.quick else 3
    big, mid, draws = (400, 150, 100) if args.quick else (2000, 500, 1000)
    rng = random.Random(2026)
    rows = []

    # 1. essential graph under 100 regimes
    dag = random_dag(big, 2.0, rng)
    nodes = list(dag.nodes)
    targets = {f"r{k}": rng.sample(nodes, rng.randint(1, 3)) for k in range(100)}
    t, ess = median_time(lambda: essential_graph(dag, targets), runs)
    g = ess.graph
    rows.append(("essential graph, 100 regimes", f"{big} nodes, {dag.number_of_edges()} edges; "
                 f"{len(list(g.undirected_edges()))} left undirected", t))

    # 2. class size of a sparse CPDAG with large components
    few = nx.DiGraph()
    few.add_nodes_from(f"X{i}" for i in range(mid))
    for u, v in random_chordal(mid, rng).edges:
        a, b = sorted((int(u[1:]), int(v[1:])))
        few.add_edge(f"X{a}", f"X{b}")  # along the construction order: no v-structure
    target_edges = few.number_of_edges() + 10
    while few.number_of_edges() < target_edges:
        a, b = sorted(rng.sample(range(mid), 2))
        few.add_edge(f"X{a}", f"X{b}")
    cp = essential_graph(few).graph
    sizes = sorted((len(c) for c in chain_components(cp)), reverse=True)
    t, size = median_time(lambda: class_size(cp), runs)
    rows.append(("class size, CPDAG of a sparse DAG",
                 f"{mid} nodes; largest components {sizes[:3]}; "
                 f"class size ~10^{len(str(size)) - 1}", t))

    # 3. class size of one 500-node chordal component
    und = PDAG.from_networkx(random_chordal(mid, rng))
    t, size = median_time(lambda: class_size(und), runs)
    rows.append(("class size, one chordal component",
                 f"{mid} nodes, {und.number_of_edges()} undirected edges; "
                 f"class size ~10^{len(str(size)) - 1}", t))

    # 4. uniform sampling from it
    t, _ = median_time(lambda: sample_dags(und, draws, seed=1), runs)
    rows.append((f"sample {draws} DAGs (count included)", "the class of case 3", t))
    t, _ = median_time(lambda: sample_orientations(und, draws, seed=1), runs)
    rows.append((f"sample {draws} orientations (the same draws, no graph objects)",
                 "the class of case 3", t))

    command = "python benchmarks/bench_graphs.py" + (" --quick" if args.quick else "")
    stamp = datetime.datetime.now().strftime("%Y-%m-%d %H:%M")
    lines = [f"## bench_graphs: essential graphs, class sizes, sampling ({stamp})", "",
             f"- machine: {machine('networkx')}", f"- command: `{command}`",
             f"- median of {runs} run(s); wall-clock seconds on a shared machine", "",
             "| case | size | median s |", "|---|---|---|"]
    lines += [f"| {a} | {b} | {c:.3f} |" for a, b, c in rows]
    text = "\n".join(lines) + "\n"
    print(text)
    if args.quick:
        return 0  # a smoke run: not recorded
    append_results(text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
