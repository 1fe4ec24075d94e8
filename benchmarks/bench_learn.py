"""Benchmark: the learn workflow end to end, the test store, and a large run from moments.

Three measurements, printed as tables and appended to benchmarks/RESULTS.md:

1. rerun speed: a cold ``learn`` into a fresh folder, then a second ``learn`` at a new
   alpha into the same folder (statistics and tests from ``tests.sqlite``); the second
   result is compared with a cold run at that alpha (goal: at least 5x faster, identical);
2. a cold ``learn`` on 100 variables (expected degree 2, a control plus 20 regimes of
   2,000 samples) as a ratio to ``pandas.read_csv`` of the same file (goal: at most 2x),
   with the number of tests per conditioning-set size;
3. a 1,000-variable sparse model learned from sufficient statistics alone
   (`learn_from_moments`; the moments are the model-implied ones of each regime; goal:
   under 5 minutes). Run once.

Run from the repository root::

    python benchmarks/bench_learn.py             # all three (several minutes)
    python benchmarks/bench_learn.py --quick     # small sizes, a smoke run
    python benchmarks/bench_learn.py --skip-large
"""

from __future__ import annotations

import argparse
import datetime
import json
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path

import networkx as nx
import numpy as np
import pandas as pd
from _common import append_results, load_average, machine

from pipeline.analyses.scoring import score
from pipeline.design import Design, Regime
from pipeline.graphs.essential import essential_graph
from pipeline.simulation import KNOCKDOWN_FRACTION, LinearSEM, random_sem, simulate
from pipeline.stats.moments import Moments
from pipeline.workflow import learn, learn_from_moments


def _edges(out: Path) -> list:
    d = json.loads((out / "result.json").read_text())
    return [d["edges"], d["regimes"], d["class_size"], d["warnings"]]


def _timed(fn):
    t = time.perf_counter()
    value = fn()
    return time.perf_counter() - t, value


# -- 1 and 2: files -------------------------------------------------------------------------------
def bench_files(nodes: int, regimes: int, samples: int, repeats: int, seed: int,
                alpha: float, new_alpha: float) -> tuple[list[str], dict]:
    work = Path(tempfile.mkdtemp(prefix="orienteer-bench-"))
    try:
        sim = simulate(nodes=nodes, degree=2.0, regimes=regimes, samples=samples,
                       kind="knockdown", seed=seed)
        sim.save(work / "input")
        data, reg = work / "input" / "data.csv", work / "input" / "regimes.csv"
        size_mb = data.stat().st_size / 2**20
        read = [_timed(lambda: pd.read_csv(data))[0] for _ in range(repeats)]
        cold, warm, results = [], [], []
        for i in range(repeats):
            out = work / f"run{i}"
            t, r = _timed(lambda out=out: learn([data], reg, out=out, alpha=alpha))
            cold.append(t)
            t, w = _timed(lambda out=out: learn([data], reg, out=out, alpha=new_alpha))
            warm.append(t)
            results.append((r, w))
        fresh_times = []
        for i in range(repeats):  # cold runs at the new alpha: what a rerun is measured against
            t, fresh = _timed(lambda i=i: learn([data], reg, out=work / f"fresh{i}",
                                                alpha=new_alpha))
            fresh_times.append(t)
        t_new = statistics.median(fresh_times)
        identical = all(_edges(work / f"run{i}") == _edges(work / "fresh0")
                        for i in range(repeats))
        r, w = results[0]
        med = statistics.median
        rows = [
            f"- data: {nodes} variables, expected degree 2, control + {regimes} knockdown "
            f"regimes x {samples} samples = {len(sim.data):,} rows; data.csv {size_mb:.1f} MiB; "
            f"median of {repeats} runs",
            "",
            "| measurement | seconds (median) | note |",
            "|---|---|---|",
            f"| pandas.read_csv(data.csv) | {med(read):.2f} | reference |",
            f"| cold learn, alpha {alpha:g} | {med(cold):.2f} | "
            f"{med(cold) / med(read):.2f}x read_csv; {r.run['computed']:,} tests computed |",
            f"| rerun, alpha {new_alpha:g}, same --out | {med(warm):.2f} | "
            f"{t_new / med(warm):.1f}x faster than a cold run at that alpha; "
            f"{w.run['computed']:,} new tests, "
            f"{w.run['reused']:,} reused; statistics from the store: {w.run['from_store']} |",
            f"| cold learn, alpha {new_alpha:g}, fresh folder | {t_new:.2f} | "
            f"rerun result identical to it: {identical} |",
            "",
            "tests per conditioning-set size (cold, alpha "
            f"{alpha:g}): " + ", ".join(f"{k}: {v:,}" for k, v in
                                          sorted(r.learned.tests_per_level.items())),
            "",
            f"learned: {r.graph!r}, class size {r.class_size}",
        ]
        figures = {"read": med(read), "cold": med(cold), "warm": med(warm),
                   "identical": identical, "fresh_computed": fresh.run["computed"]}
        return rows, figures
    finally:
        shutil.rmtree(work, ignore_errors=True)


