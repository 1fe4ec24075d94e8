"""Combining the evidence of several regimes, or of several tests, into one p-value.

A conditional independence ``X _||_ Y | S`` given the regime holds when the partial
correlation is zero in *every* regime. Regime k gives ``zeta_k = sqrt(m_k) atanh(r_k)``,
standard normal under the null (Fisher 1924). Two combinations of the K regimes are valid
under that null:

- the signed sum ``Z = sum_k sqrt(m_k) zeta_k / sqrt(sum_k m_k)``, standard normal, most
  powerful when the partial correlation has one sign in every regime;
- the sum of squares ``Q = sum_k zeta_k^2``, chi-square with K degrees of freedom, which
  keeps its power when the signs differ between regimes (an intervention on a middle node
  can flip the sign of a partial correlation, and then the signed terms cancel).

Their p-values are joined by the Cauchy combination of Liu & Xie (2020): with weights 1/2,
``T = (tan(pi (1/2 - p_1)) + tan(pi (1/2 - p_2))) / 2`` is standard Cauchy under the null
whatever the dependence between the two tests in the tail, and ``p = 1/2 - arctan(T) / pi``.
With one regime ``Q = Z^2``, so the combination gives back the classical Fisher z test
exactly. A p-value near 1 sends its tangent to minus infinity and would mask the other
test (a signed sum that cancels exactly would hide a strong sum of squares), so p-values
above `P_CAP` are set to `P_CAP` first; this can only matter when one test is far from
significance and the other very significant, and its effect on the level is below
1e-4 at alpha = 0.01 (the calibration tests check the level).

>>> import numpy as np
>>> z = np.array([[5.0, -5.0]])  # opposite signs, equal weights: the signed sum cancels
>>> p_signed, p_combined = stratified_pvalues(z / np.sqrt(100), np.array([100.0, 100.0]))
>>> bool(p_signed[0] > 0.5), bool(p_combined[0] < 1e-9)
(True, True)

References
----------
1. R. A. Fisher (1924). The distribution of the partial correlation coefficient.
   Metron 3, 329-332.
2. Y. Liu, J. Xie (2020). Cauchy combination test: a powerful test with analytic p-value
   calculation under arbitrary dependency structures. Journal of the American
   Statistical Association 115(529), 393-402.
"""

from __future__ import annotations

import numpy as np
from scipy.special import chdtrc, ndtr, ndtri

__all__ = ["P_CAP", "cauchy_combination", "stratified_pvalues", "stratified_sums",
           "pvalues_from_sums", "z_equivalent"]

#: p-values above this are capped before the Cauchy combination (see the module docstring).
P_CAP = 0.99


def _cot_pi(p: np.ndarray) -> np.ndarray:
    """``tan(pi (1/2 - p)) = cot(pi p)``, exact for tiny p (``1 / (pi p)``), inf at 0."""
    with np.errstate(divide="ignore", over="ignore"):
        return np.where(p < 1e-15, 1.0 / (np.pi * p), 1.0 / np.tan(np.pi * p))


def cauchy_combination(p1: np.ndarray, p2: np.ndarray) -> np.ndarray:
    """Equal-weight Cauchy combination of two arrays of p-values (Liu & Xie 2020).

    p-values above `P_CAP` count as `P_CAP`. NaN propagates.
    """
    p1 = np.minimum(np.asarray(p1, dtype=float), P_CAP)
    p2 = np.minimum(np.asarray(p2, dtype=float), P_CAP)
    t = 0.5 * (_cot_pi(p1) + _cot_pi(p2))
    # p = 1/2 - arctan(t)/pi, written to keep precision for large t
    with np.errstate(divide="ignore"):
        return np.where(t > 0, np.arctan(1.0 / t) / np.pi, 0.5 + np.arctan(-t) / np.pi)


def stratified_sums(z: np.ndarray, weight: np.ndarray
                    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The per-test sums the combination needs: ``sum m_k z_k``, ``sum m_k``,
    ``sum m_k z_k^2`` and the number of regimes used (``m_k > 0``).

    `z` is (m, K); `weight` is (K,) (shared: two matrix-vector products) or (m, K).
    """
    z = np.asarray(z, dtype=float)
    w = np.asarray(weight, dtype=float)
    if w.ndim == 1:
        return z @ w, np.full(z.shape[0], w.sum()), (z * z) @ w, \
            np.full(z.shape[0], float((w > 0).sum()))
    wz = w * z
    return wz.sum(axis=1), w.sum(axis=1), (wz * z).sum(axis=1), (w > 0).sum(axis=1)


def pvalues_from_sums(signed: np.ndarray, total: np.ndarray, squares: np.ndarray,
                      used: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``(p_signed, p_combined)`` from the sums of `stratified_sums` (see the module)."""
    z = signed / np.sqrt(np.where(total > 0, total, 1.0))
    p_signed = 2.0 * ndtr(-np.abs(z))
    several = used > 1
    combined = p_signed.copy()
    if several.all():  # the common case: every test uses the same regimes
        df = used[0] if np.all(used == used[0]) else used
        combined = cauchy_combination(p_signed, chdtrc(df, squares))
    elif several.any():  # one regime: Q = Z^2, the classical test, nothing to combine
        p_sq = chdtrc(used[several], squares[several])
        combined[several] = cauchy_combination(p_signed[several], p_sq)
    none = used == 0
    if none.any():
        p_signed[none] = 1.0
        combined[none] = 1.0
    return p_signed, combined


def stratified_pvalues(z: np.ndarray, weight: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The signed-sum p-value and the combined (sign-robust) p-value of stratified z.

    Parameters
    ----------
    z : array (m, K)
        Per-regime Fisher transforms ``atanh(r_k)``; entries with weight 0 are ignored.
    weight : array (K,) or (m, K)
        ``m_k = n_k - |S| - 3`` of each regime used, 0 for a regime left out.

    Returns
    -------
    p_signed, p_combined : arrays (m,)
        Two-sided p of the signed sum Z, and the Cauchy combination of it with the
        chi-square p of the sum of squares Q (K = the regimes used by each test).
        A test that uses no regime gets p = 1.
    """
    return pvalues_from_sums(*stratified_sums(z, weight))


def z_equivalent(p: np.ndarray) -> np.ndarray:
    """The normal deviate of a two-sided p-value, ``Phi^-1(1 - p/2) >= 0`` (inf at p = 0).

    Reported as the statistic of combined tests: it is the |z| of a single Fisher z test
    with that p-value.
    """
    p = np.asarray(p, dtype=float)
    with np.errstate(divide="ignore"):
        return np.where(p >= 1.0, 0.0, -ndtri(np.clip(p, 0.0, 1.0) / 2.0))
