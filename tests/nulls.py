"""Null data sets for the calibration of every test: p-values when the null hypothesis holds.

Each replicate is an independent block of variables of one data set, so one call of a test
handles a batch of replicates (the scatter is block-diagonal: the blocks do not interact).
Noise comes from the outside generator (tests/generator.py). The null cases:

- ``ci``: X _||_ Y | S given the regime, S the common parents of X and Y (|S| may be 0:
  X and Y independent); with K regimes the parents' law and the weights differ by regime;
- ``invariance``: the law of X given S is the same in the reference and in the regime,
  S the parents of X, whose own law shifts (mean and scale) in the regime; with S empty,
  X's law is the same.

`pvalues` returns the p-values of the package's tests on them, Gaussian or rank variant.
The Gaussian tests are checked on linear models with the noise family's errors; the rank
variant on the model it is built for, a Gaussian copula (nonparanormal model: a linear
Gaussian model whose variables are each turned by a fixed increasing map into the noise
family's marginal law), with the parents' law shifting by half a standard deviation and
their spread by a fifth (the anchoring to the reference maps values beyond the
reference's range by a straight line).
"""

from __future__ import annotations

import numpy as np
from generator import noise as draw
from scipy import stats

from pipeline.independence.fisher_z import fisher_z
from pipeline.independence.invariance import regime_pair
from pipeline.stats.moments import Moments
from pipeline.stats.ranks import rank_moments

__all__ = ["pvalues", "BATCH"]

#: Replicates per batch (one call of a test).
BATCH = 100


def _ci_block(family, n, size, regime, reps, rng):
    """(n, reps * (size + 2)) rows: per replicate X, Y, S with X, Y children of S only."""
    q = size + 2
    out = np.empty((n, reps, q))
    s = draw(family, (n, reps, size), rng) * (1.0 + 0.5 * regime) + 1.5 * regime
    a = np.linspace(0.6, 1.2, size) * (1 if regime % 2 == 0 else -1)
    b = np.linspace(-1.0, 0.7, size)
    out[:, :, 2:] = s
    out[:, :, 0] = s @ a + draw(family, (n, reps), rng)
    out[:, :, 1] = s @ b + draw(family, (n, reps), rng) * (1.0 + 0.3 * regime)
    return out.reshape(n, reps * q)


def _invariance_block(family, n, size, shifted, reps, rng, shift=(2.0, 1.5)):
    """(n, reps * (size + 1)) rows: per replicate X and its parents S; S shifts if `shifted`."""
    q = size + 1
    out = np.empty((n, reps, q))
    s = draw(family, (n, reps, size), rng)
    if shifted:
        s = s * shift[1] + shift[0]
    w = np.linspace(0.5, 1.5, size) * np.where(np.arange(size) % 2, -1.0, 1.0)
    out[:, :, 1:] = s
    out[:, :, 0] = 1.0 + s @ w + draw(family, (n, reps), rng)
    return out.reshape(n, reps * q)


#: Increasing maps from a standard normal to each family's marginal law (unit variance).
_MARGINS = {"gaussian": lambda z: z,
            "exponential": lambda z: stats.expon.ppf(stats.norm.cdf(z)) - 1.0,
            "t3": lambda z: stats.t.ppf(stats.norm.cdf(z), 3) / np.sqrt(3.0),
            "uniform": lambda z: (stats.norm.cdf(z) - 0.5) * np.sqrt(12.0)}


def _copula(blocks: dict[str, np.ndarray], family: str) -> dict[str, np.ndarray]:
    """Each variable of Gaussian blocks turned into `family`'s marginal by one fixed map,
    the same in every regime (scaled by the reference's sd so the map is not trivial)."""
    f = _MARGINS[family]
    return {k: f(v) for k, v in blocks.items()}


def _moments(blocks: dict[str, np.ndarray], variables, rank: bool, reference: str):
    if not rank:
        return Moments.from_samples(blocks, variables)
    names = list(blocks)
    codes = np.concatenate([np.full(len(v), k) for k, v in enumerate(blocks.values())])
    return rank_moments(codes, np.vstack(list(blocks.values())), variables, names,
                        [names.index(reference)])


def pvalues(test: str, family: str, n: int, size: int, *, regimes: int = 1, reps: int = 1000,
            rank: bool = False, seed: int = 0) -> np.ndarray:
    """Null p-values of `reps` replicates of one test.

    Parameters
    ----------
    test : {"ci", "invariance"}
    family : noise family of tests/generator.py
    n : samples per regime
    size : |S|
    regimes : K, for ``ci`` (the invariance test compares two regimes)
    rank : the rank variant (`pipeline.stats.ranks.rank_moments`) instead of the values
    """
    rng = np.random.default_rng(seed)
    out = []
    for start in range(0, reps, BATCH):
        g = min(BATCH, reps - start)
        source = "gaussian" if rank else family
        if test == "ci":
            q = size + 2
            blocks = {f"r{k}": _ci_block(source, n, size, k, g, rng) for k in range(regimes)}
            if rank:
                blocks = _copula(blocks, family)
            base = q * np.arange(g)
            x, y = base, base + 1
            cond = (base[:, None] + 2 + np.arange(size)[None, :]).astype(np.intp)
            variables = tuple(f"v{i}" for i in range(g * q))
            moments = _moments(blocks, variables, rank, "r0")
            out.append(fisher_z(moments, x, y, cond.reshape(g, size)).pvalue)
        elif test == "invariance":
            q = size + 1
            shift = (0.5, 1.2) if rank else (2.0, 1.5)
            blocks = {"ref": _invariance_block(source, n, size, False, g, rng, shift),
                      "k": _invariance_block(source, n, size, True, g, rng, shift)}
            if rank:
                blocks = _copula(blocks, family)
            base = q * np.arange(g)
            cond = (base[:, None] + 1 + np.arange(size)[None, :]).astype(np.intp)
            variables = tuple(f"v{i}" for i in range(g * q))
            moments = _moments(blocks, variables, rank, "ref")
            pair = regime_pair(moments, ["ref"], "k")
            out.append(pair.test(base.astype(np.intp), cond.reshape(g, size)).pvalue)
        else:
            raise ValueError(f"test {test!r}: expected 'ci' or 'invariance'")
    return np.concatenate(out)
