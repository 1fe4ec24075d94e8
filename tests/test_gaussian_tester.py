"""GaussianTester (pipeline.independence.gaussian) against direct calls and the null law.

Outside references: the pooled reference is recomputed from the raw control rows with
numpy; null p-values of the rank variant (Harris & Drton 2013) on non-Gaussian data are
checked for uniformity with scipy.stats.kstest.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from pipeline.design import Design, Regime
from pipeline.errors import InputError
from pipeline.independence.fisher_z import fisher_z
from pipeline.independence.gaussian import GaussianTester
from pipeline.independence.invariance import invariance_test, response_matrix
from pipeline.stats.moments import Moments

VARIABLES = ("A", "B", "C", "D", "E")
DESIGN = Design(VARIABLES, (
    Regime("ctrl1", reference=True),
    Regime("kd_A", ("A",)),
    Regime("ctrl2", reference=True),
    Regime("kd_C", ("C",)),
))


def _samples(seed: int = 0) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    out = {}
    for r, n in zip(DESIGN.regimes, (120, 70, 90, 60), strict=True):
        out[r.name] = rng.normal(size=(n, 5)) @ rng.normal(size=(5, 5)) + rng.normal(size=5)
    out["kd_C"][:, 2] = 0.0  # C knocked out completely
    return out


def _stats(rows: np.ndarray) -> tuple[int, np.ndarray, np.ndarray]:
    mean = rows.mean(axis=0)
    dev = rows - mean
    return len(rows), mean, dev.T @ dev


def _batch(l_size: int, m: int = 8, seed: int = 0):
    rng = np.random.default_rng(seed + l_size)
    picks = np.array([rng.permutation(5)[: l_size + 2] for _ in range(m)])
    return picks[:, 0], picks[:, 1], picks[:, 2:].reshape(m, l_size)


@pytest.mark.parametrize("l_size", [0, 1, 2, 3])
def test_matches_direct_calls(l_size):
    samples = _samples()
    moments = Moments.from_samples(samples, VARIABLES)
    tester = GaussianTester(moments, DESIGN)
    x, y, cond = _batch(l_size)
    # CI: stratified over every regime, the two controls as separate strata
    got, want = tester.ci(x, y, cond), fisher_z(moments, x, y, cond)
    np.testing.assert_array_equal(got.statistic, want.statistic)
    np.testing.assert_array_equal(got.pvalue, want.pvalue)
    np.testing.assert_array_equal(got.left_out, want.left_out)
    assert got.left_out[:, 3].any()  # tests involving C leave kd_C out
    # invariance: against the reference pooled from the raw control rows (numpy)
    controls = np.vstack([samples["ctrl1"], samples["ctrl2"]])
    ref = _stats(controls)
    xs, cs = x, np.column_stack([y, cond])[:, :l_size]
    for name in ("kd_A", "kd_C"):
        got = tester.invariance(name, xs, cs)
        rows = samples[name]
        want = invariance_test(*ref, *_stats(rows), xs, cs,
                               m4_ref=((controls - controls.mean(0)) ** 4).sum(0),
                               m4_k=((rows - rows.mean(0)) ** 4).sum(0))
        np.testing.assert_allclose(got.statistic, want.statistic, rtol=1e-9)
        np.testing.assert_allclose(got.pvalue, want.pvalue, rtol=1e-9, atol=1e-300)
    assert tester.n_tests == {"ci": len(x), "invariance": 2 * len(x)}


def test_regime_order_of_moments_does_not_matter():
    samples = _samples(1)
    shuffled = {k: samples[k] for k in ("kd_C", "ctrl2", "kd_A", "ctrl1")}
    a = GaussianTester(Moments.from_samples(samples, VARIABLES), DESIGN)
    b = GaussianTester(Moments.from_samples(shuffled, VARIABLES), DESIGN)
    x, y, cond = _batch(2)
    np.testing.assert_allclose(a.ci(x, y, cond).statistic, b.ci(x, y, cond).statistic,
                               rtol=1e-12)
    np.testing.assert_allclose(a.invariance("kd_A", x, cond).statistic,
                               b.invariance("kd_A", x, cond).statistic, rtol=1e-12)
    resp = a.response_matrix()
    want = response_matrix(Moments.from_samples(samples, VARIABLES), DESIGN)
    np.testing.assert_array_equal(resp.pvalue, want.pvalue)


def test_errors_name_the_culprit():
    moments = Moments.from_samples(_samples(), VARIABLES)
    tester = GaussianTester(moments, DESIGN)
    with pytest.raises(ValueError, match="unknown regime 'kd_Z'"):
        tester.invariance("kd_Z", [0], [[1]])
    with pytest.raises(ValueError, match="'ctrl1' is part of the reference"):
        tester.invariance("ctrl1", [0], [[1]])
    no_ref = Design(VARIABLES, tuple(Regime(r.name, r.targets) for r in DESIGN.regimes))
    with pytest.raises(InputError, match="--reference"):
        GaussianTester(moments, no_ref)
    other = Design(("A", "B", "C", "D", "Q"), DESIGN.regimes)
    with pytest.raises(ValueError, match="variables differ"):
        GaussianTester(moments, other)


# --------------------------------------------------------------------------- rank variant

REPS = 2000
GROUP = 100
N = 150  # rows per regime


def _block_diagonal(blocks: np.ndarray) -> np.ndarray:
    """(K, G, q, q) per-repetition scatters -> (K, G*q, G*q) block-diagonal scatters."""
    k, g, q, _ = blocks.shape
    out = np.zeros((k, g, q, g, q))
    idx = np.arange(g)
    out[:, idx, :, idx, :] = blocks.transpose(1, 0, 2, 3)
    return out.reshape(k, g * q, g * q)


def test_rank_variant_null_uniform_on_non_gaussian_data():
    # Harris & Drton (2013): Gaussian tests on normal scores of pooled ranks keep their
    # level under monotone transforms; scipy.stats.kstest against the uniform law.
    normal_scores = pytest.importorskip("pipeline.stats.ranks").normal_scores
    rng = np.random.default_rng(777)
    # per repetition: U, V independent within each regime with different exponential /
    # t laws per regime; X, Y, S a nonparanormal chain X <- S -> Y (same in both
    # regimes); W with the same t law in both regimes.
    blocks = []
    for k in range(2):
        u = rng.exponential(size=(REPS, N)) * (1 + 2 * k) + 2 * k
        v = rng.standard_t(3, size=(REPS, N)) * (1 - 0.5 * k) + 4 * k
        zs = rng.normal(size=(REPS, N))
        x = np.exp(0.8 * zs + rng.normal(size=(REPS, N)))
        y = (-0.6 * zs + rng.normal(size=(REPS, N))) ** 3
        w = rng.standard_t(4, size=(REPS, N))
        blocks.append(np.stack([u, v, x, y, np.exp(zs), w], axis=2))  # (REPS, N, 6)
    rows = np.concatenate(blocks, axis=1)  # pooled rows: regime 0 first, then regime 1
    scores = normal_scores(rows.transpose(1, 0, 2).reshape(2 * N, REPS * 6))
    scores = scores.reshape(2, N, REPS, 6).transpose(0, 2, 1, 3)  # (K, REPS, N, 6)
    mean = scores.mean(axis=2)
    dev = scores - mean[:, :, None, :]
    scatter = np.swapaxes(dev, 2, 3) @ dev
    design = Design(tuple(f"{v}{r}" for r in range(GROUP) for v in "UVXYSW"),
                    (Regime("ctrl", reference=True), Regime("drug", ("U",))))
    base = 6 * np.arange(GROUP)
    p_marg, p_cond, p_inv = [], [], []
    for g in range(0, REPS, GROUP):
        sl = slice(g, g + GROUP)
        moments = Moments(design.variables, ("ctrl", "drug"), np.array([N, N]),
                          mean[:, sl].reshape(2, -1), _block_diagonal(scatter[:, sl]))
        tester = GaussianTester(moments, design)
        p_marg.append(tester.ci(base, base + 1, np.zeros((GROUP, 0), int)).pvalue)
        p_cond.append(tester.ci(base + 2, base + 3, (base + 4)[:, None]).pvalue)
        p_inv.append(tester.invariance("drug", base + 5, np.zeros((GROUP, 0), int)).pvalue)
    for p in (p_marg, p_cond):
        p = np.concatenate(p)
        assert p.shape == (REPS,)
        assert stats.kstest(p, "uniform").pvalue > 0.01
    # the variance part of the LR test is slightly conservative on normal scores (bounded,
    # kurtosis below 3 at finite n), so its level is checked rather than exact uniformity:
    # within 3 binomial standard errors of 0.05 from above (common practice)
    p = np.concatenate(p_inv)
    assert 0.025 < np.mean(p <= 0.05) < 0.05 + 3 * np.sqrt(0.05 * 0.95 / REPS)
    assert stats.kstest(p, "uniform").pvalue > 1e-4  # no gross departure
