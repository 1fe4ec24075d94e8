"""The test store: every test computed, and the sufficient statistics, in one SQLite file.

``learn`` keeps ``tests.sqlite`` in its output folder. The store holds, keyed by the
fingerprint of the inputs and of the options that change the statistics:

- the per-regime sufficient statistics (`Moments`), the `Design` and the intake warnings,
  so that a rerun on unchanged inputs parses no data file;
- the statistic, p-value and left-out regimes of every conditional-independence test
  (``kind="ci"``; the pair is unordered) and every invariance test (``kind="invariance"``,
  keyed by regime too), so that a rerun at another alpha computes only the tests never
  run before.

A different fingerprint never reuses an entry. The file is opened in write-ahead-log
mode with a busy timeout, so that two runs writing one store at once wait for each other
instead of corrupting it; each batch of results is written in one transaction.

`CachedTester` wraps any tester (the `Tester` protocol) with the store: it reads the
stored results of a level in one query, asks the wrapped tester for the missing tests
only and writes them.
"""

from __future__ import annotations

import io
import json
import operator
import sqlite3
import time
from collections.abc import Iterable
from dataclasses import asdict
from pathlib import Path
from typing import Any

import numpy as np

from pipeline.independence.base import Tester, TestResults
from pipeline.intake.design import Design, Regime
from pipeline.stats.moments import Moments

__all__ = ["TestStore", "CachedTester", "StoredInputs"]

_SCHEMA = """
CREATE TABLE IF NOT EXISTS inputs (
    fingerprint TEXT PRIMARY KEY,
    created     TEXT NOT NULL,
    design      TEXT NOT NULL,
    warnings    TEXT NOT NULL,
    dropped_rows INTEGER NOT NULL,
    variables   TEXT NOT NULL,
    regimes     TEXT NOT NULL,
    count       BLOB NOT NULL,
    mean        BLOB NOT NULL,
    scatter     BLOB NOT NULL
);
CREATE TABLE IF NOT EXISTS fingerprints (
    id          INTEGER PRIMARY KEY,
    fingerprint TEXT NOT NULL UNIQUE
);
CREATE TABLE IF NOT EXISTS tests (
    fid         INTEGER NOT NULL REFERENCES fingerprints(id),
    kind        TEXT NOT NULL,
    regime      TEXT NOT NULL,
    size        INTEGER NOT NULL,
    x           INTEGER NOT NULL,
    y           INTEGER NOT NULL,
    cond        TEXT NOT NULL,
    statistic   REAL,
    pvalue      REAL,
    left_out    TEXT,
    PRIMARY KEY (fid, kind, regime, size, x, y, cond)
) WITHOUT ROWID;
CREATE TABLE IF NOT EXISTS runs (
    id          INTEGER PRIMARY KEY AUTOINCREMENT,
    fingerprint TEXT NOT NULL,
    started     TEXT NOT NULL,
    settings    TEXT NOT NULL,
    computed    INTEGER NOT NULL,
    reused      INTEGER NOT NULL
);
"""

def _to_blob(a: np.ndarray) -> bytes:
    buf = io.BytesIO()
    np.save(buf, np.ascontiguousarray(a), allow_pickle=False)
    return buf.getvalue()


def _from_blob(b: bytes) -> np.ndarray:
    return np.load(io.BytesIO(b), allow_pickle=False)


def _design_to_json(design: Design) -> str:
    return json.dumps({"variables": list(design.variables),
                       "regimes": [asdict(r) for r in design.regimes],
                       "warnings": list(design.warnings)})


def _design_from_json(text: str) -> Design:
    d = json.loads(text)
    regimes = tuple(Regime(name=r["name"], targets=tuple(r["targets"]), known=bool(r["known"]),
                           reference=bool(r["reference"]), samples=int(r["samples"]))
                    for r in d["regimes"])
    return Design(tuple(d["variables"]), regimes, tuple(d.get("warnings", ())))


class StoredInputs:
    """What the store keeps of one set of inputs: design, moments, intake warnings."""

    __slots__ = ("fingerprint", "design", "moments", "warnings", "dropped_rows")

    def __init__(self, fingerprint: str, design: Design, moments: Moments,
                 warnings: list[str], dropped_rows: int) -> None:
        self.fingerprint = fingerprint
        self.design = design
        self.moments = moments
        self.warnings = warnings
        self.dropped_rows = dropped_rows


