"""Per-regime sufficient statistics: count, mean vector and centred scatter matrix.

Every Gaussian test in Orienteer reads only these. They are accumulated in one
streaming pass over chunks of rows with the pairwise update of Chan, Golub & LeVeque
(1979), so memory is O(K p^2) whatever the number of rows.

References
----------
1. T. F. Chan, G. H. Golub, R. J. LeVeque (1979). Updating formulae and a pairwise
   algorithm for computing sample variances. Technical report STAN-CS-79-773.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Moments", "merge_moments"]


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


@dataclass
class Moments:
    """Sufficient statistics of K regimes over p variables.

    Attributes
    ----------
    variables : tuple of str, length p
    regimes : tuple of str, length K
    count : int64 array (K,)
    mean : float64 array (K, p)
    scatter : float64 array (K, p, p), centred sums of squares and cross-products
    """

    variables: tuple[str, ...]
    regimes: tuple[str, ...]
    count: np.ndarray
    mean: np.ndarray
    scatter: np.ndarray

    @classmethod
    def from_samples(cls, samples: dict[str, np.ndarray], variables: tuple[str, ...]) -> Moments:
        """Moments of in-memory samples: ``{regime: (n_k, p) array}`` (for tests and small data)."""
        regimes = tuple(samples)
        p = len(variables)
        count = np.zeros(len(regimes), dtype=np.int64)
        mean = np.zeros((len(regimes), p))
        scatter = np.zeros((len(regimes), p, p))
        for k, name in enumerate(regimes):
            x = np.asarray(samples[name], dtype=float).reshape(-1, p)
            count[k] = x.shape[0]
            if x.shape[0]:
                mean[k] = x.mean(axis=0)
                d = x - mean[k]
                scatter[k] = d.T @ d
        return cls(tuple(variables), regimes, count, mean, scatter)

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
