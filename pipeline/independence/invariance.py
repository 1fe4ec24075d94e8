"""Invariance tests: is the law of X given S the same in a regime and in the reference?

An intervention node ``F_k`` is independent of a measured variable X given S when the
conditional law of X given S is the same in regime k and in the reference. Under a
linear model that law is the regression of X on S with intercept and its residual
spread, so the test asks two questions and joins their answers:

- **equal intercept and coefficients**: the test of Chow (1960),
  ``F = ((RSS_pooled - RSS_ref - RSS_k) / q) / ((RSS_ref + RSS_k) / (n - 2q))`` with
  ``q = |S| + 1`` coefficients and ``n = n_ref + n_k``, exact under Gaussian errors of
  equal variance and asymptotically valid for any error law of finite variance (its tail
  in closed form, `pipeline.independence.laws`);
- **equal residual variance**: Bartlett's (1937) statistic on the unbiased residual
  variances ``s2_ref``, ``s2_k`` with ``d = n - q`` degrees of freedom each,
  ``M = (d_ref + d_k) log s2_pooled - d_ref log s2_ref - d_k log s2_k``, divided by his
  scale ``C = 1 + (1/d_ref + 1/d_k - 1/(d_ref + d_k)) / 3`` and by Box's (1953) factor
  ``1 + kappa / 2``, against chi-square with 1 degree of freedom. ``kappa`` is the excess
  kurtosis of the residuals: the variance of a log sample variance is about
  ``(2 + kappa) / d``, so heavy tails inflate M by that factor (Box 1953; Layard 1973).
  With Gaussian tails (``kappa = 0``) it is Bartlett's test, whose chi-square law is
  accurate to a few percent of the level from ten degrees of freedom on (it matches the
  exact two-sided F test of equal variances), and it costs a logarithm where the F law
  costs an incomplete beta function.

The two p-values are joined by the Cauchy combination (Liu & Xie 2020,
`pipeline.independence.combine`); the statistic reported is the normal deviate of the
result. With S empty the test compares mean and variance of X.

Everything is read from the sufficient statistics: the residual sum of squares is
``S_xx - S_xS S_SS^-1 S_Sx`` of the centred scatter, the pooled scatter is the merge of
the two (``merge_moments``), and ``kappa`` comes from the per-variable fourth moments
(`residual_kurtosis`), in three steps:

1. **Pooled kurtosis under the null** (Layard 1973). Under the null the two regimes share
   one residual law, so its kurtosis is estimated from both, each regime's residuals
   about their own fit and divided by the *pooled* residual variance:
   ``b2 = n (M4_ref + M4_k) / (RSS_ref + RSS_k)^2`` with ``M4`` the sums of fourth powers
   of the residuals, and ``L = b2 (nu + 2) / nu - 3`` with ``nu = n - 2q`` (unbiased under
   normal errors). Standardizing by the pooled variance makes the test self-normalizing:
   an outlier that inflates one regime's variance inflates ``L`` too. With S empty the
   residuals are the deviations of X and ``L`` is Layard's estimator exactly.
2. **Carry-over from X to the residual.** The store holds the fourth moment of X, not of
   its residual on S (that would need the fourth cross moments). Each regime's residual
   fourth cumulant is taken as ``t k4(X)`` (``k4``: the unbiased k-statistic, the
   numerator of the adjusted ``G2 = k4 / k2^2`` of Joanes & Gill 1998), and
   ``M4 = n_r t k4(X) + 3 RSS_r^2 / n_r``. With ``u = 1 - R^2`` and ``|S| = m``,
   ``t = u^2 / (u^2 + (1 - u)^2 / m)`` is exact when X is the sum of the residual and
   ``m`` independent terms of equal variance, all of the residual's excess kurtosis;
   unequal shares or correlated regressors make the fitted part more kurtotic and ``t``
   an over-estimate (conservative). Under the same model the regressors' own excess
   kurtosis (G2, averaged over S and the two regimes) estimates the residual's too, from
   more variables and without the carry-over: the larger of the two estimates is used.
3. **Sampling error.** Each estimate ``k`` is shrunk toward 0 by the positive-part
   James-Stein rule ``max(0, k - se^2 / k)`` with ``se^2 = 24 / n``, the variance of a
   sample kurtosis under normal errors: a kurtosis not distinguishable from 0 costs the
   Gaussian case little. What the moments of X cannot show is covered by adding
   ``KURTOSIS_ALLOWANCE`` standard errors of the carried-over estimate as an estimate of
   the residuals' own kurtosis, ``se sqrt(V)``, ``V = sum_r (n_r / n) (A_r^2 -
   2 A_r u_r^2 + 1)`` with ``A = t / u^2`` the factor that carries X's excess kurtosis to
   the residual (normal theory: ``V`` is 0 with S empty, where the residual is X itself,
   and grows with ``R^2``, where a residual's outliers are hidden in X by the spread of the
   fitted part).

Limits. Regressors lighter-tailed than the residual break the model of step 2: with
Gaussian regressors explaining most of X (``R^2`` near 0.8, |S| = 3) and t(3) or
exponential errors, X looks Gaussian and the test is liberal (3 to 17 % at alpha 0.01
for 30 to 500 samples per regime, as with the earlier margin rule: no function of the
per-variable moments sees those tails; with one regressor it holds, 0.7 to 1.2 %).
Regressors heavier-tailed than the residual make it conservative.

The calibration of this construction under Gaussian, exponential and t(3) errors from
30 to 2000 samples per regime is checked by ``tests/test_calibration.py`` and reported by
``benchmarks/bench_calibration.py``. Chow's F, which this module does not correct, is
itself liberal under heavy-tailed errors and regressors (up to twice its level at
|S| = 3 and 30 to 100 samples under t(3)), so the variance part is kept at or below its
level there.

The marginal tests (S empty) of every variable in every regime form the response
matrix (`response_matrix`), reported with the standardized mean shift and the ratio of
standard deviations.

Example
-------
>>> import numpy as np
>>> rng = np.random.default_rng(0)
>>> ref, kd = rng.normal(size=(300, 2)), rng.normal(size=(300, 2)) + [0.0, 1.0]
>>> stats = [(len(a), a.mean(0), (a - a.mean(0)).T @ (a - a.mean(0))) for a in (ref, kd)]
>>> res = invariance_test(*stats[0], *stats[1], x=[0, 1], cond=np.zeros((2, 0), int))
>>> bool(res.pvalue[0] > 0.01), bool(res.pvalue[1] < 1e-6)
(True, True)

References
----------
1. M. S. Bartlett (1937). Properties of sufficiency and statistical tests. Proceedings of
   the Royal Society of London A 160, 268-282.
2. G. C. Chow (1960). Tests of equality between sets of coefficients in two linear
   regressions. Econometrica 28, 591-605.
3. G. E. P. Box (1953). Non-normality and tests on variances. Biometrika 40, 318-335.
4. M. W. J. Layard (1973). Robust large-sample tests for homogeneity of variances.
   Journal of the American Statistical Association 68, 195-198.
5. D. N. Joanes, C. A. Gill (1998). Comparing measures of sample skewness and kurtosis.
   The Statistician 47, 183-189.
6. Y. Liu, J. Xie (2020). Cauchy combination test: a powerful test with analytic p-value
   calculation under arbitrary dependency structures. Journal of the American
   Statistical Association 115(529), 393-402.
6. W. James, C. Stein (1961). Estimation with quadratic loss. Proceedings of the Fourth
   Berkeley Symposium on Mathematical Statistics and Probability 1, 361-379.
"""

