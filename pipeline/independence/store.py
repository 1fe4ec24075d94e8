"""The test store: every test computed, and the sufficient statistics, in one SQLite file.

``learn`` keeps ``tests.sqlite`` in its output folder. The store holds, keyed by the
fingerprint of the inputs and of the options that change the statistics:

- the per-regime sufficient statistics (`Moments`), the `Design` and the intake warnings,
  so that a rerun on unchanged inputs parses no data file;
- the statistic, p-value and left-out regimes of every conditional-independence test
  (``kind="ci"``; the pair is unordered) and every invariance test (``kind="invariance"``,
  keyed by regime too), so that a rerun at another alpha computes only the tests never
  run before;
- named arrays that do not depend on alpha (the numbers of the input check: response
  matrix, control agreement, neighbour p-values, target tests), so that a rerun applies
  its alpha to them without computing them again (`pipeline.independence.numbers`);
- apart from any fingerprint, the digest record of every input file hashed for this
  folder (table ``digests``: stat fields, SHA-256, when the hashing began), so that a
  rerun hashes no unchanged file again (`pipeline.stats.fingerprint`, which reads them
  without this module).

A different fingerprint never reuses an entry. The file is opened in write-ahead-log
mode with a busy timeout, so that two runs writing one store at once wait for each other
instead of corrupting it; each batch of results is written in one transaction.

The caching tester that reads and writes it is `pipeline.independence.cached.CachedTester`.
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

from pipeline.design import Design, Regime
from pipeline.stats.moments import Moments

__all__ = ["TestStore", "StoredInputs"]

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
CREATE TABLE IF NOT EXISTS moments_extra (
    fingerprint TEXT PRIMARY KEY,
    m3          BLOB,
    m4          BLOB,
    ci_scatter  BLOB,
    ci_variance REAL NOT NULL
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
CREATE TABLE IF NOT EXISTS held (
    fid         INTEGER NOT NULL,
    kind        TEXT NOT NULL,
    regime      TEXT NOT NULL,
    size        INTEGER NOT NULL,
    n           INTEGER NOT NULL,
    keys        BLOB NOT NULL,
    statistic   BLOB NOT NULL,
    pvalue      BLOB NOT NULL,
    left_out    TEXT NOT NULL,
    PRIMARY KEY (fid, kind, regime, size)
) WITHOUT ROWID;
CREATE TABLE IF NOT EXISTS numbers (
    fid         INTEGER NOT NULL,
    name        TEXT NOT NULL,
    field       TEXT NOT NULL,
    value       BLOB NOT NULL,
    PRIMARY KEY (fid, name, field)
) WITHOUT ROWID;
CREATE TABLE IF NOT EXISTS digests (
    path        TEXT PRIMARY KEY,
    dev         INTEGER NOT NULL,
    ino         INTEGER NOT NULL,
    size        INTEGER NOT NULL,
    mtime_ns    INTEGER NOT NULL,
    ctime_ns    INTEGER NOT NULL,
    sha256      TEXT NOT NULL,
    hashed_ns   INTEGER NOT NULL
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


def _maybe_blob(a: np.ndarray | None) -> bytes | None:
    return None if a is None else _to_blob(np.asarray(a, dtype=float))


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
        extra = (fingerprint, _maybe_blob(moments.m3), _maybe_blob(moments.m4),
                 _maybe_blob(moments.ci_scatter), float(moments.ci_variance))

        def put(c: sqlite3.Connection) -> None:
            c.execute("INSERT OR IGNORE INTO inputs VALUES (?,?,?,?,?,?,?,?,?,?)", row)
            c.execute("INSERT OR IGNORE INTO moments_extra VALUES (?,?,?,?,?)", extra)
        self._write(put)

    def get_inputs(self, fingerprint: str) -> StoredInputs | None:
        """The stored inputs of `fingerprint`, or None."""
        row = self._con.execute(
            "SELECT design, warnings, dropped_rows, variables, regimes, count, mean, scatter "
            "FROM inputs WHERE fingerprint = ?", (fingerprint,)).fetchone()
        if row is None:
            return None
        design = _design_from_json(row[0])
        extra = self._con.execute(
            "SELECT m3, m4, ci_scatter, ci_variance FROM moments_extra WHERE fingerprint = ?",
            (fingerprint,)).fetchone() or (None, None, None, 1.0)
        moments = Moments(tuple(json.loads(row[3])), tuple(json.loads(row[4])),
                          _from_blob(row[5]), _from_blob(row[6]), _from_blob(row[7]),
                          *(None if b is None else _from_blob(b) for b in extra[:3]),
                          float(extra[3]))
        return StoredInputs(fingerprint, design, moments, list(json.loads(row[1])), int(row[2]))

    def fingerprints(self) -> list[str]:
        """Every input fingerprint held, oldest first."""
        return [r[0] for r in self._con.execute(
            "SELECT fingerprint FROM inputs ORDER BY created, fingerprint")]

    # -- digests of input files ---------------------------------------------------------------
    def put_digests(self, rows: Iterable[tuple]) -> bool:
        """Keep digest records ``(path, dev, ino, size, mtime_ns, ctime_ns, sha256,
        hashed_ns)`` in one transaction, each replacing the record of its path (rows as
        `pipeline.stats.fingerprint.digest_records` gives them).

        A cache only: returns False, keeping nothing, when the table cannot take them (a
        store whose ``digests`` table is damaged or of another shape).
        """
        rows = list(rows)
        if not rows:
            return True
        try:
            self._write(lambda c: c.executemany(
                "INSERT OR REPLACE INTO digests (path, dev, ino, size, mtime_ns, ctime_ns, "
                "sha256, hashed_ns) VALUES (?,?,?,?,?,?,?,?)", rows))
        except sqlite3.DatabaseError:
            return False
        return True

    def digests(self) -> list[tuple]:
        """Every digest record kept, by path (empty when the table cannot be read)."""
        try:
            return self._con.execute(
                "SELECT path, dev, ino, size, mtime_ns, ctime_ns, sha256, hashed_ns "
                "FROM digests ORDER BY path").fetchall()
        except sqlite3.DatabaseError:
            return []

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

    def load_arrays(self, fid: int, kind: str, regime: str, size: int
                    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, list[str | None]]:
        """The results `load` gives, as arrays: key rows, statistics, p-values, left-out texts.

        Key rows are ``(x, y, *cond)`` (int64, shape ``(n, size + 2)``, `cond` ascending as
        written by `insert`); a NULL statistic or p-value is NaN. A row whose `cond` is
        not as `insert` writes it is left out (it can match no test).
        """
        rows = self._con.execute(
            "SELECT x, y, cond, statistic, pvalue, left_out FROM tests "
            "WHERE fid = ? AND kind = ? AND regime = ? AND size = ?",
            (fid, kind, regime, int(size))).fetchall()
        size = int(size)
        if not rows:
            return (np.zeros((0, size + 2), dtype=np.int64), np.zeros(0), np.zeros(0), [])
        xs, ys, conds, stats, pvals, left = zip(*rows, strict=True)
        del rows
        keys = np.empty((len(xs), size + 2), dtype=np.int64)
        keys[:, 0] = xs
        keys[:, 1] = ys
        stat = np.array(stats, dtype=float)  # None (NULL) becomes NaN
        pval = np.array(pvals, dtype=float)
        flat = np.fromstring(",".join(conds), dtype=np.int64, sep=",") \
            if size and all(conds) else np.zeros(0, dtype=np.int64)
        if flat.size == len(conds) * size and (size or not any(conds)):
            if size:
                keys[:, 2:] = flat.reshape(-1, size)
        else:  # a text that `insert` does not write: keep only the rows it would write
            ok = np.zeros(len(conds), dtype=bool)
            for i, c in enumerate(conds):
                parts = c.split(",") if c else []
                if len(parts) == size and all(t.isdigit() for t in parts):
                    ints = sorted(map(int, parts))
                    if ",".join(map(str, ints)) == c:
                        keys[i, 2:] = ints
                        ok[i] = True
            keys, stat, pval = keys[ok], stat[ok], pval[ok]
            left = tuple(t for t, o in zip(left, ok.tolist(), strict=True) if o)
        return keys, stat, pval, list(left)

    _COUNT = "SELECT COUNT(*) FROM tests WHERE fid = ? AND kind = ? AND regime = ? AND size = ?"

    def load_held(self, fid: int
                  ) -> dict[tuple[str, str, int],
                            tuple[np.ndarray, np.ndarray, np.ndarray, list[str | None]]]:
        """What `load_arrays` gives for each level of `fid`, from the packed copies written
        by `put_held` (two queries), by ``(kind, regime, size)``.

        A copy is left out when it is out of date: the tests table holds another number
        of rows of its level (test rows are only ever added, so an equal count means the
        same rows; the copies are read before the counts).
        """
        rows = self._con.execute(
            "SELECT kind, regime, size, n, keys, statistic, pvalue, left_out FROM held "
            "WHERE fid = ?", (fid,)).fetchall()
        if not rows:
            return {}
        counts = {(k, r, z): n for k, r, z, n in self._con.execute(
            "SELECT kind, regime, size, COUNT(*) FROM tests WHERE fid = ? "
            "GROUP BY kind, regime, size", (fid,))}
        out = {}
        for kind, regime, size, n, keys, stat, pval, lefts in rows:
            if counts.get((kind, regime, size)) != n:
                continue
            left: list[str | None] = [None] * n
            for i, text in json.loads(lefts).items():
                left[int(i)] = text
            out[(kind, regime, size)] = (
                np.frombuffer(keys, dtype="<i8").astype(np.int64).reshape(n, size + 2),
                np.frombuffer(stat, dtype="<f8").astype(float),
                np.frombuffer(pval, dtype="<f8").astype(float), left)
        return out

    def put_held(self, levels: list[tuple]) -> None:
        """Keep packed copies of levels ``(fid, kind, regime, size, keys, statistic, pvalue,
        left_out)`` (one transaction; held rows distinct, as read back from the tests table).

        A level is kept only if the tests table holds exactly as many rows of it (it then
        holds the same ones); otherwise its old copy, if any, is left to be found stale.
        """
        def put(c: sqlite3.Connection) -> None:
            for fid, kind, regime, size, keys, stat, pval, left in levels:
                where = (fid, kind, regime, int(size))
                if c.execute(self._COUNT, where).fetchone()[0] != len(keys):
                    continue
                lefts = {str(i): t for i, t in enumerate(left) if t}
                c.execute("INSERT OR REPLACE INTO held VALUES (?,?,?,?,?,?,?,?,?)",
                          (*where, len(keys), np.ascontiguousarray(keys, dtype="<i8").tobytes(),
                           np.ascontiguousarray(stat, dtype="<f8").tobytes(),
                           np.ascontiguousarray(pval, dtype="<f8").tobytes(), json.dumps(lefts)))
        if levels:
            self._write(put)

    # -- named numbers --------------------------------------------------------------------
    def load_numbers(self, fid: int) -> dict[str, dict[str, np.ndarray]]:
        """Every named set of arrays kept for `fid` (one query), by name, then field."""
        out: dict[str, dict[str, np.ndarray]] = {}
        for name, field, value in self._con.execute(
                "SELECT name, field, value FROM numbers WHERE fid = ?", (fid,)):
            out.setdefault(name, {})[field] = _from_blob(value)
        return out

    def put_numbers(self, fid: int, name: str, arrays: dict[str, np.ndarray]) -> None:
        """Keep the arrays of `name` for `fid` in one transaction (first write wins)."""
        rows = [(fid, name, field, _to_blob(np.asarray(a))) for field, a in arrays.items()]
        if rows:
            self._write(lambda c: c.executemany(
                "INSERT OR IGNORE INTO numbers VALUES (?,?,?,?)", rows))

    def insert(self, rows: list[tuple]) -> None:
        """Write rows ``(fid, kind, regime, size, x, y, cond, statistic, pvalue, left_out)``
        in one transaction (keys already stored are kept; a NaN is stored as NULL)."""
        if rows:
            self._write(lambda c: c.executemany(
                "INSERT OR IGNORE INTO tests VALUES (?,?,?,?,?,?,?,?,?,?)", rows))


_KEY = operator.itemgetter(0, 1, 2)
_VALUE = operator.itemgetter(3, 4, 5)
