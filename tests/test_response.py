"""The response matrix type: adjusted p-values, masks and the long table."""

from __future__ import annotations

import numpy as np
from statsmodels.stats.multitest import multipletests

from pipeline.independence.response import ResponseMatrix


def _matrix(seed: int = 0) -> ResponseMatrix:
    rng = np.random.default_rng(seed)
    p = np.concatenate([rng.uniform(size=12), rng.uniform(0, 1e-4, size=3)]).reshape(3, 5)
    return ResponseMatrix(("r1", "r2", "r3"), tuple("ABCDE"), rng.normal(size=(3, 5)), p,
                          rng.normal(size=(3, 5)), sd_ratio=rng.uniform(0.5, 2, (3, 5)))


def test_adjusted_over_the_whole_matrix():
    r = _matrix()
    # statsmodels' fdr_bh over the flattened matrix is the outside reference
    want = multipletests(r.pvalue.ravel(), method="fdr_bh")[1].reshape(3, 5)
    np.testing.assert_allclose(r.adjusted, want, rtol=1e-12)
    np.testing.assert_array_equal(r.marked(0.01), want <= 0.01)
    np.testing.assert_array_equal(r.shifted(0.01), r.pvalue <= 0.01)


def test_long_table_has_one_row_per_pair():
    r = _matrix(1)
    frame = r.to_frame()
    assert len(frame) == 15 and list(frame.columns[:2]) == ["regime", "variable"]
    row = frame[(frame.regime == "r2") & (frame.variable == "D")].iloc[0]
    assert row["pvalue"] == r.pvalue[1, 3] and row["shift"] == r.shift[1, 3]
    assert len(r.summary(top=4).splitlines()) == 6  # title, header, four rows