from __future__ import annotations

import numpy as np
from scipy.special import erfc

from pipeline.design import Design
from pipeline.errors import InputError
from pipeline.independence.base import TestResults
from pipeline.independence.combine import cauchy_combination, z_equivalent
from pipeline.independence.fisher_z import (
    _TOL,
    _check_tests,
    _chunks,
    _correlation_flat,
    _eliminate,
)
from pipeline.independence.laws import f_upper_tail
from pipeline.independence.response import ResponseMatrix
from pipeline.stats.moments import Moments, merge_moments

__all__ = ["KURTOSIS_ALLOWANCE", "invariance_test", "regime_pair", "residual_kurtosis",
           "response_matrix", "standardized_difference"]

#: A variable whose variance is below this fraction of its scale counts as constant
#: (the same rule as ``Moments.constant``).
_RTOL_CONSTANT = 1e-12


#: Standard errors of the residual-kurtosis proxy added to its estimate (see
#: `residual_kurtosis`): room for the part of the residual's tails that the moments of the
#: response cannot show. One constant, set on null simulations under Gaussian, exponential
#: and t(3) errors (tests/test_calibration.py, benchmarks/bench_calibration.py).
KURTOSIS_ALLOWANCE = 0.35


def _fourth_cumulant(n: float, m2: np.ndarray, m4: np.ndarray) -> np.ndarray:
    """Unbiased fourth cumulant (Fisher's k-statistic k4) from the sums of squared and
    fourth-power deviations; 0 where undefined (fewer than 4 samples)."""
    m2, m4 = np.asarray(m2, dtype=float), np.asarray(m4, dtype=float)
    if n <= 3:
        return np.zeros_like(m2)
    return (n * (n + 1.0) * m4 - 3.0 * (n - 1.0) * m2 * m2) / ((n - 1.0) * (n - 2.0) * (n - 3.0))


