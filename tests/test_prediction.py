"""ROC AUC, precision, recall and observed movers, against scipy and statsmodels."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import mannwhitneyu
from statsmodels.stats.multitest import multipletests

from pipeline.analyses.prediction import (
    adjusted_pvalues,
    observed_movers,
    precision_recall,
    roc_auc,
)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_auc_is_mann_whitney_u_over_pairs(seed):
    rng = np.random.default_rng(seed)
    scores = rng.integers(0, 5, size=60).astype(float)  # many ties
    labels = rng.random(60) < 0.35
    u = mannwhitneyu(scores[labels], scores[~labels], alternative="two-sided").statistic
    # scipy.stats.mannwhitneyu: U of the first sample; AUC = U / (n1 n0)
    assert roc_auc(scores, labels) == pytest.approx(u / (labels.sum() * (~labels).sum()))
    continuous = rng.normal(size=60) + labels
    u = mannwhitneyu(continuous[labels], continuous[~labels]).statistic
    assert roc_auc(continuous, labels) == pytest.approx(u / (labels.sum() * (~labels).sum()))


def test_auc_limits_and_undefined():
    assert roc_auc([3, 2, 1], [True, False, False]) == 1.0
    assert roc_auc([1, 2, 3], [True, False, False]) == 0.0
    assert roc_auc([1, 1, 1], [True, False, True]) == 0.5  # all tied: a guess
    assert roc_auc([1, 2], [False, False]) is None
    assert roc_auc([], []) is None
    with pytest.raises(ValueError, match="one length"):
        roc_auc([1, 2], [True])


def test_precision_recall_counts():
    # precision TP / predicted, recall TP / observed (common practice)
    assert precision_recall([1, 1, 0, 0], [1, 0, 1, 0]) == (2, 2, 1, 0.5, 0.5)
    assert precision_recall([0, 0], [0, 1]) == (0, 1, 0, None, 0.0)
    assert precision_recall([1, 0], [0, 0]) == (1, 0, 0, 0.0, None)


def test_observed_movers_adjusts_and_applies_the_floor():
    p = np.array([1e-12, 1e-12, 1e-12, 0.02, 0.5, 1e-8])
    shift = np.array([0.5, 0.05, -0.3, 1.0, 1.0, 0.0])
    ratio = np.array([1.0, 1.0, 1.0, 1.0, 1.0, 1.5])
    moved, adjusted = observed_movers(p, shift, ratio, alpha=0.01, min_shift=0.2)
    # Benjamini-Hochberg as in statsmodels.stats.multitest.multipletests(method="fdr_bh")
    np.testing.assert_allclose(adjusted, multipletests(p, method="fdr_bh")[1])
    # a significant but tiny shift does not count; a variance change does
    assert moved.tolist() == [True, False, True, False, False, True]
    # the sd ratio counts either way: 1 / 1.5 is as far from 1 as 1.5
    moved, _ = observed_movers(p[:1], [0.0], [1 / 1.5], alpha=0.01, min_shift=0.2)
    assert moved.tolist() == [True]
    # a variance collapsed to zero (a complete knockout) is a mover; NaN is not
    moved, _ = observed_movers([0.0, 0.0], [0.0, np.nan], [0.0, np.nan], alpha=0.01,
                               min_shift=0.2)
    assert moved.tolist() == [True, False]
    assert adjusted_pvalues([]).size == 0
