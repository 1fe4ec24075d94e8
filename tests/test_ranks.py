"""Normal scores against scipy's rankdata and normal quantile function."""

import numpy as np
import pytest
from scipy import stats

from pipeline.stats.ranks import average_ranks, normal_scores


def test_average_ranks_match_scipy_with_ties():
    rng = np.random.default_rng(0)
    x = np.column_stack([rng.integers(0, 5, 300), rng.standard_normal(300),
                         np.repeat([2.0, 1.0, 3.0], 100)]).astype(float)
    # scipy.stats.rankdata(method="average") as the outside reference
    np.testing.assert_array_equal(average_ranks(x), stats.rankdata(x, axis=0))


def test_normal_scores_match_scipy():
    rng = np.random.default_rng(1)
    x = np.column_stack([rng.exponential(size=250), rng.integers(0, 7, 250)]).astype(float)
    n = x.shape[0]
    ref = stats.norm.ppf(stats.rankdata(x, axis=0) / (n + 1))  # Harris & Drton (2013)
    np.testing.assert_allclose(normal_scores(x), ref, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(normal_scores(x[:, 0]), ref[:, 0], rtol=1e-12, atol=1e-15)


def test_scores_invariant_under_monotone_transform():
    rng = np.random.default_rng(2)
    x = rng.standard_normal((100, 2))
    np.testing.assert_allclose(normal_scores(np.exp(x)), normal_scores(x))


def test_edge_cases():
    assert normal_scores(np.zeros((0, 3))).shape == (0, 3)
    assert np.all(normal_scores(np.ones((5, 1))) == 0.0)  # all tied: middle rank, score 0
    with pytest.raises(ValueError, match="NaN"):
        normal_scores(np.array([[1.0], [np.nan]]))
    with pytest.raises(ValueError):
        normal_scores(np.zeros((2, 2, 2)))


def test_rank_correlations_are_normal_score_correlations():
    # normal scores of the ranks within the sample (scipy.stats), then numpy's corrcoef
    from scipy import stats

    from pipeline.stats.ranks import rank_correlations

    rng = np.random.default_rng(3)
    x = rng.normal(size=(80, 4)) @ rng.normal(size=(4, 4))
    x[:, 2] = np.round(x[:, 2])  # ties
    scores = stats.norm.ppf(stats.rankdata(x, axis=0) / 81)
    np.testing.assert_allclose(rank_correlations(x), np.corrcoef(scores, rowvar=False),
                               atol=1e-12)
    # a monotone transform of a column changes nothing
    y = x.copy()
    y[:, 0] = np.exp(y[:, 0])
    np.testing.assert_allclose(rank_correlations(y), rank_correlations(x), atol=1e-12)
    x[:, 1] = 5.0  # a constant column: zero row and column
    out = rank_correlations(x)
    assert out[1].tolist() == [0.0] * 4 and out[:, 1].tolist() == [0.0] * 4


def test_anchored_scores_keep_order_and_the_reference_scores():
    from pipeline.stats.ranks import anchored_normal_scores

    rng = np.random.default_rng(4)
    ref = rng.exponential(size=(200, 2))
    values = np.vstack([ref, rng.exponential(size=(50, 2)) * 3 + 1.0])
    out = anchored_normal_scores(ref, values)
    # the reference's rows get their own normal scores (scipy.stats, via normal_scores)
    np.testing.assert_allclose(out[:200], normal_scores(ref), atol=1e-12)
    # one increasing map per column: order preserved, also beyond the reference's range
    for j in range(2):
        order = np.argsort(values[:, j], kind="stable")
        assert np.all(np.diff(out[order, j]) >= -1e-12)
    assert out[:, 0].max() > normal_scores(ref)[:, 0].max()  # extended past the range