def residual_kurtosis(cumulant: np.ndarray, unexplained: np.ndarray, rss: np.ndarray,
                      n: np.ndarray, size: int,
                      regressors: np.ndarray | None = None) -> np.ndarray:
    """Excess kurtosis used for the residuals of the variance test, with room for its error.

    Parameters
    ----------
    cumulant : array (m, 2)
        Fourth cumulant (k4) of the response in the reference and in the regime.
    unexplained : array (m, 2)
        ``1 - R^2`` of the regression on S in each of the two.
    rss : array (m, 2)
        Residual sums of squares in each of the two.
    n : array (2,)
        Samples of the reference and of the regime.
    size : int
        ``|S|``.
    regressors : array (m,), optional
        Excess kurtosis (G2) of the regressors, averaged over S and the two regimes.

    Returns
    -------
    array (m,)
        ``max(J(L), J(G)) + KURTOSIS_ALLOWANCE * se * sqrt(V)``: ``L`` is the pooled
        kurtosis of the residuals (Layard 1973) with each regime's residual fourth
        cumulant carried over from the response, ``G`` the regressors' kurtosis,
        ``J(k) = max(0, k - se^2 / k)`` (0 for ``k <= 0``) the positive-part James-Stein
        shrinkage with ``se = sqrt(24 / n)``, the standard error of a kurtosis under normal
        errors, and ``V`` the variance factor of the carry-over (module docstring).
    """
    cumulant = np.asarray(cumulant, dtype=float)
    rss = np.asarray(rss, dtype=float)
    n_r = [float(n[0]), float(n[1])]
    n_all = n_r[0] + n_r[1]
    nu = n_all - 2.0 * (size + 1)
    se2 = 24.0 / n_all
    # per regime r (columns, kept apart: cheaper than reductions over a short axis)
    m4 = 0.0
    hidden = 0.0
    for r in (0, 1):
        rss_r = rss[:, r]
        if size == 0:  # the residual is X itself: no carry-over, nothing hidden
            carried = n_r[r] * cumulant[:, r]
        else:  # |S| independent terms of equal share, with the residual's excess kurtosis
            u = np.clip(np.asarray(unexplained, dtype=float)[:, r], 0.0, 1.0)
            u2 = u * u
            amplify = 1.0 / (u2 + (1.0 - u) ** 2 / size)
            carried = n_r[r] * amplify * u2 * cumulant[:, r]
            hidden = hidden + (n_r[r] / n_all) * (amplify * (amplify - 2.0 * u2) + 1.0)
        m4 = m4 + carried + (3.0 / n_r[r]) * rss_r * rss_r
    total = rss[:, 0] + rss[:, 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        pooled = (n_all * (nu + 2.0) / nu) * m4 / (total * total) - 3.0
        point = np.where(pooled > 0, np.maximum(pooled - se2 / pooled, 0.0), 0.0)
        if regressors is not None and size > 0:
            g = np.asarray(regressors, dtype=float)
            point = np.maximum(point, np.where(g > 0, np.maximum(g - se2 / g, 0.0), 0.0))
    if size == 0:
        return point
    return point + KURTOSIS_ALLOWANCE * np.sqrt(se2 * np.maximum(hidden, 0.0))


class _Pair:
    """A regime and the reference (and their union), prepared for many batches.

    `m4_ref`, `m4_k` are the per-variable fourth central moment sums (None: Gaussian tails).
    """

    def __init__(self, n_ref: int, mean_ref: np.ndarray, scatter_ref: np.ndarray,
                 n_k: int, mean_k: np.ndarray, scatter_k: np.ndarray,
                 m4_ref: np.ndarray | None = None, m4_k: np.ndarray | None = None) -> None:
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
        # fourth cumulant (p, 2) of each variable in the reference and in the regime, and
        # the n-weighted mean over the two of its excess kurtosis G2 = k4 / k2^2 (p,)
        if m4_ref is None or m4_k is None:
            self.cumulant_t = np.zeros((self.p, 2))
            self.g2 = np.zeros(self.p)
        else:
            self.cumulant_t = np.ascontiguousarray(np.stack([
                _fourth_cumulant(self.n[0], diag[0], m4_ref),
                _fourth_cumulant(self.n[1], diag[1], m4_k)], axis=1))
            k2 = diag[:2].T / np.maximum(self.n[:2] - 1.0, 1.0)
            with np.errstate(divide="ignore", invalid="ignore"):
                g2 = np.where(k2 > 0, self.cumulant_t / (k2 * k2), 0.0)
            self.g2 = g2 @ (self.n[:2] / self.n[:2].sum())
        self.has_tails = m4_ref is not None and m4_k is not None

    def test(self, x: np.ndarray, cond: np.ndarray) -> TestResults:
        """Invariance tests of validated batch arrays."""
        m, l_size = x.shape[0], cond.shape[1]
        q = l_size + 1
        n_ref, n_k, n_all = self.n
        pvalue = np.empty(m)
        # too few samples to estimate |S| + 1 coefficients and a variance: untestable
        if min(n_ref, n_k) < q + 1:
            return TestResults(statistic=np.full(m, np.nan), pvalue=np.ones(m))
        df_within = n_all - 2 * q
        d_ref, d_k = n_ref - q, n_k - q
        # Bartlett's scale C: M / (C (1 + kappa / 2)) is chi-square with 1 degree of
        # freedom, whose tail at c is erfc(sqrt(c / 2))
        bartlett_scale = 1.0 + (1.0 / d_ref + 1.0 / d_k - 1.0 / (d_ref + d_k)) / 3.0
        for sl in _chunks(m, 1 if l_size == 0 else 3):
            xs = x[sl]
            # 1. residual sums of squares (correlation units, 1 - R^2, times S_xx)
            unit = _eliminate(self.flat, self.p, [xs], cond[sl])[0, 0]
            unit = np.broadcast_to(unit, (xs.shape[0], 3))
            zero = self.const_t[xs] | (unit <= _TOL)
            rss = np.where(zero, 0.0, unit * self.sxx_t[xs])
            with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
                # 2. equal coefficients: Chow's F
                within = rss[:, 0] + rss[:, 1]
                f_coef = ((rss[:, 2] - within) / q) / (within / df_within)
                p_coef = f_upper_tail(f_coef, q, df_within) if df_within > 0 else 1.0
                # 3. equal residual variance: Bartlett's M, scaled for the tails (Box)
                kappa = 0.0
                if self.has_tails:
                    kappa = residual_kurtosis(self.cumulant_t[xs], unit[:, :2], rss[:, :2],
                                              self.n[:2], l_size,
                                              self.g2[cond[sl]].mean(axis=1) if l_size
                                              else None)
                pooled = within / (d_ref + d_k)
                bartlett = (d_ref * np.log(pooled * d_ref / rss[:, 0])
                            + d_k * np.log(pooled * d_k / rss[:, 1]))
                p_var = erfc(np.sqrt(np.maximum(bartlett, 0.0) / (bartlett_scale
                                                                   * (2.0 + kappa))))
            p_coef = np.where(np.isnan(p_coef), 1.0, p_coef)
            p_var = np.minimum(np.where(np.isnan(p_var), 1.0, p_var), 1.0)
            p = cauchy_combination(p_coef, p_var)
            # a variance collapsed to zero on one side only is a shift; zero everywhere: no test
            shift = (zero[:, 0] | zero[:, 1]) & ~zero[:, 2]
            p[shift] = 0.0
            p[zero[:, 2]] = 1.0
            pvalue[sl] = p
        return TestResults(statistic=z_equivalent(pvalue), pvalue=pvalue)


def regime_pair(moments: Moments, reference: list[str] | tuple[str, ...], regime: str) -> _Pair:
    """`regime` against the pooled `reference` regimes, prepared for many batches of tests."""
    n_ref, mean_ref, scatter_ref = moments.pooled(reference)
    k = moments.index(regime)
    m4_ref = m4_k = None
    if moments.m4 is not None:
        m4_ref = moments.pooled_tails(reference)[1]
        m4_k = moments.m4[k]
    return _Pair(n_ref, mean_ref, scatter_ref, int(moments.count[k]), moments.mean[k],
                 moments.scatter[k], m4_ref, m4_k)


def invariance_test(n_ref: int, mean_ref: np.ndarray, scatter_ref: np.ndarray,
                    n_k: int, mean_k: np.ndarray, scatter_k: np.ndarray,
                    x: np.ndarray, cond: np.ndarray, *, m4_ref: np.ndarray | None = None,
                    m4_k: np.ndarray | None = None) -> TestResults:
    """Tests that the regression of ``x[i]`` on ``cond[i]`` is the same in both regimes.

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
    m4_ref, m4_k : arrays (p,), optional
        Per-variable sums of fourth powers of deviations from the mean (`Moments.m4`);
        without them the variance part assumes Gaussian tails.

    Returns
    -------
    TestResults
        ``pvalue`` joins Chow's test of equal coefficients and the kurtosis-corrected
        test of equal residual variance (see the module docstring); ``statistic`` is its
        normal deviate. A residual variance that is zero on one side and not in the union
        is a shift (p = 0); zero everywhere gives p = 1. With at most ``l + 1`` samples on
        either side the test cannot be done: statistic nan, p = 1.

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
    for name, arr in (("m4_ref", m4_ref), ("m4_k", m4_k)):
        if arr is not None and np.shape(arr) != (p,):
            raise ValueError(f"{name}: expected shape ({p},), got {np.shape(arr)}")
    x, _, cond = _check_tests(p, x, None, cond)
    pair = _Pair(int(n_ref), mean_ref, scatter_ref, int(n_k), mean_k, scatter_k, m4_ref, m4_k)
    return pair.test(x, cond)


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
        res = regime_pair(moments, ref_names, name).test(every, np.zeros((p, 0), dtype=np.intp))
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