class TestStore:
    """A ``tests.sqlite`` file: sufficient statistics and test results by input fingerprint.

    Parameters
    ----------
    path : str or Path
        The SQLite file; created with its folder if missing.
    timeout : float
        Seconds to wait for another process holding the write lock.
    """

    __test__ = False  # not a pytest class

    def __init__(self, path: str | Path, timeout: float = 60.0) -> None:
        self.path = Path(path)
        self.path.parent.mkdir(parents=True, exist_ok=True)
        self._con = sqlite3.connect(str(self.path), timeout=timeout, isolation_level=None)
        self._con.execute(f"PRAGMA busy_timeout = {int(timeout * 1000)}")
        self._con.execute("PRAGMA journal_mode = WAL")
        self._con.execute("PRAGMA synchronous = NORMAL")
        self._write(lambda c: c.executescript("BEGIN IMMEDIATE;" + _SCHEMA + "COMMIT;"),
                    script=True)

    # -- plumbing ---------------------------------------------------------------------------
    def _write(self, fn, script: bool = False) -> Any:
        """Run `fn(connection)` in one write transaction (``BEGIN IMMEDIATE``)."""
        con = self._con
        if script:
            return fn(con)
        con.execute("BEGIN IMMEDIATE")
        try:
            out = fn(con)
        except BaseException:
            con.execute("ROLLBACK")
            raise
        con.execute("COMMIT")
        return out

    def close(self) -> None:
        """Close the connection (the file stays)."""
        self._con.close()

    def __enter__(self) -> TestStore:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def integrity(self) -> str:
        """SQLite's ``PRAGMA integrity_check`` answer (``"ok"`` when the file is sound)."""
        return str(self._con.execute("PRAGMA integrity_check").fetchone()[0])

    # -- inputs -----------------------------------------------------------------------------
    def has_inputs(self, fingerprint: str) -> bool:
        """True if the sufficient statistics of `fingerprint` are stored."""
        row = self._con.execute("SELECT 1 FROM inputs WHERE fingerprint = ?",
                                (fingerprint,)).fetchone()
        return row is not None

    def put_inputs(self, fingerprint: str, design: Design, moments: Moments,
                   warnings: Iterable[str] = (), dropped_rows: int = 0) -> None:
        """Keep the design, moments and intake warnings of `fingerprint` (first write wins)."""
        row = (fingerprint, time.strftime("%Y-%m-%dT%H:%M:%S"), _design_to_json(design),
               json.dumps(list(warnings)), int(dropped_rows),
               json.dumps(list(moments.variables)), json.dumps(list(moments.regimes)),
               _to_blob(np.asarray(moments.count, dtype=np.int64)),
               _to_blob(np.asarray(moments.mean, dtype=float)),
               _to_blob(np.asarray(moments.scatter, dtype=float)))
        self._write(lambda c: c.execute(
            "INSERT OR IGNORE INTO inputs VALUES (?,?,?,?,?,?,?,?,?,?)", row))

    def get_inputs(self, fingerprint: str) -> StoredInputs | None:
        """The stored inputs of `fingerprint`, or None."""
        row = self._con.execute(
            "SELECT design, warnings, dropped_rows, variables, regimes, count, mean, scatter "
            "FROM inputs WHERE fingerprint = ?", (fingerprint,)).fetchone()
        if row is None:
            return None
        design = _design_from_json(row[0])
        moments = Moments(tuple(json.loads(row[3])), tuple(json.loads(row[4])),
                          _from_blob(row[5]), _from_blob(row[6]), _from_blob(row[7]))
        return StoredInputs(fingerprint, design, moments, list(json.loads(row[1])), int(row[2]))

    def fingerprints(self) -> list[str]:
        """Every input fingerprint held, oldest first."""
        return [r[0] for r in self._con.execute(
            "SELECT fingerprint FROM inputs ORDER BY created, fingerprint")]

    # -- runs -------------------------------------------------------------------------------
    def log_run(self, fingerprint: str, settings: dict[str, Any], computed: int,
                reused: int) -> None:
        """Record one learner run (settings and how many tests it computed or reused)."""
        row = (fingerprint, time.strftime("%Y-%m-%dT%H:%M:%S"),
               json.dumps(settings, default=str), int(computed), int(reused))
        self._write(lambda c: c.execute(
            "INSERT INTO runs (fingerprint, started, settings, computed, reused) "
            "VALUES (?,?,?,?,?)", row))

    def runs(self) -> list[dict[str, Any]]:
        """Every recorded run, oldest first."""
        return [{"fingerprint": f, "started": s, "settings": json.loads(t), "computed": c,
                 "reused": r}
                for f, s, t, c, r in self._con.execute(
                    "SELECT fingerprint, started, settings, computed, reused FROM runs "
                    "ORDER BY id")]

    # -- tests ------------------------------------------------------------------------------
    def fingerprint_id(self, fingerprint: str) -> int:
        """The small integer that stands for `fingerprint` in the tests table."""
        row = self._con.execute("SELECT id FROM fingerprints WHERE fingerprint = ?",
                                (fingerprint,)).fetchone()
        if row is not None:
            return int(row[0])
        self._write(lambda c: c.execute(
            "INSERT OR IGNORE INTO fingerprints (fingerprint) VALUES (?)", (fingerprint,)))
        return int(self._con.execute("SELECT id FROM fingerprints WHERE fingerprint = ?",
                                     (fingerprint,)).fetchone()[0])

    def count_tests(self, fingerprint: str | None = None) -> int:
        """Number of stored test results (of one fingerprint, or all)."""
        if fingerprint is None:
            return int(self._con.execute("SELECT COUNT(*) FROM tests").fetchone()[0])
        return int(self._con.execute(
            "SELECT COUNT(*) FROM tests JOIN fingerprints AS f ON f.id = tests.fid "
            "WHERE f.fingerprint = ?", (fingerprint,)).fetchone()[0])

    def load(self, fid: int, kind: str, regime: str, size: int
             ) -> dict[tuple[int, int, str], tuple[float | None, float | None, str | None]]:
        """Every stored result of one kind, regime and conditioning-set size, in one query.

        Keys are ``(x, y, cond)`` as written by `insert`; values
        ``(statistic, pvalue, left_out)``.
        """
        rows = self._con.execute(
            "SELECT x, y, cond, statistic, pvalue, left_out FROM tests "
            "WHERE fid = ? AND kind = ? AND regime = ? AND size = ?",
            (fid, kind, regime, int(size))).fetchall()
        return dict(zip(map(_KEY, rows), map(_VALUE, rows), strict=True))

    def insert(self, rows: list[tuple]) -> None:
        """Write rows ``(fid, kind, regime, size, x, y, cond, statistic, pvalue, left_out)``
        in one transaction (keys already stored are kept; a NaN is stored as NULL)."""
        if rows:
            self._write(lambda c: c.executemany(
                "INSERT OR IGNORE INTO tests VALUES (?,?,?,?,?,?,?,?,?,?)", rows))


