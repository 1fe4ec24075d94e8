"""Stratified Fisher z test of conditional independence, from per-regime sufficient statistics.

``X _||_ Y | S`` given the regime holds when the partial correlation of X and Y given S
is zero within every regime. In regime k the partial correlation ``r_k`` is read off the
inverse ``P`` of the correlation submatrix of ``{X, Y} u S``, ``r_k = -P_xy / sqrt(P_xx P_yy)``.
Fisher's transform ``atanh(r_k)`` is close to normal with variance ``1 / m_k``,
``m_k = n_k - |S| - 3`` (Fisher 1924). The regimes are combined by a test that is valid
under "zero in every regime" and keeps its power when the sign of the partial correlation
differs between regimes: the signed sum ``Z = sum_k m_k atanh(r_k) / sqrt(sum_k m_k)``
(standard normal) and the sum of squares ``Q = sum_k m_k atanh(r_k)^2`` (chi-square, K
degrees of freedom) joined by a Cauchy combination (Liu & Xie 2020;
`pipeline.independence.combine`). The statistic reported is the normal deviate of the
combined two-sided p-value. With one regime this is the classical Fisher z test used by
the PC algorithm (Kalisch & Buhlmann 2007). Raw rows are never pooled across regimes: a
mixture of regimes with different parameters creates dependences that no single regime
has.

The tests are batched: the per-regime correlation matrices are scaled once, the entries
of every block are gathered with fancy indexing and the conditioning variables are
eliminated one at a time by Gaussian elimination (the sweep, equivalent to the Schur
complement ``A - B S^-1 B'`` whose inverse is the ``{X, Y}`` block of ``P``), as elementwise
operations on ``(tests, regimes)`` arrays.

Example
-------
>>> import numpy as np
>>> from pipeline.stats.moments import Moments
>>> rng = np.random.default_rng(0)
>>> s = rng.normal(size=(400, 1))
>>> rows = np.hstack([s + rng.normal(size=(400, 1)), s + rng.normal(size=(400, 1)), s])
>>> moments = Moments.from_samples({"ctrl": rows}, ("X", "Y", "S"))
>>> bool(fisher_z(moments, [0], [1], [[2]]).pvalue[0] > 0.01)  # X _||_ Y | S
True

References
----------
1. R. A. Fisher (1924). The distribution of the partial correlation coefficient.
   Metron 3, 329-332.
2. M. Kalisch, P. Buhlmann (2007). Estimating high-dimensional directed acyclic graphs
   with the PC-algorithm. Journal of Machine Learning Research 8, 613-636.
3. Y. Liu, J. Xie (2020). Cauchy combination test: a powerful test with analytic p-value
   calculation under arbitrary dependency structures. Journal of the American
   Statistical Association 115(529), 393-402.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from pipeline.independence.base import TestResults
from pipeline.independence.combine import pvalues_from_sums, stratified_sums, z_equivalent
from pipeline.stats.moments import Moments

__all__ = ["partial_correlation", "fisher_z"]

#: Pivots and residual variances below this (in correlation units, i.e. 1 - R^2) count
#: as zero: the variable is (numerically) a linear function of those swept before it.
_TOL = 1e-10
#: Partial correlations are clipped to (-1 + _EPS, 1 - _EPS) before atanh.
_EPS = 1e-12
#: Elements per (tests x regimes) work array; keeps the elimination in cache.
_CHUNK = 1 << 14


# --------------------------------------------------------------------------- validation

def _check_index_array(name: str, value, p: int, ndim: int) -> np.ndarray:
    arr = np.asarray(value)
    if arr.size == 0:
        arr = arr.astype(np.intp)
    if ndim == 2 and arr.ndim == 1 and arr.size == 0:
        arr = arr.reshape(0, 0)
    if arr.ndim != ndim:
        raise ValueError(f"{name}: expected a {ndim}-d array of variable indices, "
                         f"got shape {arr.shape}")
    if not np.issubdtype(arr.dtype, np.integer):
        raise ValueError(f"{name}: expected integer variable indices, got dtype {arr.dtype}; "
                         "map names to positions with design.variables.index(name)")
    if arr.size and (arr.min() < 0 or arr.max() >= p):
        raise ValueError(f"{name}: indices must lie in [0, {p}), got values from "
                         f"{arr.min()} to {arr.max()}")
    return arr.astype(np.intp, copy=False)


def _check_tests(p: int, x, y, cond) -> tuple[np.ndarray, np.ndarray | None, np.ndarray]:
    """Validate a batch: x (m,), y (m,) or None, cond (m, l); no index repeated in a row."""
    x = _check_index_array("x", x, p, 1)
    m = x.shape[0]
    cond = _check_index_array("cond", cond, p, 2)
    if cond.shape[0] != m:
        if cond.size == 0:
            cond = np.zeros((m, 0), dtype=np.intp)
        else:
            raise ValueError(f"cond: expected {m} rows (one per test), got shape {cond.shape}")
    block = [x[:, None]]
    if y is not None:
        y = _check_index_array("y", y, p, 1)
        if y.shape != x.shape:
            raise ValueError(f"y: expected shape {x.shape} like x, got {y.shape}")
        block.append(y[:, None])
    block = np.sort(np.hstack([*block, cond]), axis=1)
    dup = (block[:, 1:] == block[:, :-1]).any(axis=1)
    if dup.any():
        i = int(np.flatnonzero(dup)[0])
        raise ValueError(f"test {i}: a variable appears twice among x, y and cond "
                         f"({block[i].tolist()}); each test needs distinct variables")
    return x, y, cond


# --------------------------------------------------------------------------- kernels

def _correlation_flat(scatter: np.ndarray, zero: np.ndarray | None = None) -> np.ndarray:
    """Scale (K, p, p) scatters to correlations, laid out as (p*p, K) rows.

    Variables with zero scale, or marked in `zero` (K, p), get an all-zero row and
    column (diagonal included), so elimination skips them and their residual is 0.
    """
    scatter = np.asarray(scatter, dtype=float)
    k, p, _ = scatter.shape
    diag = np.diagonal(scatter, axis1=1, axis2=2)
    ok = diag > 0
    if zero is not None:
        ok &= ~zero
    inv = np.zeros_like(diag)
    np.divide(1.0, np.sqrt(diag, where=ok, out=np.zeros_like(diag)), where=ok, out=inv)
    weight = (inv[:, :, None] * inv[:, None, :]).reshape(k, p * p)
    flat = np.multiply(scatter.reshape(k, p * p).T, weight.T, out=np.empty((p * p, k)))
    flat[np.arange(p) * (p + 1)] = ok.T.astype(float)  # exact ones on the diagonal
    return flat


def _eliminate(flat: np.ndarray, p: int, targets: list[np.ndarray], cond: np.ndarray,
               unit_diagonal: bool = False) -> dict[tuple[int, int], np.ndarray | float]:
    """Residual (co)variances of `targets` after regressing out `cond`, batched.

    `flat` is (p*p, K) from `_correlation_flat`; `targets` are (mc,) index arrays and
    `cond` is (mc, l). Returns ``{(i, j): (mc, K)}`` for ``0 <= i <= j < len(targets)``
    (a diagonal entry may be the float 1.0 when nothing was regressed out).
    Pivots below ``_TOL`` (a conditioning variable constant or collinear with the ones
    before it) are skipped, which is the regression with that variable dropped. With
    `unit_diagonal` (no variable has zero scale) the diagonal is not gathered.
    """
    cols = list(targets) + [cond[:, j] for j in range(cond.shape[1])]
    q, t = len(cols), len(targets)
    ent: dict[tuple[int, int], np.ndarray | float] = {}
    # step 1: gather the upper triangle of every block
    for i in range(q):
        if unit_diagonal:
            ent[i, i] = 1.0
        for j in range(i + unit_diagonal, q):
            ent[i, j] = np.take(flat, cols[i] * p + cols[j], axis=0)
    # step 2: eliminate the conditioning variables one at a time
    for c in range(t, q):
        piv = ent[c, c]
        if isinstance(piv, float):
            inv = 1.0 / piv if piv > _TOL else 0.0
        else:
            inv = np.zeros_like(piv)
            np.divide(1.0, piv, where=piv > _TOL, out=inv)
        rest = [*range(t), *range(c + 1, q)]
        col = {i: ent[min(i, c), max(i, c)] for i in rest}
        unit = isinstance(inv, float) and inv == 1.0
        for i in rest:
            u = col[i] if unit else col[i] * inv
            for j in rest:
                if j < i:
                    continue
                cur = ent[i, j]
                if isinstance(cur, float):
                    ent[i, j] = cur - u * col[j]
                else:
                    cur -= u * col[j]
        for i in range(c, q):
            del ent[c, i]
        for i in range(c):
            ent.pop((i, c), None)
    return {key: val for key, val in ent.items() if key[1] < t}


def _pcor_chunk(flat: np.ndarray, p: int, x: np.ndarray, y: np.ndarray,
                cond: np.ndarray, unit_diagonal: bool = False) -> np.ndarray:
    """(mc, K) partial correlations; nan where X or Y has no residual variance."""
    res = _eliminate(flat, p, [x, y], cond, unit_diagonal)
    vxy = res[0, 1]
    vxx, vyy = (np.broadcast_to(res[i, i], vxy.shape) for i in (0, 1))
    ok = (vxx > _TOL) & (vyy > _TOL)
    with np.errstate(divide="ignore", invalid="ignore"):
        r = vxy / np.sqrt(vxx * vyy)
    if not ok.all():
        r[~ok] = np.nan
    return r


def _chunks(m: int, k: int):
    step = max(1, _CHUNK // max(k, 1))
    for start in range(0, m, step):
        yield slice(start, min(m, start + step))


# --------------------------------------------------------------------------- public API

def partial_correlation(scatter: np.ndarray, x: np.ndarray, y: np.ndarray,
                        cond: np.ndarray) -> np.ndarray:
    """Partial correlations of ``x[i]`` and ``y[i]`` given ``cond[i]`` in every regime.

    Parameters
    ----------
    scatter : array (K, p, p)
        Per-regime centred scatter matrices (or covariances, or correlations: the
        result is scale-free).
    x, y : int arrays (m,)
        Variable indices.
    cond : int array (m, l)
        Conditioning sets (``l`` may be 0).

    Returns
    -------
    array (K, m)
        ``r = -P_xy / sqrt(P_xx P_yy)`` with ``P`` the inverse of the correlation
        submatrix of ``{x, y} u cond``; nan where x or y has no variance left once
        ``cond`` is regressed out (constant in the regime, or a linear function of
        ``cond``). A conditioning variable that is constant or collinear with the others
        is dropped.

    Raises
    ------
    ValueError
        If `scatter` is not (K, p, p), or an index is out of range or repeated in a test.
    """
    scatter = np.asarray(scatter, dtype=float)
    if scatter.ndim != 3 or scatter.shape[1] != scatter.shape[2]:
        raise ValueError(f"scatter: expected shape (K, p, p), got {scatter.shape}")
    k, p, _ = scatter.shape
    x, y, cond = _check_tests(p, x, y, cond)
    flat = _correlation_flat(scatter)
    out = np.empty((x.shape[0], k))
    for sl in _chunks(x.shape[0], k):
        out[sl] = _pcor_chunk(flat, p, x[sl], y[sl], cond[sl])
    return out.T


class _Strata:
    """Per-regime correlations, counts and constant masks, prepared once for many batches."""

    def __init__(self, moments: Moments, selected: np.ndarray) -> None:
        self.p = len(moments.variables)
        self.n_regimes = len(moments.regimes)
        self.selected = selected
        self.count = np.asarray(moments.count, dtype=float)[selected]
        self.variance = float(moments.ci_variance)
        const = np.asarray(moments.constant())[selected]
        self.const_t = np.ascontiguousarray(const.T)  # (p, Ks)
        scatter = moments.scatter if moments.ci_scatter is None else moments.ci_scatter
        self.flat = _correlation_flat(np.asarray(scatter)[selected], const)
        self.has_constant = bool(const.any())
        diag = self.flat[np.arange(self.p) * (self.p + 1)]
        self.has_zero_scale = bool((diag != 1.0).any())

    def test(self, x: np.ndarray, y: np.ndarray, cond: np.ndarray,
             min_count: int = 0) -> TestResults:
        """Stratified Fisher z of validated batch arrays."""
        m, l_size = x.shape[0], cond.shape[1]
        ks = self.selected.shape[0]
        weight = self.count - l_size - 3
        enough = (weight > 0) & (self.count >= min_count)
        weight = np.where(enough, weight, 0.0) / self.variance
        sums = [np.empty(m) for _ in range(4)]
        unusable = np.empty((m, ks), dtype=bool)
        for sl in _chunks(m, ks):
            xs, ys, cs = x[sl], y[sl], cond[sl]
            r = _pcor_chunk(self.flat, self.p, xs, ys, cs, not self.has_zero_scale)
            bad = np.isnan(r)
            if self.has_constant:
                bad |= self.const_t[xs] | self.const_t[ys]
                if l_size:
                    bad |= self.const_t[cs].any(axis=1)
            if not enough.all():
                bad |= ~enough
            z = np.arctanh(np.clip(r, -1 + _EPS, 1 - _EPS, out=r), out=r)
            if bad.any():
                z[bad] = 0.0
                w = np.where(bad, 0.0, weight)
            else:
                w = weight
            for total, part in zip(sums, stratified_sums(z, w), strict=True):
                total[sl] = part
            unusable[sl] = bad
        pvalue = pvalues_from_sums(*sums)[1]
        stat = z_equivalent(pvalue)
        left_out = None
        if unusable.any():
            left_out = np.zeros((m, self.n_regimes), dtype=bool)
            left_out[:, self.selected] = unusable
            left_out[unusable.all(axis=1)] = True
        return TestResults(statistic=stat, pvalue=pvalue, left_out=left_out)


def _check_regimes(moments: Moments, regimes: Sequence[int | str] | None) -> np.ndarray:
    k = len(moments.regimes)
    if regimes is None:
        return np.arange(k)
    out = []
    for r in regimes:
        if isinstance(r, str):
            if r not in moments.regimes:
                raise ValueError(f"regimes: unknown regime {r!r}; known: {list(moments.regimes)}")
            out.append(moments.index(r))
        elif 0 <= int(r) < k:
            out.append(int(r))
        else:
            raise ValueError(f"regimes: index {r} out of range [0, {k})")
    if len(set(out)) != len(out):
        raise ValueError(f"regimes: a regime is listed twice in {list(regimes)}")
    return np.asarray(out, dtype=np.intp)


def fisher_z(moments: Moments, x, y, cond, *, regimes: Sequence[int] | None = None,
             min_count: int = 0) -> TestResults:
    """Stratified Fisher z tests of ``X_i _||_ Y_i | S_i`` given the regime.

    Parameters
    ----------
    moments : Moments
        Per-regime sufficient statistics.
    x, y : int arrays (m,)
        Variable indices into ``moments.variables``.
    cond : int array (m, l)
        Conditioning sets, all of one size ``l`` (may be 0).
    regimes : sequence of int (or names), optional
        The regimes to stratify over; default all.
    min_count : int
        Regimes with fewer samples are left out (besides those with
        ``n_k - l - 3 <= 0``).

    Returns
    -------
    TestResults
        ``statistic`` is Z, ``pvalue`` two-sided. ``left_out`` (m, K) marks the regimes
        asked for that could not be used: a variable of the test constant within the
        regime, too few samples, or X or Y a linear function of S there. A row that is
        all True had no usable regime: its Z is 0 and its p-value 1 (cannot reject).

    Raises
    ------
    ValueError
        If an index is out of range or repeated within a test, or `regimes` names an
        unknown regime.
    """
    p = len(moments.variables)
    x, y, cond = _check_tests(p, x, y, cond)
    selected = _check_regimes(moments, regimes)
    return _Strata(moments, selected).test(x, y, cond, min_count)
