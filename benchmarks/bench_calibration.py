"""Benchmark: null calibration of every test the package has, on outside null data.

For each test, noise family (Gaussian, centred exponential, t3 scaled to unit variance;
drawn with `tests.generator.noise`) and rows per regime n in {30, 100, 500, 2000}, many
independent null data sets are drawn, the test is run on each, and the table shows the
rejection rate at alpha = 0.01 and the p-value of a Kolmogorov-Smirnov test that the
null p-values are uniform (`scipy.stats.kstest`). A calibrated test rejects in about 1%
of the data sets (the acceptance window is [0.005, 0.02]) and has a KS p-value that is
not small.

The tests:

(a) ``fisher_z``: the stratified Fisher z test of X _||_ Y | S on `Moments.from_samples`
    statistics; |S| = 0 (X, Y independent) and |S| = 2 (S = two common parents of X and
    Y); K = 1 or 3 regimes, each regime with its own weights, intercepts and scales.
(b) ``invariance``: the likelihood-ratio invariance test (`invariance_test`) of X between
    the reference and one regime; S empty (X has one law in both) and S = the parents of
    X (|S| = 1, 3, 10), whose law (mean and sd) shifts between the regimes while X | S
    does not.
(c) ``rank``: the rank variant as ``--test rank`` builds it today (normal scores of the
    ranks POOLED over all regimes, then per-regime statistics), K = 3 regimes whose means
    differ: the Fisher z test of X _||_ Y | S (|S| = 0, 1, 2: S common parents whose
    mean shifts by regime), and the invariance test of X given S (|S| = 0, 1) of regime
    2 against regime 1 (the reference), S shifting.

Batching: the replicates of one cell are independent blocks of variables of one data
set, so one call of the test handles a batch of them (the scatter is block-diagonal;
each block is the centred scatter of one replicate).

Run from the repository root::

    python benchmarks/bench_calibration.py              # 2000 data sets per cell
    python benchmarks/bench_calibration.py --quick      # 300 per cell, a smoke run
    python benchmarks/bench_calibration.py --reps 5000 --test fisher_z
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
from types import SimpleNamespace  # noqa: E402

import numpy as np  # noqa: E402
from scipy.stats import kstest  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))  # for `tests.generator`

from _common import append_results, load_average, machine  # noqa: E402

from tests.generator import noise  # noqa: E402


def project() -> SimpleNamespace:
    """The project functions this benchmark uses (module paths may move; see DEVELOPERS.md)."""
    from pipeline.independence.fisher_z import fisher_z
    from pipeline.independence.invariance import invariance_test
    from pipeline.stats.moments import Moments
    from pipeline.stats.ranks import normal_scores

    return SimpleNamespace(fisher_z=fisher_z, invariance_test=invariance_test, Moments=Moments,
                           normal_scores=normal_scores)


ALPHA = 0.01
WINDOW = (0.005, 0.02)
NOISES = ("gaussian", "exponential", "t3")
SIZES = (30, 100, 500, 2000)
#: Variables per test call (replicates x block size), bounds the block-diagonal scatter.
MAX_VARIABLES = 1000


# -- data and statistics ------------------------------------------------------------------------
def _weights(rng, shape) -> np.ndarray:
    return rng.uniform(0.5, 1.5, shape) * rng.choice([-1.0, 1.0], shape)


def _moments(api, blocks: list[np.ndarray]):
    """Moments of K regimes from (n_k, R, q) arrays of R independent replicate blocks."""
    k = len(blocks)
    _, r, q = blocks[0].shape
    p = r * q
    count = np.array([b.shape[0] for b in blocks], dtype=np.int64)
    mean = np.stack([b.mean(axis=0).reshape(p) for b in blocks])
    scatter = np.zeros((k, p, p))
    base = (np.arange(r) * q)[:, None, None]
    rows = base + np.arange(q)[None, :, None]
    cols = base + np.arange(q)[None, None, :]
    for i, b in enumerate(blocks):
        d = b - b.mean(axis=0)
        scatter[i][rows, cols] = np.einsum("nri,nrj->rij", d, d)
    names = tuple(f"v{j}" for j in range(p))
    return api.Moments(names, tuple(f"k{i}" for i in range(k)), count, mean, scatter)


def _ci_blocks(rng, family: str, n: int, r: int, l_size: int, k: int,
               mean_shift: float = 0.0) -> list[np.ndarray]:
    """Blocks [X, Y, S1..Sl]: S independent, X and Y children of S, X _||_ Y | S in every
    regime; every regime draws its own weights, intercepts and scales (S means also
    shifted by ``mean_shift * regime``)."""
    out = []
    for j in range(k):
        s = (rng.uniform(-1, 1, (r, l_size)) + mean_shift * j
             + rng.uniform(0.5, 2.0, (r, l_size)) * noise(family, (n, r, l_size), rng))
        xy = (rng.uniform(-1, 1, (r, 2)) + mean_shift * j
              + rng.uniform(0.5, 2.0, (r, 2)) * noise(family, (n, r, 2), rng))
        if l_size:
            xy = xy + np.einsum("nrl,rlc->nrc", s, _weights(rng, (r, l_size, 2)))
        out.append(np.concatenate([xy, s], axis=2))
    return out


def _inv_blocks(rng, family: str, n: int, r: int, l_size: int) -> list[np.ndarray]:
    """Blocks [X, S1..Sl] of a reference and one regime: S's mean and sd shift, X | S and
    (with S empty) X's law stay."""
    w = _weights(rng, (r, l_size))
    c, scale = rng.uniform(-1, 1, r), rng.uniform(0.5, 2.0, r)
    mu, sd = rng.uniform(-1, 1, (r, l_size)), rng.uniform(0.5, 2.0, (r, l_size))
    out = []
    for j in range(2):
        s = (mu + j * 1.0) + (sd * (1.0 + 0.5 * j)) * noise(family, (n, r, l_size), rng)
        x = c + scale * noise(family, (n, r), rng)
        if l_size:
            x = x + np.einsum("nrl,rl->nr", s, w)
        out.append(np.concatenate([x[:, :, None], s], axis=2))
    return out


