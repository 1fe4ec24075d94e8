"""Per-regime sufficient statistics: count, mean vector and centred scatter matrix.

Every Gaussian test in Orienteer reads only these, plus the third and fourth central
moment sums of each variable (the tails: the invariance test's variance part and the
check's warning about non-Gaussian data). They are accumulated in one streaming pass over
chunks of rows with the pairwise updates of Chan, Golub & LeVeque (1979) and, for the
higher moments, Pebay (2008), so memory is O(K p^2) whatever the number of rows.

References
----------
1. T. F. Chan, G. H. Golub, R. J. LeVeque (1979). Updating formulae and a pairwise
   algorithm for computing sample variances. Technical report STAN-CS-79-773.
2. P. Pebay (2008). Formulas for robust, one-pass parallel computation of covariances
   and arbitrary-order statistical moments. Sandia report SAND2008-6212.
"""

from __future__ import annotations

import numpy as np

from pipeline.records import record

__all__ = ["Moments", "merge_moments", "merge_tails"]


def merge_moments(
    n_a: int, mean_a: np.ndarray, scatter_a: np.ndarray,
    n_b: int, mean_b: np.ndarray, scatter_b: np.ndarray,
) -> tuple[int, np.ndarray, np.ndarray]:
    """Merge the moments of two disjoint sets of rows (Chan, Golub & LeVeque 1979).

    Returns ``(n, mean, scatter)`` of the union.
    """
    n = n_a + n_b
    if n_a == 0:
        return n_b, np.array(mean_b, dtype=float), np.array(scatter_b, dtype=float)
    if n_b == 0:
        return n_a, np.array(mean_a, dtype=float), np.array(scatter_a, dtype=float)
    delta = mean_b - mean_a
    mean = mean_a + delta * (n_b / n)
    scatter = scatter_a + scatter_b + np.outer(delta, delta) * (n_a * n_b / n)
    return n, mean, scatter


