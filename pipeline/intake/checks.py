"""Checks of the sufficient statistics before any test runs.

Errors (the tests would be meaningless or fail numerically): a variable constant over
all the data, two variables perfectly collinear, a variable constant within every
regime, and a set of variables linearly dependent within the regimes (a singular
within-regime pooled covariance). Warnings: a regime with few samples, and a variable
constant within one regime (a complete knockout: that regime is left out of the tests
involving it, METHODS.md section 3).

"Constant" uses the rule of :meth:`pipeline.stats.moments.Moments.constant`, so the
warnings match what the tests leave out. "Perfectly collinear" means a correlation whose
distance from +-1 is below `COLLINEAR_TOL` (rounding noise of numbers written with six
significant digits stays well below it; no real measurement pair comes that close).
"""

from __future__ import annotations

import numpy as np

from pipeline.errors import InputError
from pipeline.stats.moments import Moments

__all__ = ["check_statistics", "MIN_SAMPLES", "COLLINEAR_TOL"]

#: A regime with fewer samples is warned about (tests need n_k > |S| + 3).
MIN_SAMPLES = 10
#: Correlations with 1 - |r| below this (or a smallest eigenvalue of the correlation
#: matrix below it) count as perfect collinearity.
COLLINEAR_TOL = 1e-10


def _names(variables: tuple[str, ...], idx) -> str:
    return ", ".join(variables[i] for i in idx)


def check_statistics(moments: Moments, *, min_samples: int = MIN_SAMPLES) -> list[str]:
    """Check the statistics of the intake; return the warnings.

    Parameters
    ----------
    moments : Moments
        Per-regime statistics; every regime has at least one row.
    min_samples : int
        Regimes with fewer rows are warned about.

    Returns
    -------
    list of str
        Warnings (few samples, variables constant within a regime).

    Raises
    ------
    InputError
        Constant variables, perfectly collinear pairs, variables constant within every
        regime, or a set of variables linearly dependent within the regimes.
    """
    variables = moments.variables
    p = len(variables)
    # 0. numbers too large to square (the scatter overflowed)
    with np.errstate(over="ignore", invalid="ignore"):
        n, mean, scatter = moments.pooled(moments.regimes)
    huge = np.flatnonzero(~np.isfinite(np.diagonal(moments.scatter, axis1=1, axis2=2)).all(axis=0)
                          | ~np.isfinite(np.diag(scatter)))
    if huge.size:
        raise InputError(f"variable(s) {_names(variables, huge)} have values too large to "
                         f"compute with (their squares overflow); rescale them (e.g. change "
                         f"the unit)")
    # 1. constant over all the data
    total = Moments(variables, ("all",), np.array([n]), mean[None], scatter[None])
    const = np.flatnonzero(total.constant()[0])
    if const.size:
        raise InputError(f"variable(s) {_names(variables, const)} are constant over all the data: "
                         f"they carry no information; pass --ignore-columns "
                         f"{','.join(variables[i] for i in const)}")
    # 2. perfectly collinear pairs over all the data
    d = np.sqrt(np.diag(scatter))
    corr = scatter / np.outer(d, d)
    close = np.argwhere(np.triu(1.0 - np.abs(corr) < COLLINEAR_TOL, k=1))
    if close.size:
        pairs = "; ".join(f"{variables[i]} and {variables[j]}" for i, j in close[:5])
        i, j = close[0]
        raise InputError(f"variables {pairs} are perfectly collinear (correlation "
                         f"{corr[i, j]:+.10f}): one of each pair is redundant; pass "
                         f"--ignore-columns {variables[j]}")
    # 3. constant within every regime (varies only between regimes, like a dose label)
    within = moments.scatter.sum(axis=0)
    usable = moments.count >= 2
    const_k = moments.constant()
    everywhere = np.flatnonzero(const_k[usable].all(axis=0)) if usable.any() \
        else np.arange(p)
    if everywhere.size:
        raise InputError(f"variable(s) {_names(variables, everywhere)} are constant within every "
                         f"regime (they only label the regimes): no test can use them; pass "
                         f"--ignore-columns {','.join(variables[i] for i in everywhere)}")
    # 4. linear dependence within the regimes (singular pooled within-regime covariance)
    dof = int(moments.count.sum()) - int((moments.count > 0).sum())
    if dof < p:
        raise InputError(f"too few samples: {int(moments.count.sum())} rows in "
                         f"{int((moments.count > 0).sum())} regimes leave {dof} degrees of "
                         f"freedom within the regimes for {p} variables (at least {p} are "
                         f"needed); add samples or leave variables out with --ignore-columns")
    if p > 1:
        dw = np.sqrt(np.diag(within))
        cw = within / np.outer(dw, dw)
        evals, evecs = np.linalg.eigh(cw)
        if evals[0] < COLLINEAR_TOL * p:
            v = np.abs(evecs[:, 0])
            members = np.flatnonzero(v > 0.05 * v.max())
            raise InputError(f"variables {_names(variables, members)} are linearly dependent "
                             f"within the regimes (one is a weighted sum of the others): one of "
                             f"them is redundant; pass --ignore-columns {variables[members[-1]]}")
    # 5. warnings
    warnings: list[str] = []
    for k, name in enumerate(moments.regimes):
        if moments.count[k] < min_samples:
            warnings.append(f"regime '{name}' has only {int(moments.count[k])} samples (fewer "
                            f"than {min_samples}); tests need more samples than the conditioning "
                            f"set size + 3, so it adds little or is left out")
    for k, j in np.argwhere(const_k & (moments.count >= 2)[:, None]):
        warnings.append(f"variable '{variables[j]}' is constant within regime "
                        f"'{moments.regimes[k]}' (a complete knockout?): that regime is left "
                        f"out of the tests involving it")
    return warnings