def _ranked(api, blocks: list[np.ndarray]) -> list[np.ndarray]:
    """Normal scores of the ranks pooled over all regimes, as ``--test rank`` reads them."""
    sizes = [b.shape[0] for b in blocks]
    _, r, q = blocks[0].shape
    scores = api.normal_scores(np.concatenate(blocks).reshape(sum(sizes), r * q))
    return [s.reshape(-1, r, q) for s in np.split(scores, np.cumsum(sizes)[:-1])]


def _ci_pvalues(api, blocks) -> np.ndarray:
    _, r, q = blocks[0].shape
    m = _moments(api, blocks)
    base = np.arange(r) * q
    cond = base[:, None] + 2 + np.arange(q - 2)[None, :]
    return api.fisher_z(m, base, base + 1, cond).pvalue


def _inv_pvalues(api, blocks) -> np.ndarray:
    _, r, q = blocks[0].shape
    m = _moments(api, blocks)
    base = np.arange(r) * q
    cond = base[:, None] + 1 + np.arange(q - 1)[None, :]
    return api.invariance_test(m.count[0], m.mean[0], m.scatter[0], m.count[1], m.mean[1],
                             m.scatter[1], base, cond).pvalue


# -- cells ---------------------------------------------------------------------------------------
def cells(tests: list[str]) -> list[tuple]:
    """(test, noise, n, |S|, K) of every cell."""
    out = []
    for family in NOISES:
        for n in SIZES:
            if "fisher_z" in tests:
                out += [("fisher_z", family, n, l_size, k) for l_size in (0, 2) for k in (1, 3)]
            if "invariance" in tests:
                out += [("invariance", family, n, l_size, 2) for l_size in (0, 1, 3, 10)]
            if "rank" in tests:
                out += [("rank fisher_z", family, n, l_size, 3) for l_size in (0, 1, 2)]
                out += [("rank invariance", family, n, l_size, 3) for l_size in (0, 1)]
    return out


def run_cell(api, cell: tuple, reps: int, rng) -> np.ndarray:
    test, family, n, l_size, k = cell
    q = l_size + (1 if "invariance" in test else 2)
    batch = max(1, MAX_VARIABLES // q)
    pvalues = []
    done = 0
    while done < reps:
        r = min(batch, reps - done)
        if test == "fisher_z":
            pv = _ci_pvalues(api, _ci_blocks(rng, family, n, r, l_size, k))
        elif test == "invariance":
            pv = _inv_pvalues(api, _inv_blocks(rng, family, n, r, l_size))
        elif test == "rank fisher_z":
            pv = _ci_pvalues(api, _ranked(api, _ci_blocks(rng, family, n, r, l_size, k,
                                                           mean_shift=1.0)))
        else:  # rank invariance: regimes 0 (reference) and 1 of three, ranks pooled over 3
            blocks = _inv_blocks(rng, family, n, r, l_size)
            third = _inv_blocks(rng, family, n, r, l_size)[1] + 1.0
            pv = _inv_pvalues(api, _ranked(api, [*blocks, third])[:2])
        pvalues.append(pv)
        done += r
    return np.concatenate(pvalues)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--reps", type=int, default=2000, help="null data sets per cell")
    parser.add_argument("--test", nargs="+", choices=["fisher_z", "invariance", "rank"],
                        default=["fisher_z", "invariance", "rank"])
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--quick", action="store_true", help="300 data sets per cell")
    parser.add_argument("--no-append", action="store_true", help="print only")
    args = parser.parse_args(argv)
    reps = 300 if args.quick else args.reps
    load = load_average()
    api = project()
    rng = np.random.default_rng(args.seed)
    rows = []
    started = time.perf_counter()
    for cell in cells(args.test):
        pv = run_cell(api, cell, reps, rng)
        rate = float(np.mean(pv <= ALPHA))
        ks = float(kstest(pv, "uniform").pvalue)
        rows.append((*cell, rate, ks))
        print(f"{cell}: {rate:.4f} {ks:.3g}", file=sys.stderr)
    seconds = time.perf_counter() - started
    se = np.sqrt(ALPHA * (1 - ALPHA) / reps)
    lines = ["| test | noise | n per regime | \\|S\\| | K | rejection rate at 0.01 | KS p "
             "| in window |", "|---|---|---|---|---|---|---|---|"]
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
        f"- {reps} null data sets per cell (sd of a rate at 0.01: {se:.4f}); window "
        f"[{WINDOW[0]}, {WINDOW[1]}]; KS p: `scipy.stats.kstest` of the null p-values "
        f"against uniform",
        f"- outside the window: {len(outside)} of {len(rows)} cells",
        "",
        *lines,
        "",
    ]
    text = "\n".join(block)
    print(text)
    if not args.no_append:
        print(f"appended to {append_results(text).name}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
