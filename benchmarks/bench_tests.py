"""Benchmark (b): throughput of the batched tests over sufficient statistics.

Times `GaussianTester.ci` (stratified Fisher z) and `GaussianTester.invariance` (Chow +
Bartlett) on one core for conditioning sets of size 0..3, and compares them with a naive
per-test computation on the raw rows (statsmodels OLS residuals per regime, or three
OLS log-likelihoods per invariance test), measured on a few hundred tests and
extrapolated per test. Prints a table and appends it to benchmarks/RESULTS.md.

Run from the repository root::

    python benchmarks/bench_tests.py            # p=100, K=21, 100k tests per call
    python benchmarks/bench_tests.py --quick    # a smaller smoke run
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"  # single core, set before numpy is imported

import argparse  # noqa: E402
import datetime  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402
import statsmodels.api as sm  # noqa: E402
from _common import machine, publish  # noqa: E402

from pipeline.design import Design, Regime  # noqa: E402
from pipeline.independence.gaussian import GaussianTester  # noqa: E402
from pipeline.stats.moments import Moments  # noqa: E402


def _data(p: int, k: int, n: int, seed: int) -> tuple[dict[str, np.ndarray], Design]:
    rng = np.random.default_rng(seed)
    mix = np.eye(p) + rng.normal(scale=0.15, size=(p, p))
    samples = {}
    for i in range(k):
        name = "ctrl" if i == 0 else f"kd_{i}"
        samples[name] = rng.normal(size=(n, p)) @ mix + rng.normal(scale=0.5, size=p)
    variables = tuple(f"V{j}" for j in range(p))
    regimes = tuple(Regime(name, () if name == "ctrl" else (variables[i % p],),
                           reference=name == "ctrl") for i, name in enumerate(samples))
    return samples, Design(variables, regimes)


def _batch(rng: np.random.Generator, m: int, p: int, l_size: int):
    picks = np.argsort(rng.random((m, p)), axis=1)[:, : l_size + 2]
    return picks[:, 0], picks[:, 1], picks[:, 2:]


def _median_time(fn, repeats: int) -> float:
    """Median wall-clock seconds of `repeats` runs."""
    return _median_times(fn, repeats)[0]


def _median_times(fn, repeats: int) -> tuple[float, float]:
    """Median wall-clock and median CPU seconds of `repeats` runs."""
    wall, cpu = [], []
    for _ in range(repeats):
        start, start_cpu = time.perf_counter(), time.process_time()
        fn()
        wall.append(time.perf_counter() - start)
        cpu.append(time.process_time() - start_cpu)
    return float(np.median(wall)), float(np.median(cpu))


def _naive_ci(samples: dict[str, np.ndarray], x, y, cond) -> None:
    """Per test and regime: OLS residuals of X and Y on [1, S], then Fisher z."""
    for i in range(len(x)):
        num = den = 0.0
        for rows in samples.values():
            design = np.column_stack([np.ones(len(rows)), rows[:, cond[i]]])
            ex = sm.OLS(rows[:, x[i]], design).fit().resid
            ey = sm.OLS(rows[:, y[i]], design).fit().resid
            m_k = len(rows) - cond.shape[1] - 3
            num += m_k * np.arctanh(np.corrcoef(ex, ey)[0, 1])
            den += m_k
        _ = num / np.sqrt(den)


def _naive_invariance(ref: np.ndarray, regime: np.ndarray, x, cond) -> None:
    """Per test: OLS log-likelihoods of the two regimes and of their union."""
    union = np.vstack([ref, regime])
    for i in range(len(x)):
        llf = [sm.OLS(rows[:, x[i]], np.column_stack([np.ones(len(rows)), rows[:, cond[i]]]))
               .fit().llf for rows in (ref, regime, union)]
        _ = 2 * (llf[0] + llf[1] - llf[2])


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--variables", type=int, default=100)
    parser.add_argument("--regimes", type=int, default=21)
    parser.add_argument("--samples", type=int, default=200, help="rows per regime")
    parser.add_argument("--tests", type=int, default=100_000, help="tests per call")
    parser.add_argument("--naive-tests", type=int, default=60,
                        help="tests per size timed with the naive method")
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--quick", action="store_true", help="10k tests, 10 naive tests")
    parser.add_argument("--no-append", action="store_true", help="do not write RESULTS.md")
    args = parser.parse_args(argv)
    if args.quick:
        args.tests, args.naive_tests = 10_000, 10

    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    samples, design = _data(args.variables, args.regimes, args.samples, seed=0)
    moments = Moments.from_samples(samples, design.variables)
    rng = np.random.default_rng(1)
    start = time.perf_counter()
    tester = GaussianTester(moments, design)
    prepare = time.perf_counter() - start

    rows = []
    for l_size in range(4):
        x, y, cond = _batch(rng, args.tests, args.variables, l_size)
        t_ci = _median_times(lambda x=x, y=y, cond=cond: tester.ci(x, y, cond), args.repeats)
        t_inv = _median_times(lambda x=x, cond=cond: tester.invariance("kd_1", x, cond),
                              args.repeats)
        k = args.naive_tests
        t_naive_ci = _median_time(
            lambda a=x[:k], b=y[:k], c=cond[:k]: _naive_ci(samples, a, b, c), 1) / k
        t_naive_inv = _median_time(
            lambda a=x[:k], c=cond[:k]: _naive_invariance(samples["ctrl"], samples["kd_1"],
                                                          a, c), 1) / k
        rows.append(("ci (Fisher z)", l_size, args.tests, t_ci, t_naive_ci))
        rows.append(("invariance (Chow + Bartlett)", l_size, args.tests, t_inv, t_naive_inv))

    header = ("| test | \\|S\\| | tests per call | median wall s | tests/s (wall) "
              "| tests/s (CPU) | naive s/test | naive tests/s | speed-up (wall) |")
    lines = [header, "|---|---|---|---|---|---|---|---|---|"]
    for kind, l_size, m, (wall, cpu), naive in rows:
        lines.append(f"| {kind} | {l_size} | {m:,} | {wall:.3f} | {m / wall:,.0f} "
                     f"| {m / cpu:,.0f} | {naive:.2e} | {1 / naive:,.0f} "
                     f"| {naive * m / wall:,.0f}x |")
    command = ("OMP_NUM_THREADS=1 python " + " ".join(["benchmarks/bench_tests.py",
                                                          *sys.argv[1:]]))
    when = datetime.datetime.now().strftime("%Y-%m-%d %H:%M")
    block = [
        f"## bench_tests: batched CI and invariance tests ({when})",
        "",
        f"- machine: {machine('numpy')}; single core (BLAS threads = 1); load average at start "
        f"{load:.1f} (other work on the machine slows the wall-clock figures; CPU = process "
        f"time)",
        f"- command: `{command}`",
        f"- p = {args.variables}, K = {args.regimes} regimes, {args.samples} rows per regime; "
        f"median of {args.repeats} runs; invariance = one regime against the reference; "
        f"naive = statsmodels OLS on raw rows per test, {args.naive_tests} tests per size, "
        f"extrapolated per test; tester set-up {prepare:.3f} s",
        "",
        *lines,
        "",
    ]
    text = "\n".join(block)
    publish(text, append=not args.no_append)
    return 0


if __name__ == "__main__":
    sys.exit(main())