_KEY = operator.itemgetter(0, 1, 2)
_VALUE = operator.itemgetter(3, 4, 5)


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


class CachedTester:
    """A `Tester` that answers from a `TestStore` first and computes only what is missing.

    The stored results of one kind, regime and conditioning-set size are read in one
    query the first time a batch asks for them (the learner asks level by level). Newly
    computed results are written in one transaction per level: they are held until a
    batch of another conditioning-set size arrives, `FLUSH_ROWS` are pending, or
    `flush` is called (call it when done; the context manager does).

    Parameters
    ----------
    inner : Tester or None
        Computes the tests the store lacks; None means every test must be stored
        (a missing one raises `LookupError`).
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

    def __init__(self, inner: Tester | None, store: TestStore, fingerprint: str,
                 n_regimes: int) -> None:
        self.inner = inner
        self.store = store
        self.fingerprint = fingerprint
        self.n_regimes = int(n_regimes)
        self.computed = 0
        self.reused = 0
        self.calls = 0
        self._fid = store.fingerprint_id(fingerprint)
        self._known: dict[tuple[str, str, int], dict] = {}
        self._pending: list[tuple] = []
        self._size: int | None = None

    def flush(self) -> None:
        """Write the pending results to the store (one transaction)."""
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
            self.flush()
            self._size = size
        known = self._known.get((kind, regime, size))
        if known is None:
            known = self._known[(kind, regime, size)] = self.store.load(self._fid, kind, regime,
                                                                        size)
        # 1. answer from the store what it holds
        xs, ys, keys = x.tolist(), y.tolist(), _cond_keys(cond)
        if known:
            hits = list(map(known.get, zip(xs, ys, keys, strict=True)))
            missing = [i for i, h in enumerate(hits) if h is None]
            found = [i for i, h in enumerate(hits) if h is not None]
            if found:
                got = [hits[i] for i in found]
                # None (a NaN stored as NULL) becomes NaN again
                stat[found] = np.array([g[0] for g in got], dtype=float)
                pval[found] = np.array([g[1] for g in got], dtype=float)
                for i, g in zip(found, got, strict=True):
                    if g[2]:
                        left[i] = _text_to_mask(g[2], k)
        else:
            missing = list(range(m))
        self.reused += m - len(missing)
        if not missing:
            return TestResults(stat, pval, left if left.any() else None)
        if self.inner is None:
            raise LookupError(f"{len(missing)} {kind} tests are not in the store "
                              f"and no tester was given to compute them")
        # 2. compute the rest with the inner tester; queue them for the store
        idx = np.asarray(missing, dtype=np.int64)
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
        fid = self._fid
        for j, i in enumerate(missing):
            s, p = float(stat[i]), float(pval[i])
            key = (xs[i], ys[i], keys[i])
            known[key] = (None if s != s else s, None if p != p else p, texts[j])
            self._pending.append((fid, kind, regime, size, *key, s, p, texts[j]))
        if len(self._pending) >= self.FLUSH_ROWS:
            self.flush()
        return TestResults(stat, pval, left if left.any() else None)


def _as_cond(cond: np.ndarray, m: int) -> np.ndarray:
    cond = np.asarray(cond, dtype=np.int64)
    if cond.ndim == 2:
        return cond
    return cond.reshape(m, -1) if m else np.zeros((0, 0), dtype=np.int64)
