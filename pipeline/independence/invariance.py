"""Invariance tests: is the law of X given S the same in a regime and in the reference?

An intervention node ``F_k`` is independent of a measured variable X given S when the
conditional law of X given S is the same in regime k and in the reference. Under a
linear Gaussian model that law is the regression of X on S with intercept, so the test
is the likelihood-ratio test of equal intercept, coefficients and residual variance
(a Chow-type test with the variance included; Chow 1960, Wilks 1938):

    LR = n log s2_pooled - n_ref log s2_ref - n_k log s2_k,

with ``s2`` the maximum-likelihood residual variances (residual sum of squares over n)
of the separate fits and of one fit to the two regimes together (``n = n_ref + n_k``).
Under the null, LR is asymptotically chi-square with ``|S| + 2`` degrees of freedom
(``|S| + 1`` coefficients and one variance). With S empty it compares the mean and the
variance of X. Everything is read from the sufficient statistics: the residual sum of
squares is ``S_xx - S_xS S_SS^-1 S_Sx`` of the centred scatter, and the pooled scatter
is the merge of the two (``merge_moments``).

The marginal tests (S empty) of every variable in every regime form the response
matrix (`response_matrix`), reported with the standardized mean shift.

Example
-------
>>> import numpy as np
>>> from pipeline.stats.moments import merge_moments
>>> rng = np.random.default_rng(0)
>>> ref, kd = rng.normal(size=(300, 2)), rng.normal(size=(300, 2)) + [0.0, 1.0]
>>> stats = [(len(a), a.mean(0), (a - a.mean(0)).T @ (a - a.mean(0))) for a in (ref, kd)]
>>> res = invariance_lr(*stats[0], *stats[1], x=[0, 1], cond=np.zeros((2, 0), int))
>>> bool(res.pvalue[0] > 0.01), bool(res.pvalue[1] < 1e-6)
(True, True)

References
----------
1. G. C. Chow (1960). Tests of equality between sets of coefficients in two linear
   regressions. Econometrica 28, 591-605.
2. S. S. Wilks (1938). The large-sample distribution of the likelihood ratio for
   testing composite hypotheses. Annals of Mathematical Statistics 9, 60-62.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.special import chdtrc

from pipeline.design import Design
from pipeline.errors import InputError
from pipeline.independence.base import TestResults
from pipeline.independence.fisher_z import (
    _TOL,
    _check_tests,
    _chunks,
    _correlation_flat,
    _eliminate,
)
from pipeline.independence.multiplicity import benjamini_hochberg
from pipeline.stats.moments import Moments, merge_moments

__all__ = ["invariance_lr", "response_matrix", "ResponseMatrix", "standardized_difference"]

#: A variable whose variance is below this fraction of its scale counts as constant
#: (the same rule as ``Moments.constant``).
_RTOL_CONSTANT = 1e-12


class _Pair:
    """A regime and the reference (and their union), prepared for many batches."""

    def __init__(self, n_ref: int, mean_ref: np.ndarray, scatter_ref: np.ndarray,
                 n_k: int, mean_k: np.ndarray, scatter_k: np.ndarray) -> None:
        n_all, mean_all, scatter_all = merge_moments(n_ref, mean_ref, scatter_ref,
                                                     n_k, mean_k, scatter_k)
        self.n = np.array([n_ref, n_k, n_all], dtype=float)
        scatter = np.stack([scatter_ref, scatter_k, scatter_all]).astype(float)
        mean = np.stack([mean_ref, mean_k, mean_all]).astype(float)
        self.p = scatter.shape[1]
        diag = np.diagonal(scatter, axis1=1, axis2=2)
        var = diag / np.maximum(self.n - 1, 1)[:, None]
        scale = np.maximum(mean**2, var.max(axis=0, keepdims=True))
        const = var <= _RTOL_CONSTANT * np.maximum(scale, np.finfo(float).tiny)
        self.const_t = np.ascontiguousarray(const.T)  # (p, 3)
        self.sxx_t = np.ascontiguousarray(diag.T)  # (p, 3)
        self.flat = _correlation_flat(scatter, const)

    def test(self, x: np.ndarray, cond: np.ndarray) -> TestResults:
        """LR tests of validated batch arrays."""
        m, l_size = x.shape[0], cond.shape[1]
        stat = np.empty(m)
        for sl in _chunks(m, 3):
            xs = x[sl]
            # residual variance in correlation units (1 - R^2), then ML variance
            rss = _eliminate(self.flat, self.p, [xs], cond[sl])[0, 0]
            zero = self.const_t[xs] | (rss <= _TOL)
            s2 = np.where(zero, 1.0, rss * self.sxx_t[xs] / self.n)
            with np.errstate(divide="ignore", invalid="ignore"):
                lr = self.n[2] * np.log(s2[:, 2]) - (self.n[:2] * np.log(s2[:, :2])).sum(axis=1)
            lr = np.maximum(lr, 0.0)
            # a variance collapsed to zero on one side only is a shift
            shift = (zero[:, 0] | zero[:, 1]) & ~zero[:, 2]
            lr[shift] = np.inf
            lr[zero[:, 2]] = 0.0
            stat[sl] = lr
        pvalue = chdtrc(l_size + 2, stat)
        # too few samples to estimate |S| + 1 coefficients and a variance: untestable
        if min(self.n[0], self.n[1]) < l_size + 2:
            stat[:] = np.nan
            pvalue[:] = 1.0
        return TestResults(statistic=stat, pvalue=pvalue)


def invariance_lr(n_ref: int, mean_ref: np.ndarray, scatter_ref: np.ndarray,
                  n_k: int, mean_k: np.ndarray, scatter_k: np.ndarray,
                  x: np.ndarray, cond: np.ndarray) -> TestResults:
    """Likelihood-ratio tests that the regression of ``x[i]`` on ``cond[i]`` is invariant.

    Parameters
    ----------
    n_ref, mean_ref, scatter_ref : int, array (p,), array (p, p)
        Count, mean and centred scatter of the reference.
    n_k, mean_k, scatter_k : int, array (p,), array (p, p)
        The same for the regime tested.
    x : int array (m,)
        Response variable of each test.
    cond : int array (m, l)
        Regressors of each test, all of one size ``l`` (may be 0).

    Returns
    -------
    TestResults
        ``statistic`` is LR, ``pvalue`` its chi-square tail with ``l + 2`` degrees of
        freedom. A residual variance that is zero on one side and not in the union is a
        shift (LR = inf, p = 0); zero everywhere gives LR = 0, p = 1. With fewer than
        ``l + 2`` samples on either side the test cannot be done: LR = nan, p = 1.

    Raises
    ------
    ValueError
        If the moments have inconsistent shapes or an index is out of range or repeated
        within a test.
    """
    mean_ref, mean_k = np.asarray(mean_ref, dtype=float), np.asarray(mean_k, dtype=float)
    scatter_ref = np.asarray(scatter_ref, dtype=float)
    scatter_k = np.asarray(scatter_k, dtype=float)
    p = mean_ref.shape[0]
    for name, arr, shape in (("mean_k", mean_k, (p,)), ("scatter_ref", scatter_ref, (p, p)),
                             ("scatter_k", scatter_k, (p, p))):
        if arr.shape != shape:
            raise ValueError(f"{name}: expected shape {shape} (p = {p} from mean_ref), "
                             f"got {arr.shape}")
    x, _, cond = _check_tests(p, x, None, cond)
    pair = _Pair(int(n_ref), mean_ref, scatter_ref, int(n_k), mean_k, scatter_k)
    return pair.test(x, cond)


@dataclass
class ResponseMatrix:
    """Marginal response of every variable to every non-reference regime.

    Attributes
    ----------
    regimes : tuple of str, length R
        The non-reference regimes, in design order.
    variables : tuple of str, length p
    shift : array (R, p)
        Standardized mean shift ``(mean_k - mean_ref) / sd_ref`` (sd of the pooled
        reference, ddof 1); +-inf when the reference is constant and the mean moved.
    statistic : array (R, p)
        Statistic of the marginal invariance test (mean and variance).
    pvalue : array (R, p)
    sd_ratio : array (R, p)
        ``sd_k / sd_ref``: the effect on the spread (inf when the reference is constant).
    adjusted : array (R, p)
        Benjamini-Hochberg adjusted p-values over the whole matrix.
    """

    regimes: tuple[str, ...]
    variables: tuple[str, ...]
    shift: np.ndarray
    pvalue: np.ndarray
    statistic: np.ndarray
    sd_ratio: np.ndarray | None = None
    adjusted: np.ndarray | None = None

    def __post_init__(self) -> None:
        shape = np.shape(self.pvalue)
        if self.sd_ratio is None:
            self.sd_ratio = np.full(shape, np.nan)
        if self.adjusted is None:
            self.adjusted = benjamini_hochberg(self.pvalue)

    def shifted(self, alpha: float) -> np.ndarray:
        """(R, p) mask of the variables whose marginal law moved (raw p <= alpha)."""
        return self.pvalue <= alpha

    def marked(self, alpha: float) -> np.ndarray:
        """(R, p) mask of the responses reported as moved (adjusted p <= alpha)."""
        return self.adjusted <= alpha

    def to_frame(self) -> pd.DataFrame:
        """Long format: one row per (regime, variable)."""
        r, p = len(self.regimes), len(self.variables)
        return pd.DataFrame({
            "regime": np.repeat(np.asarray(self.regimes, dtype=object), p),
            "variable": np.tile(np.asarray(self.variables, dtype=object), r),
            "shift": self.shift.ravel(),
            "sd_ratio": self.sd_ratio.ravel(),
            "statistic": self.statistic.ravel(),
            "pvalue": self.pvalue.ravel(),
            "adjusted": self.adjusted.ravel(),
        })

    def summary(self, top: int = 20) -> str:
        """A plain-text table of the largest responses (by p-value, then |shift|)."""
        frame = self.to_frame()
        frame = frame.assign(_abs=frame["shift"].abs()).sort_values(
            ["pvalue", "_abs"], ascending=[True, False]).drop(columns="_abs")
        head = (f"Response matrix: {len(self.regimes)} regimes x {len(self.variables)} "
                f"variables (marginal invariance test against the reference)")
        return head + "\n" + frame.head(top).to_string(index=False, float_format="%.3g")


def response_matrix(moments: Moments, design: Design) -> ResponseMatrix:
    """Standardized shift and marginal invariance p-value of every variable in every regime.

    Parameters
    ----------
    moments : Moments
        Per-regime sufficient statistics; must hold every regime of `design`.
    design : Design
        Names the reference (pooled) and the non-reference regimes.

    Returns
    -------
    ResponseMatrix

    Raises
    ------
    InputError
        If the design has no reference regime.
    ValueError
        If a regime of the design is missing from `moments` or the variables differ.
    """
    ref_names = [r.name for r in design.reference]
    if not ref_names:
        raise InputError("regimes: no reference (control) regime; give a regime with empty "
                         "targets or name one with --reference REGIME")
    _check_design(moments, design)
    n_ref, mean_ref, scatter_ref = moments.pooled(ref_names)
    p = len(moments.variables)
    sd_ref = np.sqrt(np.diagonal(scatter_ref) / max(n_ref - 1, 1))
    names = tuple(r.name for r in design.interventional)
    shift = np.zeros((len(names), p))
    ratio = np.ones((len(names), p))
    stat = np.zeros((len(names), p))
    pval = np.ones((len(names), p))
    every = np.arange(p)
    sds = np.sqrt(moments.variances())
    for i, name in enumerate(names):
        k = moments.index(name)
        shift[i] = standardized_difference(moments.mean[k] - mean_ref, sd_ref)
        ratio[i] = standardized_difference(sds[k], sd_ref, zero=1.0)
        res = _Pair(n_ref, mean_ref, scatter_ref, int(moments.count[k]), moments.mean[k],
                    moments.scatter[k]).test(every, np.zeros((p, 0), dtype=np.intp))
        stat[i], pval[i] = res.statistic, res.pvalue
    return ResponseMatrix(names, tuple(moments.variables), shift, pval, stat,
                          sd_ratio=ratio)


def standardized_difference(diff: np.ndarray, sd: np.ndarray, zero: float = 0.0) -> np.ndarray:
    """``diff / sd`` elementwise; where ``sd == 0``: +-inf, or `zero` when ``diff`` is 0 too."""
    diff = np.asarray(diff, dtype=float)
    sd = np.asarray(sd, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(sd > 0, diff / np.where(sd > 0, sd, 1.0), np.sign(diff) * np.inf)
    return np.where((sd == 0) & (diff == 0), zero, out)


def _check_design(moments: Moments, design: Design) -> None:
    if tuple(design.variables) != tuple(moments.variables):
        raise ValueError("design.variables and moments.variables differ: "
                         f"{list(design.variables)[:5]}... vs {list(moments.variables)[:5]}...")
    missing = [r.name for r in design.regimes if r.name not in moments.regimes]
    if missing:
        raise ValueError(f"moments: no statistics for regime(s) {missing}; "
                         f"have {list(moments.regimes)}")
