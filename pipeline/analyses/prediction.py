"""Measures of a prediction of movers: ROC AUC, precision, recall; the observed movers.

A prediction scores each variable (the higher, the likelier it moves) and names the
predicted movers; the observation names the variables that moved. The **ROC AUC** of
the scores is the probability that a mover scores above a non-mover, ties counting one
half: the Mann-Whitney form ``U / (n1 n0)`` [1]_, 0.5 for a guess and 1 for a perfect
ranking. **Precision** is the share of predicted movers that moved, **recall** the
share of movers that were predicted.

A variable is an **observed mover** when its marginal invariance test against the
reference rejects at `alpha` after a Benjamini-Hochberg adjustment [2]_ over the
variables of the regime, and its effect is at least `min_shift`: a standardized mean
shift ``|mean_k - mean_ref| / sd_ref >= min_shift``, or a ratio of standard deviations
beyond ``1 + min_shift`` either way. With thousands of samples every small drift is
significant; the floor keeps the movers a biologist would call moved.

References
----------
.. [1] Hanley, J. A. & McNeil, B. J. (1982). The meaning and use of the area under a
   receiver operating characteristic (ROC) curve. *Radiology* 143, 29-36.
.. [2] Benjamini, Y. & Hochberg, Y. (1995). Controlling the false discovery rate.
   *Journal of the Royal Statistical Society B* 57(1), 289-300.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from pipeline.independence.multiplicity import benjamini_hochberg

__all__ = ["roc_auc", "precision_recall", "observed_movers", "adjusted_pvalues"]


def roc_auc(scores: Sequence[float], labels: Sequence[bool]) -> float | None:
    """Area under the ROC curve of `scores` for the positives `labels`; None if undefined.

    The Mann-Whitney form: the share of (positive, negative) pairs in which the
    positive scores higher, ties counting one half, i.e. ``U / (n1 n0)``.

    >>> roc_auc([0.9, 0.4, 0.4, 0.1], [True, True, False, False])
    0.875
    """
    s = np.asarray(scores, dtype=float)
    y = np.asarray(labels, dtype=bool)
    if s.shape != y.shape or s.ndim != 1:
        raise ValueError(f"scores and labels should be 1-D of one length; got {s.shape} "
                         f"and {y.shape}")
    n1, n0 = int(y.sum()), int((~y).sum())
    if n1 == 0 or n0 == 0:
        return None
    # midranks: U1 = (sum of positive ranks) - n1 (n1 + 1) / 2
    order = np.argsort(s, kind="mergesort")
    ranks = np.empty(s.size)
    sorted_s = s[order]
    edges = np.flatnonzero(np.diff(sorted_s)) + 1
    starts = np.concatenate([[0], edges])
    stops = np.concatenate([edges, [s.size]])
    mid = (starts + stops + 1) / 2.0  # average of the 1-based ranks start+1..stop
    ranks[order] = np.repeat(mid, stops - starts)
    u1 = ranks[y].sum() - n1 * (n1 + 1) / 2.0
    return float(u1 / (n1 * n0))


def precision_recall(predicted: Sequence[bool], labels: Sequence[bool]
                     ) -> tuple[int, int, int, float | None, float | None]:
    """``(predicted, observed, true positives, precision, recall)``; a fraction is None
    when its denominator is 0.

    >>> precision_recall([True, True, False], [True, False, True])
    (2, 2, 1, 0.5, 0.5)
    """
    p = np.asarray(predicted, dtype=bool)
    y = np.asarray(labels, dtype=bool)
    n_pred, n_obs, tp = int(p.sum()), int(y.sum()), int((p & y).sum())
    return (n_pred, n_obs, tp, tp / n_pred if n_pred else None, tp / n_obs if n_obs else None)


def adjusted_pvalues(pvalues: Sequence[float]) -> np.ndarray:
    """Benjamini-Hochberg adjusted p-values (an empty family stays empty)."""
    p = np.asarray(pvalues, dtype=float)
    return benjamini_hochberg(p) if p.size else p


def observed_movers(pvalue: np.ndarray, shift: np.ndarray, sd_ratio: np.ndarray, *,
                    alpha: float, min_shift: float) -> tuple[np.ndarray, np.ndarray]:
    """``(moved, adjusted p)``: BH-adjusted p <= alpha and an effect of at least `min_shift`.

    The effect is ``|shift| >= min_shift`` or ``|log sd_ratio| >= log(1 + min_shift)``.
    """
    adjusted = adjusted_pvalues(pvalue)
    with np.errstate(divide="ignore", invalid="ignore"):
        spread = np.abs(np.log(np.asarray(sd_ratio, dtype=float)))
        big = (np.abs(shift) >= min_shift) | (spread >= np.log1p(min_shift))
    return (adjusted <= alpha) & np.nan_to_num(big, nan=False).astype(bool), adjusted
