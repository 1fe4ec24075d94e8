"""Normal scores: the rank-based transform behind ``--test rank``.

Each column is replaced by ``Phi^{-1}(r / (n + 1))`` where ``r`` is the rank of the value
among the n pooled rows (ties get their average rank) and ``Phi^{-1}`` is the standard
normal quantile. Gaussian tests on these scores are the rank-based variant of Harris &
Drton (2013): they keep their level for any monotone transform of Gaussian data
(a nonparanormal model).

>>> import numpy as np
>>> normal_scores(np.array([[3.0], [1.0], [2.0]])).round(3).ravel().tolist()
[0.674, -0.674, 0.0]

References
----------
1. N. Harris, M. Drton (2013). PC algorithm for nonparanormal graphical models.
   Journal of Machine Learning Research 14, 3365-3383.
"""

from __future__ import annotations

import numpy as np
from scipy.special import ndtri

__all__ = ["normal_scores", "average_ranks"]


def average_ranks(values: np.ndarray) -> np.ndarray:
    """Column-wise ranks 1..n of a 2-D array, ties sharing their average rank.

    Parameters
    ----------
    values : float array (n, p)
        Must not contain NaN.

    Returns
    -------
    float array (n, p)
    """
    x = np.asarray(values, dtype=np.float64)
    if x.ndim != 2:
        raise ValueError(f"values should be a 2-D array (n, p), got shape {x.shape}")
    if np.isnan(x).any():
        raise ValueError("values should not contain NaN: drop or fill the missing values first")
    n, p = x.shape
    if n == 0:
        return np.zeros((0, p))
    # 1. sort each column; mark the first and last position of every run of ties
    order = np.argsort(x, axis=0, kind="stable")
    s = np.take_along_axis(x, order, axis=0)
    idx = np.broadcast_to(np.arange(n)[:, None], (n, p))
    changes = s[1:] != s[:-1]
    first = np.vstack([np.ones((1, p), dtype=bool), changes])
    last = np.vstack([changes, np.ones((1, p), dtype=bool)])
    # 2. start and end of the run each sorted position belongs to
    start = np.maximum.accumulate(np.where(first, idx, 0), axis=0)
    end = np.minimum.accumulate(np.where(last, idx, n - 1)[::-1], axis=0)[::-1]
    # 3. average rank of the run, put back in the original row order
    ranks = np.empty((n, p))
    np.put_along_axis(ranks, order, (start + end) / 2.0 + 1.0, axis=0)
    return ranks


def normal_scores(values: np.ndarray) -> np.ndarray:
    """Column-wise normal scores of the pooled average ranks (Harris & Drton 2013).

    Parameters
    ----------
    values : float array (n, p) or (n,)
        The pooled rows of all regimes; must not contain NaN.

    Returns
    -------
    float array of the same shape: ``Phi^{-1}(rank / (n + 1))`` per column.

    Raises
    ------
    ValueError
        If `values` has more than two dimensions or contains NaN.
    """
    x = np.asarray(values, dtype=np.float64)
    if x.ndim == 1:
        return normal_scores(x[:, None])[:, 0]
    ranks = average_ranks(x)
    return ndtri(ranks / (x.shape[0] + 1.0))
