"""Stratified Fisher z (pipeline.independence.fisher_z) against statsmodels and scipy.

Outside references: partial correlations are the correlation of the residuals of
statsmodels OLS fits on the raw rows; the classical one-regime test is Fisher (1924)
computed by hand with scipy.stats.pearsonr and scipy.stats.norm; null p-values are
checked for uniformity with scipy.stats.kstest.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from pipeline.independence.fisher_z import fisher_z, partial_correlation
from pipeline.stats.moments import Moments, merge_moments

VARIABLES = ("A", "B", "C", "D", "E", "F")


def _samples(seed: int = 0, sizes=(120, 80, 200)) -> dict[str, np.ndarray]:
    """Three regimes with different covariances and means."""
    rng = np.random.default_rng(seed)
    out = {}
    for k, n in enumerate(sizes):
        mix = rng.normal(size=(6, 6))
        out[f"r{k}"] = rng.normal(size=(n, 6)) @ mix + rng.normal(scale=5.0, size=6)
    return out


def _residuals(rows: np.ndarray, target: int, cond) -> np.ndarray:
    regressors = np.column_stack([np.ones(len(rows)), rows[:, list(cond)]])
    return sm.OLS(rows[:, target], regressors).fit().resid


def _tests(l_size: int, m: int = 6, p: int = 6, seed: int = 1):
    rng = np.random.default_rng(seed + l_size)
    picks = np.array([rng.permutation(p)[: l_size + 2] for _ in range(m)])
    return picks[:, 0], picks[:, 1], picks[:, 2:].reshape(m, l_size)


@pytest.mark.parametrize("l_size", [0, 1, 2, 3])
def test_partial_correlation_equals_ols_residual_correlation(l_size):
    # reference: correlation of statsmodels OLS residuals of X and Y on [1, S]
    samples = _samples()
    moments = Moments.from_samples(samples, VARIABLES)
    x, y, cond = _tests(l_size)
    r = partial_correlation(moments.scatter, x, y, cond)
    assert r.shape == (3, len(x))
    for k, rows in enumerate(samples.values()):
        for i in range(len(x)):
            ex = _residuals(rows, x[i], cond[i])
            ey = _residuals(rows, y[i], cond[i])
            assert r[k, i] == pytest.approx(np.corrcoef(ex, ey)[0, 1], abs=1e-10)


def test_partial_correlation_is_scale_free():
    # reference: numpy covariance and correlation of the raw rows
    samples = _samples()
    moments = Moments.from_samples(samples, VARIABLES)
    x, y, cond = _tests(2)
    covs = np.stack([np.cov(rows, rowvar=False) for rows in samples.values()])
    cors = np.stack([np.corrcoef(rows, rowvar=False) for rows in samples.values()])
    r = partial_correlation(moments.scatter, x, y, cond)
    np.testing.assert_allclose(partial_correlation(covs, x, y, cond), r, atol=1e-12)
    np.testing.assert_allclose(partial_correlation(cors, x, y, cond), r, atol=1e-12)


@pytest.mark.parametrize("l_size", [0, 1, 2, 3])
def test_one_regime_is_classical_fisher_z(l_size):
    # Fisher (1924): z = sqrt(n - |S| - 3) atanh(r), two-sided normal p (scipy.stats)
    rows = _samples()["r2"]
    moments = Moments.from_samples({"ctrl": rows}, VARIABLES)
    x, y, cond = _tests(l_size)
    res = fisher_z(moments, x, y, cond)
    assert res.left_out is None
    for i in range(len(x)):
        r = stats.pearsonr(_residuals(rows, x[i], cond[i]), _residuals(rows, y[i], cond[i]))[0]
        z = np.sqrt(len(rows) - l_size - 3) * np.arctanh(r)
        assert res.statistic[i] == pytest.approx(abs(z), abs=1e-9)  # |z|: two-sided
        assert res.pvalue[i] == pytest.approx(2 * stats.norm.sf(abs(z)), abs=1e-10)


def _combined_by_hand(terms: list[tuple[float, float]]) -> float:
    """METHODS.md 3 by hand from (m_k, atanh r_k): the signed sum (normal) and the sum of
    squares (chi-square, K df), p-values from scipy.stats, joined by the Cauchy combination
    of Liu & Xie (2020), T = (tan(pi (1/2 - p1)) + tan(pi (1/2 - p2))) / 2, with p-values
    capped at 0.99; tan(pi (1/2 - p)) is written 1 / tan(pi p) and 1/2 - arctan(T) / pi as
    arctan(1 / T) / pi (T > 0) to keep precision for tiny p."""
    m = np.array([t[0] for t in terms], dtype=float)
    z = np.array([t[1] for t in terms])
    p1 = min(2 * stats.norm.sf(abs((m * z).sum() / np.sqrt(m.sum()))), 0.99)
    p2 = min(stats.chi2.sf((m * z * z).sum(), len(terms)), 0.99)
    t = 0.5 * (1 / np.tan(np.pi * p1) + 1 / np.tan(np.pi * p2))
    return float(np.arctan(1 / t) / np.pi if t > 0 else 0.5 + np.arctan(-t) / np.pi)


@pytest.mark.parametrize("l_size", [0, 2])
def test_stratified_combination_by_hand(l_size):
    # METHODS.md 3, r_k from scipy.stats.pearsonr on OLS residuals
    samples = _samples()
    moments = Moments.from_samples(samples, VARIABLES)
    x, y, cond = _tests(l_size)
    res = fisher_z(moments, x, y, cond)
    for i in range(len(x)):
        terms = []
        for rows in samples.values():
            r = stats.pearsonr(_residuals(rows, x[i], cond[i]),
                               _residuals(rows, y[i], cond[i]))[0]
            terms.append((len(rows) - l_size - 3, np.arctanh(r)))
        expected = _combined_by_hand(terms)
        assert res.pvalue[i] == pytest.approx(expected, rel=1e-8)
        assert res.statistic[i] == pytest.approx(stats.norm.isf(expected / 2), rel=1e-8)
    # a subset of regimes is the same combination over that subset
    sub = fisher_z(moments, x, y, cond, regimes=[0, 2])
    alone = fisher_z(Moments.from_samples({k: samples[k] for k in ("r0", "r2")}, VARIABLES),
                     x, y, cond)
    np.testing.assert_allclose(sub.statistic, alone.statistic, atol=1e-12)


# --------------------------------------------------------------------------- null law

REPS = 2000
GROUP = 100  # repetitions per call: each is its own block of 6 variables
SIZES = (60, 40, 90)


def _block_diagonal(blocks: np.ndarray) -> np.ndarray:
    """(K, G, q, q) per-repetition scatters -> (K, G*q, G*q) block-diagonal scatters."""
    k, g, q, _ = blocks.shape
    out = np.zeros((k, g, q, g, q))
    idx = np.arange(g)
    out[:, idx, :, idx, :] = blocks.transpose(1, 0, 2, 3)
    return out.reshape(k, g * q, g * q)


def _null_moments(seed: int) -> list[tuple[Moments, Moments]]:
    """Moments of 3 regimes with different parameters, and of their pool, per group.

    Variables X, Y, S1, S2, U, V per repetition. Within each regime X _||_ Y | {S1, S2}
    and U _||_ V, but the regimes move the means of X and Y (and of U and V) together,
    so the pooled rows are dependent. Repetitions are independent blocks of variables,
    GROUP of them per Moments object, so one call tests GROUP repetitions.
    """
    rng = np.random.default_rng(seed)
    count, means, scatters = np.array(SIZES), [], []
    for k, n in enumerate(SIZES):
        s = rng.normal(size=(REPS, n, 2)) * (1.0 + k) + 3.0 * k
        a, b = np.array([1.0, -0.5]) * (k + 1), np.array([0.3, 0.8]) * (2 - k)
        shift = (0.0, 4.0, -3.0)[k]
        x = s @ a + shift + rng.normal(size=(REPS, n)) * (1 + 0.5 * k)
        y = s @ b + shift + rng.normal(size=(REPS, n))
        u = shift + rng.normal(size=(REPS, n)) * (2 - 0.5 * k)
        v = shift + rng.normal(size=(REPS, n))
        rows = np.concatenate([x[..., None], y[..., None], s, u[..., None], v[..., None]], axis=2)
        means.append(rows.mean(axis=1))
        dev = rows - means[-1][:, None, :]
        scatters.append(np.einsum("rni,rnj->rij", dev, dev))
    mean, scatter = np.stack(means), np.stack(scatters)  # (3, REPS, 6), (3, REPS, 6, 6)
    # pool the three regimes of each repetition (Chan, Golub & LeVeque merge)
    pooled = [(0, np.zeros(6), np.zeros((6, 6)))] * REPS
    for k in range(3):
        pooled = [merge_moments(*pooled[r], int(count[k]), mean[k, r], scatter[k, r])
                  for r in range(REPS)]
    p_mean = np.stack([pm for _, pm, _ in pooled])[None]
    p_scatter = np.stack([ps for _, _, ps in pooled])[None]
    out = []
    for g in range(0, REPS, GROUP):
        sl = slice(g, g + GROUP)
        names = tuple(f"{v}{r}" for r in range(GROUP) for v in ("X", "Y", "S1", "S2", "U", "V"))
        strat = Moments(names, ("k0", "k1", "k2"), count, mean[:, sl].reshape(3, -1),
                        _block_diagonal(scatter[:, sl]))
        pool = Moments(names, ("all",), np.array([count.sum()]),
                       p_mean[:, sl].reshape(1, -1), _block_diagonal(p_scatter[:, sl]))
        out.append((strat, pool))
    return out


@pytest.fixture(scope="module")
def null_moments():
    return _null_moments(seed=20260)


@pytest.mark.parametrize("l_size", [0, 2])
def test_null_pvalues_uniform_and_pooling_rejects(null_moments, l_size):
    # scipy.stats.kstest against the uniform law; the pooled (mixed) test is the contrast
    base = 6 * np.arange(GROUP)
    if l_size == 0:
        x, y, cond = base + 4, base + 5, np.zeros((GROUP, 0), int)
    else:
        x, y, cond = base, base + 1, np.column_stack([base + 2, base + 3])
    p_strat = np.concatenate([fisher_z(s, x, y, cond).pvalue for s, _ in null_moments])
    p_pool = np.concatenate([fisher_z(pl, x, y, cond).pvalue for _, pl in null_moments])
    assert p_strat.shape == (REPS,)
    assert stats.kstest(p_strat, "uniform").pvalue > 0.01
    assert np.mean(p_pool < 0.05) > 0.5  # mixing regimes creates dependence
    assert stats.kstest(p_pool, "uniform").pvalue < 1e-10


# --------------------------------------------------------------------------- edge cases

def test_constant_within_regime_is_left_out():
    samples = _samples()
    samples["r1"][:, 1] = 7.0  # B knocked out to a floor in regime r1
    moments = Moments.from_samples(samples, VARIABLES)
    x = np.array([0, 0, 1, 2])
    y = np.array([1, 2, 3, 3])
    cond = np.array([[4], [1], [5], [4]])  # B as y, as cond, as x; last test without B
    res = fisher_z(moments, x, y, cond)
    expected = np.zeros((4, 3), dtype=bool)
    expected[:3, 1] = True
    np.testing.assert_array_equal(res.left_out, expected)
    # the tests involving B equal the combination over the other regimes (scipy by hand)
    for i in range(3):
        terms = []
        for name in ("r0", "r2"):
            rows = samples[name]
            r = stats.pearsonr(_residuals(rows, x[i], cond[i]),
                               _residuals(rows, y[i], cond[i]))[0]
            terms.append((len(rows) - 4, np.arctanh(r)))
        assert res.pvalue[i] == pytest.approx(_combined_by_hand(terms), rel=1e-8)


def test_no_usable_regime_cannot_reject():
    rng = np.random.default_rng(3)
    samples = {"a": rng.normal(size=(4, 6)), "b": rng.normal(size=(3, 6))}
    moments = Moments.from_samples(samples, VARIABLES)
    res = fisher_z(moments, [0], [1], [[2, 3]])  # m_k = n_k - 5 <= 0 everywhere
    assert res.pvalue[0] == 1.0
    assert res.left_out is not None and res.left_out.all()
    res = fisher_z(moments, [0], [1], np.zeros((1, 0), int), min_count=5)
    assert res.pvalue[0] == 1.0 and res.left_out.all()


def test_batch_validation_messages():
    moments = Moments.from_samples(_samples(), VARIABLES)
    with pytest.raises(ValueError, match="appears twice"):
        fisher_z(moments, [0], [1], [[1]])
    with pytest.raises(ValueError, match=r"x: indices must lie in \[0, 6\)"):
        fisher_z(moments, [6], [1], [[2]])
    with pytest.raises(ValueError, match="cond: expected 2 rows"):
        fisher_z(moments, [0, 1], [2, 3], [[4]])
    with pytest.raises(ValueError, match="unknown regime"):
        fisher_z(moments, [0], [1], [[2]], regimes=["nope"])
