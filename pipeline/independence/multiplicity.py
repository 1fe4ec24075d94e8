"""Adjusted p-values for families of tests.

When many tests are read together (every variable in every regime of the response
matrix, every declared target), some small p-values arise by chance. The step-up
procedure of Benjamini & Hochberg (1995) controls the false discovery rate, the expected
share of false findings among those reported; its adjusted p-value of the test ranked
``i`` of ``m`` is ``min_{j >= i} m p_(j) / j``, capped at 1.

>>> benjamini_hochberg([0.01, 0.04, 0.03, 0.2]).round(3).tolist()
[0.04, 0.053, 0.053, 0.2]

References
----------
1. Y. Benjamini, Y. Hochberg (1995). Controlling the false discovery rate: a practical
   and powerful approach to multiple testing. Journal of the Royal Statistical Society B
   57(1), 289-300.
"""

from __future__ import annotations

import numpy as np

__all__ = ["benjamini_hochberg"]


def benjamini_hochberg(pvalues) -> np.ndarray:
    """Benjamini-Hochberg adjusted p-values, in the shape of `pvalues`.

    NaN entries are left out of the family and stay NaN.

    Raises
    ------
    ValueError
        If a p-value lies outside [0, 1].
    """
    p = np.asarray(pvalues, dtype=float)
    flat = p.ravel()
    ok = ~np.isnan(flat)
    vals = flat[ok]
    if vals.size and (vals.min() < 0 or vals.max() > 1):
        raise ValueError(f"pvalues should lie in [0, 1]; got values from {vals.min()} "
                         f"to {vals.max()}")
    out = np.full(flat.shape, np.nan)
    m = vals.size
    if m:
        order = np.argsort(vals, kind="stable")
        scaled = vals[order] * m / np.arange(1, m + 1)
        adj = np.minimum(np.minimum.accumulate(scaled[::-1])[::-1], 1.0)
        res = np.empty(m)
        res[order] = adj
        out[ok] = res
    return out.reshape(p.shape)