# -- 3: from moments ------------------------------------------------------------------------------
def _knockdown(model: LinearSEM, targets: list[int], strength: float, sd: np.ndarray
               ) -> LinearSEM:
    """The model of a soft knockdown (as in `pipeline.simulation`), in closed form."""
    w = model.weights.copy()
    noise = model.noise_variance.copy()
    c = model.intercept.copy()
    keep = max(0.0, 1.0 - KNOCKDOWN_FRACTION * strength)
    for j in targets:
        w[j] *= keep
        noise[j] *= keep ** 2
        c[j] = keep * c[j] - strength * sd[j]
    return LinearSEM(model.variables, w, noise, c)


def implied_moments(nodes: int, regimes: int, samples: int, seed: int
                    ) -> tuple[Design, Moments, nx.DiGraph]:
    """Design and model-implied moments of a control plus single-target knockdowns."""
    rng = np.random.default_rng(seed)
    model = random_sem(nodes, 2.0, rng)
    names = ["ctrl"]
    targets = [()]
    for t in rng.choice(nodes, size=regimes, replace=False):
        names.append(f"kd_{model.variables[t]}")
        targets.append((int(t),))
    p = nodes
    count = np.full(len(names), samples, dtype=np.int64)
    mean = np.zeros((len(names), p))
    scatter = np.zeros((len(names), p, p))
    sd = np.sqrt(np.diag(model.covariance()))
    for k, t in enumerate(targets):
        m = _knockdown(model, list(t), 1.0, sd) if t else model
        mean[k] = m.mean()
        scatter[k] = m.covariance() * (samples - 1)
    moments = Moments(model.variables, tuple(names), count, mean, scatter)
    design = Design(model.variables, tuple(
        Regime(n, tuple(model.variables[i] for i in t), True, not t, samples)
        for n, t in zip(names, targets, strict=True)))
    return design, moments, model.graph()


def bench_large(nodes: int, regimes: int, samples: int, seed: int) -> list[str]:
    t_build, (design, moments, graph) = _timed(
        lambda: implied_moments(nodes, regimes, samples, seed))
    t_learn, result = _timed(lambda: learn_from_moments(design, moments, alpha=0.01))
    s = result.graph
    truth = essential_graph(graph, design.intervention_targets()).graph
    scores = score(s, truth)
    levels = ", ".join(f"{k}: {v:,}" for k, v in sorted(result.learned.tests_per_level.items()))
    return [
        f"- {nodes} variables, expected degree 2 ({graph.number_of_edges()} true edges), "
        f"control + {regimes} "
        f"knockdown regimes, model-implied moments for n = {samples} per regime; run once",
        "",
        "| step | seconds |",
        "|---|---|",
        f"| build the moments | {t_build:.1f} |",
        f"| learn_from_moments (alpha 0.01) | {t_learn:.1f} |",
        "",
        f"learned: {s!r}; tests per conditioning-set size: {levels}",
        "",
        f"against the true interventional essential graph: SHD {scores.shd}, orientation "
        f"recall {scores.orientation_recall:.3f}, precision {scores.orientation_precision:.3f}",
    ]


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="small sizes, a smoke run")
    ap.add_argument("--skip-large", action="store_true", help="leave out the 1,000-variable run")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--no-append", action="store_true", help="print only")
    args = ap.parse_args(argv)
    if args.quick:
        files = dict(nodes=20, regimes=5, samples=300)
        large = dict(nodes=200, regimes=10, samples=2000)
    else:
        files = dict(nodes=100, regimes=20, samples=2000)
        large = dict(nodes=1000, regimes=20, samples=2000)

    lines = [f"## bench_learn: learn end to end, the test store, a large run from moments "
             f"({datetime.datetime.now():%Y-%m-%d %H:%M})", "",
             f"- machine: {machine('numpy')}",
             f"- command: `{' '.join(['python benchmarks/bench_learn.py', *sys.argv[1:]])}`",
             f"- load average at start (other work on the machine): {load_average()}", ""]
    lines.append("### 1-2. cold learn against read_csv; rerun at a new alpha from the store")
    rows, _ = bench_files(seed=1, repeats=args.repeats, alpha=0.01, new_alpha=0.001, **files)
    lines += rows + [""]
    if not args.quick:  # the same model with ten times the rows: a rerun's cost does not grow
        lines.append("### 1b. the same with 20,000 samples per regime")
        rows, _ = bench_files(seed=1, repeats=args.repeats, alpha=0.01, new_alpha=0.001,
                              **{**files, "samples": 20_000})
        lines += rows + [""]
    if not args.skip_large:
        lines.append("### 3. large sparse run from sufficient statistics")
        lines += bench_large(seed=2, **large) + [""]
    text = "\n".join(lines)
    print(text)
    if not args.no_append:
        append_results("\n" + text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