def merge_tails(n_a: int, mean_a: np.ndarray, m2_a: np.ndarray, m3_a: np.ndarray,
                m4_a: np.ndarray, n_b: int, mean_b: np.ndarray, m2_b: np.ndarray,
                m3_b: np.ndarray, m4_b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Third and fourth central moment sums of the union of two sets of rows (Pebay 2008).

    `m2` are the per-variable sums of squares about each set's mean (the scatter
    diagonals). Returns ``(m3, m4)`` of the union.
    """
    n = n_a + n_b
    if n_a == 0:
        return np.array(m3_b, dtype=float), np.array(m4_b, dtype=float)
    if n_b == 0:
        return np.array(m3_a, dtype=float), np.array(m4_a, dtype=float)
    d = mean_b - mean_a
    d2 = d * d
    m3 = (m3_a + m3_b + d * d2 * (n_a * n_b * (n_a - n_b) / n**2)
          + 3.0 * d * (n_a * m2_b - n_b * m2_a) / n)
    m4 = (m4_a + m4_b + d2 * d2 * (n_a * n_b * (n_a * n_a - n_a * n_b + n_b * n_b) / n**3)
          + 6.0 * d2 * (n_a * n_a * m2_b + n_b * n_b * m2_a) / n**2
          + 4.0 * d * (n_a * m3_b - n_b * m3_a) / n)
    return m3, m4


@record
class Moments:
    """Sufficient statistics of K regimes over p variables.

    Attributes
    ----------
    variables : tuple of str, length p
    regimes : tuple of str, length K
    count : int64 array (K,)
    mean : float64 array (K, p)
    scatter : float64 array (K, p, p), centred sums of squares and cross-products
    m3, m4 : float64 arrays (K, p) or None
        Per-variable sums of cubed and fourth-power deviations from the regime mean;
        None when unknown (the tests then take the tails as Gaussian).
    ci_scatter : float64 array (K, p, p) or None
        The matrices the conditional-independence tests read instead of `scatter` (the
        rank variant: within-regime rank correlations turned into Pearson correlations;
        see `pipeline.stats.ranks`); None: `scatter`.
    ci_variance : float
        The null variance of ``sqrt(n - |S| - 3) atanh(r)`` for those matrices (1 for
        Pearson correlations).
    """

    variables: tuple[str, ...]
    regimes: tuple[str, ...]
    count: np.ndarray
    mean: np.ndarray
    scatter: np.ndarray
    m3: np.ndarray | None = None
    m4: np.ndarray | None = None
    ci_scatter: np.ndarray | None = None
    ci_variance: float = 1.0

    @classmethod
    def from_samples(cls, samples: dict[str, np.ndarray], variables: tuple[str, ...]) -> Moments:
        """Moments of in-memory samples: ``{regime: (n_k, p) array}`` (for tests and small data)."""
        regimes = tuple(samples)
        p = len(variables)
        count = np.zeros(len(regimes), dtype=np.int64)
        mean = np.zeros((len(regimes), p))
        scatter = np.zeros((len(regimes), p, p))
        m3 = np.zeros((len(regimes), p))
        m4 = np.zeros((len(regimes), p))
        for k, name in enumerate(regimes):
            x = np.asarray(samples[name], dtype=float).reshape(-1, p)
            count[k] = x.shape[0]
            if x.shape[0]:
                mean[k] = x.mean(axis=0)
                d = x - mean[k]
                scatter[k] = d.T @ d
                d2 = d * d
                m3[k] = (d2 * d).sum(axis=0)
                m4[k] = (d2 * d2).sum(axis=0)
        return cls(tuple(variables), regimes, count, mean, scatter, m3, m4)

    def index(self, regime: str) -> int:
        """Position of `regime` in `regimes`."""
        return self.regimes.index(regime)

    def pooled(self, regimes: list[str] | tuple[str, ...]) -> tuple[int, np.ndarray, np.ndarray]:
        """``(n, mean, scatter)`` of the named regimes taken together (e.g. the reference)."""
        p = len(self.variables)
        n, mean, scatter = 0, np.zeros(p), np.zeros((p, p))
        for name in regimes:
            k = self.index(name)
            n, mean, scatter = merge_moments(n, mean, scatter,
                                             int(self.count[k]), self.mean[k], self.scatter[k])
        return n, mean, scatter

    def pooled_tails(self, regimes: list[str] | tuple[str, ...]) -> tuple[np.ndarray, np.ndarray]:
        """``(m3, m4)`` of the named regimes taken together (zeros when unknown)."""
        p = len(self.variables)
        if self.m3 is None or self.m4 is None:
            return np.zeros(p), np.zeros(p)
        n, mean, m2, m3, m4 = 0, np.zeros(p), np.zeros(p), np.zeros(p), np.zeros(p)
        for name in regimes:
            k = self.index(name)
            nk, mk = int(self.count[k]), self.mean[k]
            m2k = np.diagonal(self.scatter[k])
            m3, m4 = merge_tails(n, mean, m2, m3, m4, nk, mk, m2k, self.m3[k], self.m4[k])
            n_new = n + nk
            if n_new:
                delta = mk - mean
                m2 = m2 + m2k + delta * delta * (n * nk / n_new)
                mean = mean + delta * (nk / n_new)
            n = n_new
        return m3, m4

    def subset(self, regimes: list[str] | tuple[str, ...]) -> Moments:
        """The statistics of the named regimes only, in that order."""
        idx = [self.index(r) for r in regimes]
        return Moments(self.variables, tuple(regimes), self.count[idx], self.mean[idx],
                       self.scatter[idx], None if self.m3 is None else self.m3[idx],
                       None if self.m4 is None else self.m4[idx],
                       None if self.ci_scatter is None else self.ci_scatter[idx],
                       self.ci_variance)

    def shape(self) -> tuple[np.ndarray, np.ndarray]:
        """Within-regime skewness and excess kurtosis of each variable, (K, p) each.

        NaN where unknown (no m3/m4) or where a variable is constant within the regime.
        """
        k, p = len(self.regimes), len(self.variables)
        if self.m3 is None or self.m4 is None:
            return np.full((k, p), np.nan), np.full((k, p), np.nan)
        n = np.asarray(self.count, dtype=float)[:, None]
        m2 = np.diagonal(self.scatter, axis1=1, axis2=2) / np.maximum(n, 1)
        ok = (m2 > 0) & ~self.constant()
        with np.errstate(divide="ignore", invalid="ignore"):
            skew = np.where(ok, self.m3 / np.maximum(n, 1) / m2**1.5, np.nan)
            kurt = np.where(ok, self.m4 / np.maximum(n, 1) / m2**2 - 3.0, np.nan)
        return skew, kurt

    def variances(self) -> np.ndarray:
        """Per-regime sample variances, shape (K, p) (ddof=1; 0 where n_k < 2)."""
        diag = np.diagonal(self.scatter, axis1=1, axis2=2)
        denom = np.maximum(self.count - 1, 1)[:, None]
        return np.where(self.count[:, None] > 1, diag / denom, 0.0)

    def constant(self, rtol: float = 1e-12) -> np.ndarray:
        """(K, p) mask of variables constant within a regime (variance ~0 relative to the scale)."""
        var = self.variances()
        scale = np.maximum(np.abs(self.mean) ** 2, var.max(axis=0, keepdims=True))
        return var <= rtol * np.maximum(scale, np.finfo(float).tiny)
