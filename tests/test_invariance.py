"""Invariance tests (pipeline.independence.invariance) against statsmodels and scipy.

Outside references: the residual sums of squares of statsmodels OLS fits on the raw rows
(separate fits and the fit on the union) give Chow's F (Chow 1960), with p-values from
scipy.stats.f, and Bartlett's statistic on the residual variances (Bartlett 1937), with
p-values from scipy.stats.chi2 (and equal to scipy.stats.bartlett when S is empty); the
fourth cumulant of the response is scipy.stats.kstat(x, 4) (the unbiased k-statistic),
that of the regressors scipy.stats.kurtosis with bias=False (the adjusted G2 of Joanes &
Gill 1998), and R^2 comes from the same fits, from which the pooled residual kurtosis of
Layard (1973) is built as the module docstring says; the two p-values are joined
by the Cauchy combination of Liu & Xie (2020) written out by hand; null p-values are
checked for uniformity with scipy.stats.kstest.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from pipeline.design import Design, Regime
from pipeline.independence.invariance import ResponseMatrix, invariance_test, response_matrix
from pipeline.stats.moments import Moments, merge_moments

VARIABLES = ("A", "B", "C", "D", "E")


def _stats(rows: np.ndarray) -> tuple[int, np.ndarray, np.ndarray]:
    mean = rows.mean(axis=0)
    dev = rows - mean
    return len(rows), mean, dev.T @ dev


def _m4(rows: np.ndarray) -> np.ndarray:
    return ((rows - rows.mean(axis=0)) ** 4).sum(axis=0)


def _by_hand(ref: np.ndarray, regime: np.ndarray, x: int, cond, tails: bool) -> float:
    """The invariance p-value from statsmodels fits and scipy laws (module docstring)."""
    from pipeline.independence.invariance import KURTOSIS_ALLOWANCE

    fits = [_ols(rows, x, cond) for rows in (ref, regime, np.vstack([ref, regime]))]
    q, n_ref, n_k = len(cond) + 1, len(ref), len(regime)
    n = n_ref + n_k
    within = fits[0].ssr + fits[1].ssr
    f_coef = ((fits[2].ssr - within) / q) / (within / (n - 2 * q))
    p_coef = stats.f.sf(f_coef, q, n - 2 * q)
    kappa = 0.0
    if tails:  # Layard's pooled kurtosis of the residuals, their k4 carried over from x's
        m4, hidden = 0.0, 0.0
        for rows, fit in zip((ref, regime), fits[:2], strict=True):
            nr, u = len(rows), 1.0 - fit.rsquared if cond else 1.0
            amplify = 1.0 / (u**2 + (1 - u) ** 2 / len(cond)) if cond else 1.0
            k4 = stats.kstat(rows[:, x], 4)  # scipy: the unbiased fourth cumulant
            m4 += nr * amplify * u**2 * k4 + 3 * fit.ssr**2 / nr
            hidden += nr / n * (amplify**2 - 2 * amplify * u**2 + 1)
        nu = n - 2 * q
        pooled = n * m4 / within**2 * (nu + 2) / nu - 3
        point = max(pooled - 24 / n / pooled, 0.0) if pooled > 0 else 0.0
        if cond:  # the regressors' G2 (scipy), averaged over S and the two regimes
            g = sum(len(rows) * np.mean(stats.kurtosis(rows[:, list(cond)], bias=False))
                    for rows in (ref, regime)) / n
            point = max(point, max(g - 24 / n / g, 0.0) if g > 0 else 0.0)
        kappa = point + KURTOSIS_ALLOWANCE * np.sqrt(24 / n * hidden)
    d_ref, d_k = n_ref - q, n_k - q  # Bartlett's M on the residual variances, Box's scale
    s2_pooled = (fits[0].ssr + fits[1].ssr) / (d_ref + d_k)
    m = (d_ref + d_k) * np.log(s2_pooled) - d_ref * np.log(fits[0].mse_resid) - d_k * np.log(
        fits[1].mse_resid)
    c = 1 + (1 / d_ref + 1 / d_k - 1 / (d_ref + d_k)) / 3
    p_var = stats.chi2.sf(m / c / (1 + kappa / 2), 1)
    p1, p2 = min(p_coef, 0.99), min(p_var, 0.99)
    t = 0.5 * (1 / np.tan(np.pi * p1) + 1 / np.tan(np.pi * p2))
    return float(np.arctan(1 / t) / np.pi if t > 0 else 0.5 + np.arctan(-t) / np.pi)


def _ols(rows: np.ndarray, target: int, cond):
    regressors = np.column_stack([np.ones(len(rows)), rows[:, list(cond)]])
    return sm.OLS(rows[:, target], regressors).fit()


def _pair(seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """A reference and a regime with different coefficients, means and noise."""
    rng = np.random.default_rng(seed)
    ref = rng.normal(size=(150, 5)) @ rng.normal(size=(5, 5)) + 2.0
    regime = rng.normal(size=(90, 5)) @ rng.normal(size=(5, 5)) - 1.0
    return ref, regime


@pytest.mark.parametrize("l_size", [0, 1, 2, 3])
@pytest.mark.parametrize("tails", [False, True])
def test_equals_statsmodels_fits(l_size, tails):
    ref, regime = _pair()
    ref = ref + np.random.default_rng(9).exponential(size=ref.shape)  # skewed tails
    rng = np.random.default_rng(l_size)
    picks = np.array([rng.permutation(5)[: l_size + 1] for _ in range(5)])
    x, cond = picks[:, 0], picks[:, 1:]
    extra = {"m4_ref": _m4(ref), "m4_k": _m4(regime)} if tails else {}
    res = invariance_test(*_stats(ref), *_stats(regime), x, cond, **extra)
    for i in range(len(x)):
        expected = _by_hand(ref, regime, x[i], list(cond[i]), tails)
        assert res.pvalue[i] == pytest.approx(expected, rel=1e-7, abs=1e-300)
        assert res.statistic[i] == pytest.approx(stats.norm.isf(expected / 2), rel=1e-7)


def test_variance_part_is_bartletts_test():
    # S empty, Gaussian tails assumed: the variance part is scipy.stats.bartlett on the
    # raw rows, so with equal means the joined p-value is the Cauchy combination of
    # Chow's (Student's t) and Bartlett's
    rng = np.random.default_rng(5)
    ref, regime = rng.normal(size=(80, 2)), rng.normal(size=(50, 2)) * [1.0, 1.6]
    res = invariance_test(*_stats(ref), *_stats(regime), [0, 1], np.zeros((2, 0), int))
    for j in range(2):
        p_var = stats.bartlett(ref[:, j], regime[:, j]).pvalue  # scipy
        p_coef = stats.ttest_ind(ref[:, j], regime[:, j]).pvalue  # scipy: F(1, d) = t^2
        p1, p2 = min(p_coef, 0.99), min(p_var, 0.99)
        t = 0.5 * (1 / np.tan(np.pi * p1) + 1 / np.tan(np.pi * p2))
        expected = np.arctan(1 / t) / np.pi if t > 0 else 0.5 + np.arctan(-t) / np.pi
        assert res.pvalue[j] == pytest.approx(expected, rel=1e-9)


def test_carry_over_exact_for_equal_independent_terms():
    # fourth cumulants of independent terms add (common practice): X = e + m terms of e's
    # variance and excess kurtosis g has k4(X) = (m + 1) g and 1 - R^2 = 1 / (m + 1), so the
    # residual's kurtosis must come back as g (the sampling terms vanish at this n)
    from pipeline.independence.invariance import residual_kurtosis

    g, n = 2.5, np.array([1e9, 1e9])
    for m in (1, 3, 10):
        u = 1.0 / (m + 1)  # the share of each term and of the residual in var(X) = 1
        kappa = residual_kurtosis(np.full((1, 2), (m + 1) * g * u * u), np.full((1, 2), u),
                                  (n * u)[None, :], n, m)
        assert kappa[0] == pytest.approx(g, rel=1e-3)


def test_reference_pooled_from_several_controls():
    # pooling two control batches by merge_moments equals fitting on their raw union
    ref, regime = _pair(1)
    half = len(ref) // 2
    n, mean, scatter = merge_moments(*_stats(ref[:half]), *_stats(ref[half:]))
    res = invariance_test(n, mean, scatter, *_stats(regime), [0], [[1, 2]])
    assert res.pvalue[0] == pytest.approx(_by_hand(ref, regime, 0, [1, 2], False), rel=1e-8)


# --------------------------------------------------------------------------- null law

REPS = 2000
GROUP = 100
N_REF, N_K = 400, 300


def _block_diagonal(blocks: np.ndarray) -> np.ndarray:
    """(G, q, q) per-repetition scatters -> (G*q, G*q) block-diagonal scatter."""
    g, q, _ = blocks.shape
    out = np.zeros((g, q, g, q))
    idx = np.arange(g)
    out[idx, :, idx, :] = blocks
    return out.reshape(g * q, g * q)


def _null_groups(seed: int):
    """Per group of repetitions, the (n, mean, scatter) of the reference and the regime.

    Variables X, S1, S2, W per repetition: the law of S differs between the two regimes,
    the law of X given S and the law of W do not.
    """
    rng = np.random.default_rng(seed)
    sides = []
    for n, s_mean, s_scale in ((N_REF, 0.0, 1.0), (N_K, 2.0, 2.5)):
        s = rng.normal(size=(REPS, n, 2)) * s_scale + s_mean
        x = 1.0 + s @ np.array([0.7, -1.2]) + 1.5 * rng.normal(size=(REPS, n))
        w = 2.0 + 3.0 * rng.normal(size=(REPS, n))
        rows = np.concatenate([x[..., None], s, w[..., None]], axis=2)
        mean = rows.mean(axis=1)
        dev = rows - mean[:, None, :]
        sides.append((n, mean, np.einsum("rni,rnj->rij", dev, dev)))
    for g in range(0, REPS, GROUP):
        sl = slice(g, g + GROUP)
        yield [(n, mean[sl].ravel(), _block_diagonal(scatter[sl])) for n, mean, scatter in sides]


def test_null_pvalues_uniform():
    # scipy.stats.kstest against the uniform law, for S empty and |S| = 2
    base = 4 * np.arange(GROUP)
    p_marginal, p_conditional = [], []
    for ref, regime in _null_groups(seed=4242):
        p_marginal.append(invariance_test(*ref, *regime, base + 3,
                                          np.zeros((GROUP, 0), int)).pvalue)
        p_conditional.append(invariance_test(*ref, *regime, base, np.column_stack([base + 1,
                                                                                base + 2])).pvalue)
        # X's marginal law does move with S: the test sees it
        assert np.mean(invariance_test(*ref, *regime, base, np.zeros((GROUP, 0), int)).pvalue
                       < 1e-3) > 0.9
    for p in (np.concatenate(p_marginal), np.concatenate(p_conditional)):
        assert p.shape == (REPS,)
        assert stats.kstest(p, "uniform").pvalue > 0.01


# --------------------------------------------------------------------------- edge cases

def test_variance_collapsed_to_zero_is_a_shift():
    rng = np.random.default_rng(5)
    ref = rng.normal(size=(80, 3))
    knockout = rng.normal(size=(60, 3))
    knockout[:, 0] = 0.0  # X knocked out completely in the regime
    res = invariance_test(*_stats(ref), *_stats(knockout), [0, 0, 1], [[1], [2], [2]])
    assert res.statistic[0] == np.inf and res.pvalue[0] == 0.0
    assert res.statistic[1] == np.inf and res.pvalue[1] == 0.0
    assert np.isfinite(res.statistic[2]) and res.pvalue[2] > 0.0
    # conditioning on the knocked-out variable: a constant regressor, still a valid test
    res = invariance_test(*_stats(ref), *_stats(knockout), [1], [[0]])
    assert np.isfinite(res.statistic[0])
    # constant in both at the same level: nothing moved (p = 1); at different levels: a shift
    same = ref.copy()
    same[:, 0] = 0.0
    res = invariance_test(*_stats(same), *_stats(knockout), [0], np.zeros((1, 0), int))
    assert res.pvalue[0] == 1.0
    same[:, 0] = 3.0
    res = invariance_test(*_stats(same), *_stats(knockout), [0], np.zeros((1, 0), int))
    assert res.pvalue[0] == 0.0


def test_too_few_samples_cannot_reject():
    rng = np.random.default_rng(6)
    ref, tiny = rng.normal(size=(50, 5)), rng.normal(size=(3, 5))
    res = invariance_test(*_stats(ref), *_stats(tiny), [0], [[1, 2]])  # 3 < |S| + 2
    assert res.pvalue[0] == 1.0 and np.isnan(res.statistic[0])


def test_shape_validation():
    ref, regime = _pair()
    n, mean, scatter = _stats(ref)
    with pytest.raises(ValueError, match="scatter_k: expected shape"):
        invariance_test(n, mean, scatter, 10, mean, scatter[:3, :3], [0], [[1]])
    with pytest.raises(ValueError, match="appears twice"):
        invariance_test(n, mean, scatter, *_stats(regime), [0], [[0]])


# --------------------------------------------------------------------------- response matrix

def test_response_matrix_against_raw_rows():
    # shift: numpy mean and sd (ddof 1) of the raw rows; p: statsmodels llf with S empty
    rng = np.random.default_rng(9)
    samples = {
        "ctrl1": rng.normal(size=(100, 5)),
        "kd_A": rng.normal(size=(70, 5)) + np.array([-2.0, 0, 0, 0, 0]),
        "ctrl2": rng.normal(size=(90, 5)) + 0.1,
        "oe_C": rng.normal(size=(60, 5)) * np.array([1, 1, 3.0, 1, 1]),
    }
    samples["kd_A"][:, 4] = 0.0  # E floored by the knockdown
    moments = Moments.from_samples(samples, VARIABLES)
    design = Design(VARIABLES, (Regime("ctrl1", reference=True), Regime("kd_A", ("A",)),
                                Regime("ctrl2", reference=True), Regime("oe_C", ("C",))))
    resp = response_matrix(moments, design)
    assert isinstance(resp, ResponseMatrix)
    assert resp.regimes == ("kd_A", "oe_C") and resp.shift.shape == (2, 5)
    ref = np.vstack([samples["ctrl1"], samples["ctrl2"]])
    for i, name in enumerate(resp.regimes):
        rows = samples[name]
        expected = (rows.mean(axis=0) - ref.mean(axis=0)) / ref.std(axis=0, ddof=1)
        np.testing.assert_allclose(resp.shift[i], expected, rtol=1e-10)
        np.testing.assert_allclose(resp.sd_ratio[i], rows.std(axis=0, ddof=1)
                                   / ref.std(axis=0, ddof=1), rtol=1e-10)
        for j in range(4):
            assert resp.pvalue[i, j] == pytest.approx(_by_hand(ref, rows, j, [], True),
                                                      rel=1e-7, abs=1e-300)
    assert resp.pvalue[0, 4] == 0.0  # a variance collapsed to zero is a shift
    assert resp.shifted(1e-6)[0, 0] and resp.shifted(1e-6)[1, 2]
    frame = resp.to_frame()
    assert list(frame.columns) == ["regime", "variable", "shift", "sd_ratio", "statistic",
                                   "pvalue", "adjusted"]
    assert len(frame) == 10 and frame.iloc[7]["regime"] == "oe_C"
    assert frame.iloc[7]["variable"] == "C"
    assert "kd_A" in resp.summary()
