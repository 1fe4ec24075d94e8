"""Benchmark: ``learn --bootstrap 50`` on 100 variables with 1 and 2 jobs.

A simulated experiment (100 variables, expected degree 2, a control plus 20 knockdown
regimes of 300 samples) is learned without resamples, then with B = 50 bootstrap
resamples with ``--jobs 1`` and ``--jobs 2``; each run goes into a fresh folder (so the
main learn is cold every time). Printed and appended to benchmarks/RESULTS.md:

- wall time medians: plain learn, the one-pass resampled statistics alone, and the whole
  learn with the bootstrap at 1 and 2 jobs (with the speed-up of 2 jobs);
- the CPU seconds the relearning took (summed over the worker processes): with other work
  on the machine, CPU against wall time shows how much of the 2 cores the run could get;
- whether 1 and 2 jobs gave the same frequencies (they must);
- the mean bootstrap adjacency of the true and of the false edges of the result, and of
  all true and all other pairs (against the simulated truth).

Run from the repository root::

    python benchmarks/bench_bootstrap.py               # B = 50, 3 repeats (several minutes)
    python benchmarks/bench_bootstrap.py --quick       # small sizes, a smoke run
"""

from __future__ import annotations

import argparse
import datetime
import itertools
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from _common import append_results, load_average, machine

from pipeline.analyses.bootstrap import resampled_moments
from pipeline.intake.read import read_inputs
from pipeline.simulation import simulate
from pipeline.workflow import learn


def _timed(fn):
    t = time.perf_counter()
    value = fn()
    return time.perf_counter() - t, value




def run(nodes: int, regimes: int, samples: int, resamples: int, repeats: int, seed: int,
        alpha: float) -> list[str]:
    tmp = Path(tempfile.mkdtemp(prefix="bench-bootstrap-"))
    try:
        sim = simulate(nodes=nodes, degree=2.0, regimes=regimes, samples=samples,
                       kind="knockdown", seed=seed)
        sim.save(tmp / "inputs")
        data, regs = tmp / "inputs" / "data.csv", tmp / "inputs" / "regimes.csv"
        times: dict[str, list[float]] = {"plain": [], "moments": [], "1": [], "2": []}
        cpu: dict[str, list[float]] = {"1": [], "2": []}
        results = {}
        intake = read_inputs([data], regs)
        learn(data, regs, out=tmp / "warm-up", alpha=alpha)  # imports and caches, not timed
        for r in range(repeats):
            t, _ = _timed(lambda r=r: learn(data, regs, out=tmp / f"plain{r}", alpha=alpha))
            times["plain"].append(t)
            t, _ = _timed(lambda: resampled_moments([data], intake.design, intake.moments,
                                                    resamples=resamples, seed=seed))
            times["moments"].append(t)
            for jobs in (1, 2):
                t, res = _timed(lambda r=r, jobs=jobs: learn(
                    data, regs, out=tmp / f"b{jobs}_{r}", alpha=alpha, bootstrap=resamples,
                    seed=seed, jobs=jobs))
                cpu[str(jobs)].append(res.bootstrap.cpu_seconds)
                times[str(jobs)].append(t)
                results[jobs] = res
        same = [(e.source, e.target, e.bootstrap_adjacency, e.bootstrap_orientation)
                for e in results[1].edge_records] == \
            [(e.source, e.target, e.bootstrap_adjacency, e.bootstrap_orientation)
             for e in results[2].edge_records]
        truth = {frozenset(e) for e in sim.truth_dag.edges()}
        res = results[1]
        found_true = [e.bootstrap_adjacency for e in res.edge_records
                      if frozenset((e.source, e.target)) in truth]
        found_false = [e.bootstrap_adjacency for e in res.edge_records
                       if frozenset((e.source, e.target)) not in truth]
        p = res.bootstrap.pairs
        freq = {frozenset((x, y)): a for x, y, a in zip(p.x, p.y, p.adjacency, strict=True)}
        true_pairs, other_pairs = [], []
        for pair in itertools.combinations(sim.model.variables, 2):
            (true_pairs if frozenset(pair) in truth else other_pairs).append(
                freq.get(frozenset(pair), 0.0))
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    med = {k: statistics.median(v) for k, v in times.items()}
    mean = lambda xs: f"{np.mean(xs):.3f}" if xs else "-"  # noqa: E731
    return [
        f"- data: {nodes} variables, expected degree 2, control + {regimes} knockdown regimes "
        f"x {samples} samples; alpha {alpha}; B = {resamples}; median of {repeats} runs, each "
        f"into a fresh folder",
        "",
        "| measurement | seconds (median) | note |",
        "|---|---|---|",
        f"| learn, no bootstrap | {med['plain']:.2f} | cold (reads the data file) |",
        f"| resampled statistics of {resamples} resamples, one pass | {med['moments']:.2f} | "
        f"part of the runs below |",
        f"| learn --bootstrap {resamples} --jobs 1 | {med['1']:.2f} | "
        f"{(med['1'] - med['plain']) / resamples:.2f} s per resample; relearning CPU "
        f"{statistics.median(cpu['1']):.1f} s |",
        f"| learn --bootstrap {resamples} --jobs 2 | {med['2']:.2f} | "
        f"{med['1'] / med['2']:.2f}x the speed of 1 job; relearning CPU "
        f"{statistics.median(cpu['2']):.1f} s (both workers); same frequencies as 1 job: "
        f"{same} |",
        "",
        f"mean bootstrap adjacency: true edges of the result {mean(found_true)} "
        f"({len(found_true)}), false edges of the result {mean(found_false)} "
        f"({len(found_false)}); all true pairs {mean(true_pairs)} ({len(true_pairs)}), "
        f"all other pairs {mean(other_pairs)} ({len(other_pairs)})",
    ]


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="small sizes, a smoke run")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--no-append", action="store_true", help="print only")
    args = ap.parse_args(argv)
    size = dict(nodes=20, regimes=5, samples=200, resamples=10) if args.quick else \
        dict(nodes=100, regimes=20, samples=300, resamples=50)
    lines = [f"## bench_bootstrap: learn --bootstrap with 1 and 2 jobs "
             f"({datetime.datetime.now():%Y-%m-%d %H:%M})", "",
             f"- machine: {machine('numpy')}",
             f"- command: `{' '.join(['python benchmarks/bench_bootstrap.py', *sys.argv[1:]])}`",
             f"- load average at start (other work on the machine): {load_average()}"]
    lines += run(repeats=args.repeats, seed=1, alpha=0.01, **size)
    lines.append(f"- load average at the end: {load_average()}")
    text = "\n".join(lines)
    print(text)
    if not args.no_append:
        append_results("\n" + text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
