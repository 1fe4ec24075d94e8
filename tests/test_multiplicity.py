"""Tests of pipeline.independence.multiplicity against statsmodels."""

from __future__ import annotations

import numpy as np
import pytest
from statsmodels.stats.multitest import multipletests

from pipeline.independence.multiplicity import benjamini_hochberg


@pytest.mark.parametrize("seed", range(5))
def test_benjamini_hochberg_matches_statsmodels(seed):
    rng = np.random.default_rng(seed)
    p = np.concatenate([rng.uniform(size=40), rng.uniform(0, 1e-3, size=10)]).reshape(5, 10)
    # statsmodels' fdr_bh is the outside reference
    expected = multipletests(p.ravel(), method="fdr_bh")[1].reshape(p.shape)
    np.testing.assert_allclose(benjamini_hochberg(p), expected, rtol=1e-12)


def test_nan_entries_stay_out_of_the_family():
    p = np.array([0.01, np.nan, 0.02, 0.5])
    got = benjamini_hochberg(p)
    expected = multipletests([0.01, 0.02, 0.5], method="fdr_bh")[1]  # statsmodels
    assert np.isnan(got[1])
    np.testing.assert_allclose(got[[0, 2, 3]], expected)


def test_out_of_range_is_refused():
    with pytest.raises(ValueError, match="lie in"):
        benjamini_hochberg([0.5, 1.5])
