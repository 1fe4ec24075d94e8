"""Streaming per-regime sufficient statistics.

A :class:`MomentAccumulator` reads chunks of rows labelled by regime and keeps, per
regime, the row count, the mean vector, the centred scatter matrix and the per-variable
third and fourth central moment sums. Each chunk is grouped by regime, reduced with one
matrix product per regime (two-pass within the chunk), and merged into the running
totals with the pairwise updates of Chan, Golub & LeVeque (1979) and Pebay (2008), which
keep full precision even when the means are large compared with the spread. Memory is
O(K p^2) whatever the number of rows.

>>> import numpy as np
>>> acc = MomentAccumulator(["x", "y"], ["ctrl", "kd"])
>>> acc.update(np.array([0, 0, 1]), np.array([[1.0, 2.0], [3.0, 4.0], [5.0, 6.0]]))
>>> acc.result().count.tolist()
[2, 1]

References
----------
1. T. F. Chan, G. H. Golub, R. J. LeVeque (1979). Updating formulae and a pairwise
   algorithm for computing sample variances. Technical report STAN-CS-79-773.
2. P. Pebay (2008). Formulas for robust, one-pass parallel computation of covariances
   and arbitrary-order statistical moments. Sandia report SAND2008-6212.
"""

from __future__ import annotations

import contextlib
import ctypes
import functools
from collections.abc import Iterator, Sequence
from pathlib import Path

import numpy as np

from pipeline.stats.moments import Moments, merge_moments, merge_tails

__all__ = ["MomentAccumulator", "one_blas_thread"]


@functools.cache
def _openblas_controls():
    """``(get, set)`` thread-count functions of numpy's bundled OpenBLAS, or None."""
    folder = Path(np.__file__).parent.parent / "numpy.libs"
    for lib in sorted(folder.glob("libscipy_openblas*")):
        try:
            handle = ctypes.CDLL(str(lib))
        except OSError:
            continue
        for suffix in ("64_", ""):
            get = getattr(handle, f"scipy_openblas_get_num_threads{suffix}", None)
            put = getattr(handle, f"scipy_openblas_set_num_threads{suffix}", None)
            if get is not None and put is not None:
                get.restype = ctypes.c_int
                put.argtypes = [ctypes.c_int]
                return get, put
    return None


@contextlib.contextmanager
def one_blas_thread() -> Iterator[None]:
    """Run the block with numpy's OpenBLAS on one thread, then restore the thread count.

    The scatter product of a tall chunk runs at full speed on one core; with several
    BLAS threads on a busy machine the threads wait on each other and the product was
    measured 5 to 50 times slower. Best effort: a no-op when the library is not found.
    """
    controls = _openblas_controls()
    if controls is None:
        yield
        return
    get, put = controls
    before = get()
    put(1)
    try:
        yield
    finally:
        put(before)


