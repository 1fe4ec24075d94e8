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

__all__ = ["Moments"]


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
