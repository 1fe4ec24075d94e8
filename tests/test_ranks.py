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
