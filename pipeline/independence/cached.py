"""A tester that answers from the test store first and computes only what is missing.

`CachedTester` wraps any tester (the `Tester` protocol) with the store: it reads the
stored results of a level in one query, asks the wrapped tester for the missing tests
only and writes them. Results are matched as arrays (each test's key row coded as one
integer, searched in the sorted stored codes), never row by row in Python. When done it
also keeps a packed copy of each level it changed (table ``held``: key rows, statistics
and p-values as raw arrays); the next run reads those copies in one query instead of
every row, and falls back to the rows when a copy is out of date (its level holds
another number of rows: rows are only ever added, never changed). The wrapped tester
may be given as a function that builds it: it is then built only when a test is
missing, so that a run answered wholly from the store never prepares one (nor imports
the libraries it computes with).
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np

from pipeline.independence.base import Tester, TestResults
from pipeline.independence.store import TestStore

__all__ = ["CachedTester"]


def _cond_keys(cond: np.ndarray) -> list[str]:
    """Canonical text of each conditioning set: sorted indices joined by commas."""
    cond = np.asarray(cond, dtype=np.int64)
    if cond.ndim != 2 or cond.shape[1] == 0:
        return [""] * (cond.shape[0] if cond.ndim >= 1 else 0)
    s = np.sort(cond, axis=1).astype(str)
    return [",".join(row) for row in s.tolist()]


def _mask_to_text(row: np.ndarray) -> str | None:
    idx = np.flatnonzero(row)
    return ",".join(map(str, idx.tolist())) if idx.size else None


def _text_to_mask(text: str | None, k: int) -> np.ndarray:
    m = np.zeros(k, dtype=bool)
    if text:
        m[[int(t) for t in text.split(",")]] = True
    return m


def _key_rows(x: np.ndarray, y: np.ndarray, cond: np.ndarray) -> np.ndarray:
    """Key rows ``(x, y, *sorted cond)`` (int64) of a batch of tests."""
    keys = np.empty((x.shape[0], cond.shape[1] + 2), dtype=np.int64)
    keys[:, 0] = x
    keys[:, 1] = y
    if cond.shape[1]:
        keys[:, 2:] = np.sort(cond, axis=1)
    return keys


class _Held:
    """The results of one kind, regime and conditioning-set size held in memory.

    Rows are key rows ``(x, y, *sorted cond)`` with their statistic, p-value and
    left-out text. `find` matches a batch of key rows at once: each row is coded as one
    integer (its digits in base ``max - min + 1``) when that fits in 62 bits, else
    compared as raw bytes; the stored codes are sorted once and searched. When a key
    is held twice, the earliest row answers (as the store keeps the first write).
    """

    __slots__ = ("keys", "statistic", "pvalue", "left", "has_left", "_index")

    def __init__(self, keys: np.ndarray, statistic: np.ndarray, pvalue: np.ndarray,
                 left: list[str | None]) -> None:
        self.keys = keys
        self.statistic = statistic
        self.pvalue = pvalue
        self.left = left
        self.has_left = np.fromiter(map(bool, left), dtype=bool, count=len(left))
        self._index: tuple | None = None

    def add(self, keys: np.ndarray, statistic: np.ndarray, pvalue: np.ndarray,
            left: list[str | None]) -> None:
        """Hold more rows (after the present ones)."""
        self.keys = np.concatenate([self.keys, keys])
        self.statistic = np.concatenate([self.statistic, statistic])
        self.pvalue = np.concatenate([self.pvalue, pvalue])
        self.left = self.left + left
        self.has_left = np.concatenate(
            [self.has_left, np.fromiter(map(bool, left), dtype=bool, count=len(left))])
        self._index = None

    def distinct(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, list[str | None]]:
        """The held rows as the tests table gives them back: each key once (its earliest
        row), -0.0 as 0.0 and every NaN as ``nan`` (SQLite keeps no sign of zero; NULL)."""
        keys, stat, pval, left = self.keys, self.statistic, self.pvalue, self.left
        if keys.shape[0] > 1:
            if self._index is None:
                self._index = self._build()
            order, codes = self._index[2], self._index[3]
            first = np.ones(codes.shape[0], dtype=bool)
            first[1:] = codes[1:] != codes[:-1]
            if not first.all():
                keep = np.sort(order[first])
                keys, stat, pval = keys[keep], stat[keep], pval[keep]
                left = [left[i] for i in keep.tolist()]
        stat = np.where(np.isnan(stat), np.nan, stat + 0.0)
        pval = np.where(np.isnan(pval), np.nan, pval + 0.0)
        return keys, stat, pval, left

    def find(self, query: np.ndarray) -> np.ndarray:
        """Row of each key row of `query` among the held rows, -1 where none."""
        n, m = self.keys.shape[0], query.shape[0]
        if n == 0 or m == 0:
            return np.full(m, -1, dtype=np.intp)
        if self._index is None:
            self._index = self._build()
        lo, base, order, codes = self._index
        if base is None:  # bytes: compare whole rows
            q = _as_void(query)
        else:
            inside = ((query >= lo) & (query < lo + base)).all(axis=1)
            q = _codes(np.where(inside[:, None], query, lo), lo, base)
        pos = np.searchsorted(codes, q)
        pos[pos == n] = n - 1
        hit = codes[pos] == q
        if base is not None:
            hit &= inside
        return np.where(hit, order[pos], -1)

    def _build(self) -> tuple:
        keys = self.keys
        lo, hi = int(keys.min()), int(keys.max())
        base = hi - lo + 1
        if keys.shape[1] * math.log2(max(base, 2)) <= 62:
            codes = _codes(keys, lo, base)
        else:
            base, codes = None, _as_void(keys)
        order = np.argsort(codes, kind="stable")
        return lo, base, order, codes[order]


def _codes(keys: np.ndarray, lo: int, base: int) -> np.ndarray:
    """Each key row as one integer: its entries minus `lo` as digits in base `base`."""
    code = keys[:, 0] - lo
    for c in range(1, keys.shape[1]):
        code = code * base + (keys[:, c] - lo)
    return code


def _as_void(keys: np.ndarray) -> np.ndarray:
    """Each key row as one raw-bytes item (equal rows, equal items)."""
    keys = np.ascontiguousarray(keys, dtype=np.int64)
    return keys.view(np.dtype((np.void, 8 * keys.shape[1]))).ravel()


class CachedTester:
    """A `Tester` that answers from a `TestStore` first and computes only what is missing.

    The stored results of one kind, regime and conditioning-set size are read the first
    time a batch asks for them (the learner asks level by level): from the packed copies
    of the store (`TestStore.load_held`, read once), else in one query of the rows.
    Newly computed results are written in one transaction per level: they are held until
    a batch of another conditioning-set size arrives, `FLUSH_ROWS` are pending, or
    `flush` is called (call it when done; the context manager does: it also writes the
    packed copies of the levels that changed).

    Parameters
    ----------
    inner : Tester, callable returning a Tester, or None
        Computes the tests the store lacks. A callable is called once, when the first
        missing test is asked. None means every test must be stored (a missing one
        raises `LookupError`).
    store : TestStore
    fingerprint : str
        The input fingerprint; entries of other fingerprints are never used.
    n_regimes : int
        K, the width of the `left_out` masks (the number of regimes of the design).

    Attributes
    ----------
    computed, reused : int
        Tests computed by `inner` / answered from the store so far.
    calls : int
        Batches passed to `inner`.
    """

    FLUSH_ROWS = 50_000

    def __init__(self, inner: Tester | Callable[[], Tester] | None, store: TestStore,
                 fingerprint: str, n_regimes: int) -> None:
        self._inner = inner
        self.store = store
        self.fingerprint = fingerprint
        self.n_regimes = int(n_regimes)
        self.computed = 0
        self.reused = 0
        self.calls = 0
        self._fid = store.fingerprint_id(fingerprint)
        self._known: dict[tuple[str, str, int], _Held] = {}
        self._pending: list[tuple] = []
        self._size: int | None = None
        self._dirty: set[tuple[str, str, int]] = set()
        self._packed: dict | None = None

    @property
    def inner(self) -> Tester | None:
        """The wrapped tester (built on first use when given as a function)."""
        if self._inner is not None and not hasattr(self._inner, "ci"):
            self._inner = self._inner()
        return self._inner

    def flush(self) -> None:
        """Write the pending results to the store (one transaction), then a packed copy of
        each level that changed, which the next run reads instead of the rows
        (`TestStore.load_held`)."""
        self._write_pending()
        dirty, self._dirty = sorted(self._dirty), set()
        self.store.put_held([(self._fid, *level, *self._known[level].distinct())
                             for level in dirty])

    def _write_pending(self) -> None:
        rows, self._pending = self._pending, []
        self.store.insert(rows)

    def __enter__(self) -> CachedTester:
        return self

    def __exit__(self, *exc: object) -> None:
        self.flush()

    def ci(self, x: np.ndarray, y: np.ndarray, cond: np.ndarray) -> TestResults:
        """Test ``X_i _||_ Y_i | S_i`` given the regime (the pair is unordered)."""
        x = np.asarray(x, dtype=np.int64)
        y = np.asarray(y, dtype=np.int64)
        cond = _as_cond(cond, x.shape[0])
        lo, hi = np.minimum(x, y), np.maximum(x, y)
        return self._answer("ci", "", lo, hi, cond,
                            lambda idx: self.inner.ci(x[idx], y[idx], cond[idx]))

    def invariance(self, regime: str, x: np.ndarray, cond: np.ndarray) -> TestResults:
        """Test whether the law of ``X_i | S_i`` is the same in `regime` and the reference."""
        x = np.asarray(x, dtype=np.int64)
        cond = _as_cond(cond, x.shape[0])
        return self._answer("invariance", str(regime), x, np.full_like(x, -1), cond,
                            lambda idx: self.inner.invariance(regime, x[idx], cond[idx]))

    def _answer(self, kind: str, regime: str, x: np.ndarray, y: np.ndarray, cond: np.ndarray,
                compute) -> TestResults:
        m, size, k = x.shape[0], cond.shape[1], self.n_regimes
        stat = np.full(m, np.nan)
        pval = np.full(m, np.nan)
        left = np.zeros((m, k), dtype=bool)
        if m == 0:
            return TestResults(stat, pval, None)
        if size != self._size:  # a new level: write the previous one
            self._write_pending()
            self._size = size
        level = (kind, regime, size)
        held = self._known.get(level)
        if held is None:
            if self._packed is None:  # the packed copies of every level, read once
                self._packed = self.store.load_held(self._fid)
            packed = self._packed.pop(level, None)
            if packed is None:
                packed = self.store.load_arrays(self._fid, kind, regime, size)
                if len(packed[0]):
                    self._dirty.add(level)  # no packed copy yet: write one
            held = self._known[level] = _Held(*packed)
        # 1. answer from the store what it holds
        keys = _key_rows(x, y, cond)
        at = held.find(keys)
        found = np.flatnonzero(at >= 0)
        if found.size:
            rows = at[found]
            stat[found] = held.statistic[rows]
            pval[found] = held.pvalue[rows]
            with_left = held.has_left[rows]
            if with_left.any():
                for i, r in zip(found[with_left].tolist(), rows[with_left].tolist(),
                                strict=True):
                    left[i] = _text_to_mask(held.left[r], k)
        self.reused += int(found.size)
        if found.size == m:
            return TestResults(stat, pval, left if left.any() else None)
        if self._inner is None:
            raise LookupError(f"{m - found.size} {kind} tests are not in the store "
                              f"and no tester was given to compute them")
        # 2. compute the rest with the inner tester; queue them for the store
        idx = np.flatnonzero(at < 0)
        res = compute(idx)
        self.calls += 1
        self.computed += idx.size
        stat[idx] = res.statistic
        pval[idx] = res.pvalue
        texts: list[str | None] = [None] * idx.size
        if res.left_out is not None:
            lo_mask = np.asarray(res.left_out, dtype=bool)
            left[idx] = lo_mask
            texts = [_mask_to_text(r) for r in lo_mask]
        held.add(keys[idx], stat[idx], pval[idx], texts)
        self._dirty.add(level)
        fid = self._fid
        self._pending.extend(
            (fid, kind, regime, size, a, b, c, s, p, t)
            for a, b, c, s, p, t in zip(x[idx].tolist(), y[idx].tolist(), _cond_keys(cond[idx]),
                                        stat[idx].tolist(), pval[idx].tolist(), texts,
                                        strict=True))
        if len(self._pending) >= self.FLUSH_ROWS:
            self._write_pending()
        return TestResults(stat, pval, left if left.any() else None)


def _as_cond(cond: np.ndarray, m: int) -> np.ndarray:
    cond = np.asarray(cond, dtype=np.int64)
    if cond.ndim == 2:
        return cond
    return cond.reshape(m, -1) if m else np.zeros((0, 0), dtype=np.int64)
