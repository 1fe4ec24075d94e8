"""Benchmark: held-out validation on simulated knockdowns (does the graph beat the baselines?).

For each seed: a random linear Gaussian model on 20 variables (expected degree 2), a
control and 10 single-target knockdown regimes of 2,000 rows each (`simulate`), saved
as CSV; then ``validate`` holds out every knockdown in turn. Printed per seed and on
average: the pooled ROC AUC of the learned graph, of the observational-only graph and
of the correlation baseline; precision and recall of the graph's predicted movers;
the observed movers, and how many of them are true descendants of the held-out
target (the observed-mover rule checked against the truth); seconds per run.
Appended to benchmarks/RESULTS.md.

Run from the repository root::

    python benchmarks/bench_validate.py            # 5 seeds
    python benchmarks/bench_validate.py --seeds 2  # a smoke run
"""

from __future__ import annotations

import argparse
import datetime
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path

import networkx as nx
from _common import append_results, load_average, machine

from pipeline.analyses.validate import validate
from pipeline.simulation import simulate


def _f(v) -> str:
    return "n/a" if v is None else f"{v:.3f}"


def run_seed(seed: int, nodes: int, regimes: int, samples: int, degree: float,
             work: Path) -> dict:
    sim = simulate(nodes=nodes, degree=degree, regimes=regimes, samples=samples,
                   kind="knockdown", seed=seed)
    folder = work / f"seed{seed}"
    sim.save(folder / "input")
    started = time.perf_counter()
    result = validate([folder / "input" / "data.csv"], folder / "input" / "regimes.csv",
                      out=folder / "out", seed=seed)
    seconds = time.perf_counter() - started
    truth = sim.truth_dag
    true_movers = sum(
        len(set(r.names(r.moved)) & set().union(*(nx.descendants(truth, t)
                                                   for t in r.targets)))
        for r in result.regimes)
    g, o, c = (result.overall(m) for m in ("graph", "observational", "correlation"))
    return {"seed": seed, "graph": g.auc, "observational": o.auc, "correlation": c.auc,
            "precision": g.precision, "recall": g.recall, "observed": g.observed,
            "true_movers": true_movers, "seconds": seconds}


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=5)
    ap.add_argument("--nodes", type=int, default=20)
    ap.add_argument("--regimes", type=int, default=10)
    ap.add_argument("--samples", type=int, default=2000)
    ap.add_argument("--degree", type=float, default=2.0)
    args = ap.parse_args(argv)
    work = Path(tempfile.mkdtemp(prefix="orienteer-bench-validate-"))
    try:
        rows = [run_seed(s, args.nodes, args.regimes, args.samples, args.degree, work)
                for s in range(1, args.seeds + 1)]
    finally:
        shutil.rmtree(work, ignore_errors=True)

    def mean(key: str) -> float | None:
        vals = [r[key] for r in rows if r[key] is not None]
        return statistics.fmean(vals) if vals else None

    lines = ["| seed | AUC graph | AUC observational | AUC correlation | precision (graph) "
             "| recall (graph) | observed movers | of them true descendants | seconds |",
             "|---|---|---|---|---|---|---|---|---|"]
    for r in rows:
        lines.append(f"| {r['seed']} | {_f(r['graph'])} | {_f(r['observational'])} | "
                     f"{_f(r['correlation'])} | {_f(r['precision'])} | {_f(r['recall'])} | "
                     f"{r['observed']} | {r['true_movers']} | {r['seconds']:.1f} |")
    lines.append(f"| **mean** | **{_f(mean('graph'))}** | **{_f(mean('observational'))}** | "
                 f"**{_f(mean('correlation'))}** | {_f(mean('precision'))} | "
                 f"{_f(mean('recall'))} | {sum(r['observed'] for r in rows)} | "
                 f"{sum(r['true_movers'] for r in rows)} | {mean('seconds'):.1f} |")
    g, o, c = mean("graph"), mean("observational"), mean("correlation")
    verdict = ("the graph's mean AUC is above both baselines"
               if None not in (g, o, c) and g > o and g > c
               else "the graph's mean AUC is NOT above both baselines")
    text = "\n".join([
        f"## bench_validate.py ({datetime.date.today().isoformat()})",
        f"- machine: {machine('numpy', 'networkx')}; load average {load_average()}",
        f"- command: `{' '.join(['python benchmarks/bench_validate.py', *sys.argv[1:]])}`",
        f"- data: simulated knockdowns, {args.nodes} variables (expected degree "
        f"{args.degree:g}), control + {args.regimes} single-target regimes x {args.samples} "
        f"rows; every knockdown held out in turn; defaults of `validate` (alpha 0.01, "
        f"min-shift 0.2 sd, predicted mover: score >= 0.5); AUC pooled over the held-out "
        f"regimes of a seed",
        "", *lines, "", f"verdict: {verdict}"])
    print(text)
    append_results(text)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