class MomentAccumulator:
    """Per-regime count, mean and centred scatter, updated chunk by chunk.

    Parameters
    ----------
    variables : sequence of str
        The p variable names, in the column order of the values passed to `update`.
    regimes : sequence of str
        The K regime names; a regime code ``k`` passed to `update` means ``regimes[k]``.
    """

    def __init__(self, variables: Sequence[str], regimes: Sequence[str]) -> None:
        self.variables = tuple(variables)
        self.regimes = tuple(regimes)
        if len(set(self.regimes)) != len(self.regimes):
            raise ValueError(f"regimes should be distinct names, got {list(self.regimes)}")
        p, k = len(self.variables), len(self.regimes)
        self.count = np.zeros(k, dtype=np.int64)
        self.mean = np.zeros((k, p))
        self.scatter = np.zeros((k, p, p))
        self.m3 = np.zeros((k, p))
        self.m4 = np.zeros((k, p))

    def update(self, regime_codes: np.ndarray, values: np.ndarray) -> None:
        """Add a chunk of rows.

        Parameters
        ----------
        regime_codes : int array (n,)
            Index into `regimes` of each row.
        values : float array (n, p)
            The rows; must be finite.

        Raises
        ------
        ValueError
            If the shapes disagree or a code is outside ``0 .. K-1``.
        """
        codes = np.asarray(regime_codes)
        x = np.asarray(values, dtype=np.float64)
        p, k = len(self.variables), len(self.regimes)
        if codes.ndim != 1 or x.ndim != 2 or x.shape != (codes.shape[0], p):
            raise ValueError(f"values should have shape (n, {p}) with n = len(regime_codes); "
                             f"got codes {codes.shape} and values {x.shape}")
        n = codes.shape[0]
        if n == 0:
            return
        if not np.issubdtype(codes.dtype, np.integer):
            raise ValueError(f"regime_codes should be integers, got dtype {codes.dtype}")
        lo, hi = int(codes.min()), int(codes.max())
        if lo < 0 or hi >= k:
            raise ValueError(f"regime_codes should lie in 0..{k - 1}, got values in {lo}..{hi}")
        # 1. group the rows by regime (one stable sort, no per-row Python)
        if lo == hi:
            groups = [(lo, x)]
            owned = False
        else:
            if np.all(codes[1:] >= codes[:-1]):  # rows already grouped: slices, no copy
                sorted_codes, xs, owned = codes, x, False
            else:
                order = np.argsort(codes, kind="stable")
                sorted_codes = codes[order]
                # np.take along the contiguous axis is about twice as fast as x[order]
                xs = np.take(x.T, order, axis=1).T if x.flags.f_contiguous \
                    else np.take(x, order, axis=0)
                owned = True  # xs is our copy: centre it in place
            starts = np.flatnonzero(np.r_[True, sorted_codes[1:] != sorted_codes[:-1]])
            ends = np.r_[starts[1:], n]
            groups = [(int(sorted_codes[s]), xs[s:e]) for s, e in zip(starts, ends, strict=True)]
        # 2. per regime: chunk mean, centred scatter by one matrix product, pairwise merge
        # values of magnitude above ~1e154 overflow the scatter to inf: the caller checks
        with one_blas_thread(), np.errstate(over="ignore", invalid="ignore"):
            self._merge_groups(groups, owned)

    def _merge_groups(self, groups: list[tuple[int, np.ndarray]], owned: bool) -> None:
        for code, block in groups:
            m = block.shape[0]
            mu = block.mean(axis=0)
            if owned:
                block -= mu
                centred = block
            else:
                centred = block - mu
            sc = centred.T @ centred
            sq = centred * centred
            m3 = np.einsum("ij,ij->j", sq, centred)
            m4 = np.einsum("ij,ij->j", sq, sq)
            self._merge_into(code, m, mu, sc, m3, m4)

    def _merge_into(self, code: int, m: int, mu: np.ndarray, sc: np.ndarray, m3: np.ndarray,
                    m4: np.ndarray) -> None:
        n0 = int(self.count[code])
        self.m3[code], self.m4[code] = merge_tails(
            n0, self.mean[code], np.diagonal(self.scatter[code]), self.m3[code],
            self.m4[code], m, mu, np.diagonal(sc), m3, m4)
        n_new, mean_new, scatter_new = merge_moments(
            n0, self.mean[code], self.scatter[code], m, mu, sc)
        self.count[code] = n_new
        self.mean[code] = mean_new
        self.scatter[code] = scatter_new

    def merge(self, other: MomentAccumulator) -> None:
        """Add the rows seen by `other` (same variables and regimes), e.g. from another worker."""
        if other.variables != self.variables or other.regimes != self.regimes:
            raise ValueError("accumulators should have the same variables and regimes")
        for code in range(len(self.regimes)):
            self._merge_into(code, int(other.count[code]), other.mean[code],
                             other.scatter[code], other.m3[code], other.m4[code])

    def result(self) -> Moments:
        """The statistics so far, as a :class:`~pipeline.stats.moments.Moments` (copies)."""
        scatter = self.scatter.copy()
        # symmetrize: the merge keeps symmetry up to rounding only
        scatter = 0.5 * (scatter + np.swapaxes(scatter, 1, 2))
        return Moments(self.variables, self.regimes, self.count.copy(), self.mean.copy(), scatter,
                       self.m3.copy(), self.m4.copy())
