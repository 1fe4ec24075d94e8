"""Benchmark: power of the invariance test on a change of the residual spread alone.

Data as in the null cells of bench_calibration (tests/nulls.py: X = 1 + S w + e, S the
parents of X with their own law shifted in the regime), but the regime multiplies the
residual e by a factor (sd x1.3, x1.5): the coefficients stay, so only the variance part
of the test can see the change. Noise from tests/generator.py (Gaussian and t(3)); 100 and
500 samples per regime; |S| = 0 and 3. Reports the rejection rate at alpha = 0.01 of the
whole test (Chow's F and the variance test joined), beside its null rate on the same
cells (factor 1), so that calibration is not bought with a useless test.

Run from the repository root::

    python benchmarks/bench_invariance_power.py              # 2000 data sets per cell
    python benchmarks/bench_invariance_power.py --quick      # 300 per cell
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

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from _common import load_average, machine, publish  # noqa: E402

sys.path.insert(0, str(ROOT / "tests"))  # tests/generator.py, imported by name
from generator import noise  # noqa: E402

from pipeline.independence.invariance import regime_pair  # noqa: E402
from pipeline.stats.moments import Moments  # noqa: E402

ALPHA = 0.01
BATCH = 100
FAMILIES = ("gaussian", "t3")
SIZES_N = (100, 500)
SIZES_S = (0, 3)
FACTORS = (1.0, 1.3, 1.5)


def _block(family: str, n: int, size: int, regime: bool, factor: float, reps: int,
           rng: np.random.Generator) -> np.ndarray:
    """(n, reps * (size + 1)) rows: per data set X and its parents S."""
    s = noise(family, (n, reps, size), rng)
    if regime:
        s = s * 1.5 + 2.0
    w = np.linspace(0.5, 1.5, size) * np.where(np.arange(size) % 2, -1.0, 1.0)
    e = noise(family, (n, reps), rng) * (factor if regime else 1.0)
    out = np.concatenate([(1.0 + s @ w + e)[:, :, None], s], axis=2)
    return out.reshape(n, reps * (size + 1))


def rejection_rate(family: str, n: int, size: int, factor: float, reps: int,
                   seed: int) -> float:
    """Share of `reps` data sets whose invariance test rejects at `ALPHA`."""
    rng = np.random.default_rng(seed)
    q = size + 1
    hits = 0
    for start in range(0, reps, BATCH):
        g = min(BATCH, reps - start)
        blocks = {"ref": _block(family, n, size, False, factor, g, rng),
                  "k": _block(family, n, size, True, factor, g, rng)}
        moments = Moments.from_samples(blocks, tuple(f"v{i}" for i in range(g * q)))
        base = (q * np.arange(g)).astype(np.intp)
        cond = (base[:, None] + 1 + np.arange(size)[None, :]).astype(np.intp)
        p = regime_pair(moments, ["ref"], "k").test(base, cond)
        hits += int(np.sum(p.pvalue <= ALPHA))
    return hits / reps


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--reps", type=int, default=2000, help="data sets per cell")
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--quick", action="store_true", help="300 data sets per cell")
    parser.add_argument("--no-append", action="store_true", help="print only")
    args = parser.parse_args(argv)
    reps = 300 if args.quick else args.reps
    load = load_average()
    started = time.perf_counter()
    lines = ["| noise | n per regime | \\|S\\| | " + " | ".join(
        f"sd x{f:g}" + (" (null)" if f == 1.0 else "") for f in FACTORS) + " |",
        "|---|---|---|" + "---|" * len(FACTORS)]
    i = 0
    for family in FAMILIES:
        for n in SIZES_N:
            for size in SIZES_S:
                rates = []
                for factor in FACTORS:
                    rates.append(rejection_rate(family, n, size, factor, reps,
                                                seed=args.seed * 1000 + i))
                    i += 1
                lines.append(f"| {family} | {n} | {size} | "
                             + " | ".join(f"{r:.3f}" for r in rates) + " |")
                print(lines[-1], file=sys.stderr)
    seconds = time.perf_counter() - started
    when = datetime.datetime.now().strftime("%Y-%m-%d %H:%M")
    command = " ".join(["python benchmarks/bench_invariance_power.py", *sys.argv[1:]])
    block = [
        f"## bench_invariance_power: rejection rate of the invariance test on a change of "
        f"the residual spread ({when})",
        "",
        f"- machine: {machine('numpy', 'scipy')}; one core (BLAS threads = 1); load average "
        f"at start: {load}; {seconds:.0f} s in all",
        f"- command: `{command}`",
        f"- {reps} data sets per cell; alpha {ALPHA}; the regime multiplies the residual sd "
        f"by the factor (coefficients unchanged; the parents' law shifts as in the null cells)",
        "",
        *lines,
        "",
    ]
    publish("\n".join(block), append=not args.no_append)
    return 0


if __name__ == "__main__":
    sys.exit(main())
