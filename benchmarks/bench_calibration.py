"""Benchmark: null rejection rates of every test, at alpha 0.01, on outside null data.

The null data sets are those of the tests (tests/nulls.py, noise from tests/generator.py):
the stratified Fisher z test of X _||_ Y | S (S common parents; K = 1 or 3 regimes with
different parameters), the invariance test of X given its parents S (S's own law shifts),
and the rank variant of both (Gaussian copula with the noise family's margins). Gaussian,
exponential and t(3) noise; 30 to 2000 samples per regime. The window of the issue is
[0.005, 0.02]; the tests (tests/test_calibration.py) require it on the grid
|S| <= 3 and report the corners beyond (|S| = 10 at 30 samples) here.

Run from the repository root::

    python benchmarks/bench_calibration.py              # 3000 data sets per cell (1500 at n=2000)
    python benchmarks/bench_calibration.py --quick      # 300 per cell, a smoke run
    python benchmarks/bench_calibration.py --test invariance --reps 10000 --seed 1
                                                        # one test's cells, more data sets
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"  # one core: the machine is shared

import argparse  # noqa: E402
import datetime  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
from scipy.stats import kstest  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))  # for `tests.generator`

from _common import load_average, machine, publish  # noqa: E402

sys.path.insert(0, str(ROOT / "tests"))  # tests/nulls.py imports `generator` by name
from nulls import pvalues  # noqa: E402

ALPHA = 0.01
WINDOW = (0.005, 0.02)
FAMILIES = ("gaussian", "exponential", "t3")
SIZES_N = (30, 100, 500, 2000)


def cells() -> list[tuple]:
    """(test, variant, family, n, |S|, K) of every cell."""
    out = []
    for family in FAMILIES:
        for n in SIZES_N:
            for size in (0, 2):
                for k in (1, 3):
                    out.append(("ci", "gaussian", family, n, size, k))
            for size in (0, 1, 3):
                out.append(("invariance", "gaussian", family, n, size, 2))
            out.append(("ci", "rank", family, n, 2, 3))
            for size in (0, 1):
                out.append(("invariance", "rank", family, n, size, 2))
        out.append(("invariance", "gaussian", family, 30, 10, 2))
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--reps", type=int, default=3000,
                        help="null data sets per cell (half of it at n = 2000)")
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--quick", action="store_true", help="300 data sets per cell")
    parser.add_argument("--test", choices=("ci", "invariance"), default=None,
                        help="only this test's cells (both variants)")
    parser.add_argument("--no-append", action="store_true", help="print only")
    args = parser.parse_args(argv)
    reps = 300 if args.quick else args.reps
    load = load_average()
    rows = []
    started = time.perf_counter()
    for i, (test, variant, family, n, size, k) in enumerate(cells()):
        if args.test is not None and test != args.test:
            continue
        pv = pvalues(test, family, n, size, regimes=k, rank=variant == "rank",
                     reps=reps if n <= 500 else reps // 2, seed=args.seed * 1000 + i)
        rate = float(np.mean(pv <= ALPHA))
        ks = float(kstest(pv, "uniform").pvalue)
        rows.append((f"{test} ({variant})", family, n, size, k, rate, ks))
        print(f"{rows[-1]}", file=sys.stderr)
    seconds = time.perf_counter() - started
    se = np.sqrt(ALPHA * (1 - ALPHA) / reps)
    lines = ["| test | noise (rank: margins) | n per regime | \\|S\\| | K | rejection rate "
             "at 0.01 | KS p | in window |", "|---|---|---|---|---|---|---|---|"]
    outside = []
    for test, family, n, l_size, k, rate, ks in rows:
        ok = WINDOW[0] <= rate <= WINDOW[1]
        lines.append(f"| {test} | {family} | {n} | {l_size} | {k} | {rate:.4f} | {ks:.3g} "
                     f"| {'yes' if ok else '**no**'} |")
        if not ok:
            outside.append((test, family, n, l_size, k, rate))
    when = datetime.datetime.now().strftime("%Y-%m-%d %H:%M")
    command = " ".join(["python benchmarks/bench_calibration.py", *sys.argv[1:]])
    block = [
        f"## bench_calibration: null rejection rates of every test ({when})",
        "",
        f"- machine: {machine('numpy', 'scipy')}; one core (BLAS threads = 1); load average "
        f"at start: {load}; {seconds:.0f} s in all",
        f"- command: `{command}`",
        f"- {reps} null data sets per cell, {reps // 2} at n = 2000 (sd of a rate at 0.01: "
        f"{se:.4f}); window "
        f"[{WINDOW[0]}, {WINDOW[1]}]; KS p: `scipy.stats.kstest` of the null p-values "
        f"against uniform",
        f"- outside the window: {len(outside)} of {len(rows)} cells",
        "",
        *lines,
        "",
    ]
    text = "\n".join(block)
    publish(text, append=not args.no_append)
    return 0


if __name__ == "__main__":
    sys.exit(main())
