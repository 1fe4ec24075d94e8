"""A content fingerprint of the inputs, to tell whether stored statistics still apply.

The fingerprint is the SHA-256 of the SHA-256 digests (with the sizes) of every data file
(in the order given) and of the regimes file, and of the options that change the
statistics (regime column, ignored columns, dropping of missing rows, reference, test;
and, when they differ from their defaults, the decimal mark, the regime source, the
worksheet and the chosen genes). File names and dates do not enter, with two exceptions
that change how the bytes are read: the format ending of a file that is not CSV or
Parquet (``.tsv``, ``.gz``, ``.xlsx``, ``.h5ad``, ...), and, with
``regime_from="filename"``, the file names that become the regime names. Otherwise
renaming or touching a file keeps its fingerprint; editing one byte changes it.
Hashing reads the bytes in blocks and parses nothing, so it is cheap next to reading; each
file is hashed once per process, its digest kept for the provenance of the result
(`FILE_HASHES`).

The digest cache
----------------
A rerun into the same output folder need not read unchanged inputs again: the folder's
store (``tests.sqlite``, table ``digests``) keeps, for every file hashed there, its stat
record (resolved path, device, inode, size, modification and status-change times in
nanoseconds), its SHA-256 digest and the wall time (``time.time_ns()``) at which the
hashing began (a stat-keyed digest cache, common practice in version control). A
record stands in for reading the bytes only when

- every stat field equals the file's now: an edit in place, ``cp`` over it, ``touch``,
  ``touch -d``, a rename over it or a ``chmod`` each change at least one field (the
  status-change time cannot be set by a user, and changes with any write); and
- the file was last changed (the later of the two times) at least `RACY_NS` (2 s) before
  its hashing began. A write in the same timestamp tick as the hashing, on a filesystem
  whose clock ticks coarsely, could leave every field as recorded with other bytes: such
  a "racy" record is never trusted (and never written). The margin also covers a
  filesystem clock (a file server's) running somewhat behind this machine's.

Anything else (no store, no table, a malformed row, a file changed, the clock set back)
means the bytes are hashed as without a cache; the cache never raises. The digest taken
from a record is the one that hashing gave, so the fingerprint and the provenance of a
result do not depend on where it came from. `hash_in_background` and
`fingerprint_inputs` read the records (``sqlite3`` and one query: nothing numerical is
imported); the workflow keeps the new ones in the store it opens (`digest_records`,
`pipeline.independence.store.TestStore.put_digests`), in one transaction.
"""

from __future__ import annotations

import hashlib
import json
import os
import threading
import time
from collections.abc import Sequence
from pathlib import Path
from typing import NamedTuple

from pipeline.errors import InputError

__all__ = ["fingerprint_inputs", "statistics_options", "hash_in_background", "file_digest",
           "file_key", "FileKey", "FILE_HASHES", "digest_records", "cached_digests",
           "STORE_NAME", "RACY_NS"]

_FORMAT = b"orienteer.fingerprint/2"
#: The version of the statistics and tests kept under a fingerprint: raised whenever a
#: test's definition changes, so that a store never answers with results of an older one.
METHODS_VERSION = 4
_BLOCK = 1 << 20
#: The store's file name in an output folder (it holds the digest records).
STORE_NAME = "tests.sqlite"
#: A digest record is trusted only for a file last changed at least this many nanoseconds
#: before its hashing began (2 s: the coarsest common timestamp tick, with a margin).
RACY_NS = 2_000_000_000


def statistics_options(*, regime_column: str = "regime", ignore_columns: Sequence[str] = (),
                       drop_missing: bool = False, reference: str | None = None,
                       test: str = "gaussian", decimal: str = ".", regime_from: str = "column",
                       sheet: str | None = None, genes: Sequence[str] | None = None) -> dict:
    """The options that change the statistics, normalized (ignored columns sorted).

    The reading options enter only when they differ from their defaults. `genes` are the
    chosen names, in order. `METHODS_VERSION` always enters: results of older tests are
    never reused.
    """
    if isinstance(ignore_columns, str):
        ignore_columns = [c for c in ignore_columns.split(",")]
    options = {"regime_column": str(regime_column),
               "ignore_columns": sorted({str(c).strip() for c in ignore_columns
                                         if str(c).strip()}),
               "drop_missing": bool(drop_missing),
               "reference": None if reference is None else str(reference),
               "test": str(test), "methods": METHODS_VERSION}
    if decimal is not None and decimal != ".":
        options["decimal"] = str(decimal)
    if regime_from is not None and regime_from != "column":
        options["regime_from"] = str(regime_from)
    if sheet is not None:
        options["sheet"] = str(sheet)
    if genes is not None:
        options["genes"] = [str(g) for g in genes]
    return options


class _Stopped(Exception):
    """Hashing was abandoned (the caller failed and no longer needs the fingerprint)."""


class FileKey(NamedTuple):
    """What ``stat`` says of a file: a digest is reused only while all of it is the same."""

    path: str
    """The resolved path."""
    size: int
    mtime_ns: int
    ctime_ns: int
    dev: int
    ino: int


#: SHA-256 of each file hashed (or found in a digest cache) here, by its `FileKey`: the
#: provenance of a result names the same hashes without reading the bytes again.
FILE_HASHES: dict[FileKey, str] = {}

#: When the hashing of a digest of `FILE_HASHES` began (``time.time_ns()``), for the digests
#: hashed here from a file whose stat record was the same after the hashing.
_STARTED: dict[FileKey, int] = {}


def file_key(path: Path) -> FileKey:
    """The key of `path` in `FILE_HASHES` (raises OSError if it cannot be read)."""
    st = os.stat(path)
    return FileKey(str(Path(path).resolve()), int(st.st_size), int(st.st_mtime_ns),
                   int(st.st_ctime_ns), int(st.st_dev), int(st.st_ino))


def _readable(paths: Sequence[str | Path]) -> list[tuple[Path, FileKey]]:
    """``(path, key)`` of each of `paths` that can be read (the others are left to
    `fingerprint_inputs`, which reports them)."""
    out = []
    for p in paths:
        try:
            out.append((Path(p), file_key(Path(p))))
        except OSError:
            continue
    return out


#: Digests being computed by `hash_in_background`, by file key: set when in FILE_HASHES.
_PENDING: dict[FileKey, threading.Event] = {}


def hash_in_background(paths: Sequence[str | Path], out: str | Path | None = None) -> None:
    """Start hashing the files `paths` on a background thread.

    A fingerprint asked for later waits for these digests instead of reading the bytes
    itself. Called before the heavy imports of a command, the hashing (which releases the
    interpreter lock) runs on another core meanwhile. With `out`, an output folder, the
    thread first takes the digests that the folder's store vouches for (`cached_digests`)
    and hashes only the others. A file that cannot be read is left to
    `fingerprint_inputs`, which reports it.
    """
    jobs = []
    for path, key in _readable(paths):
        if key not in _PENDING and key not in FILE_HASHES:
            _PENDING[key] = done = threading.Event()
            jobs.append((path, key, done))

    def run() -> None:
        try:
            known = cached_digests(out, [key for _, key, _ in jobs])
        except BaseException:
            for _, _, done in jobs:
                done.set()  # the fingerprint hashes them itself
            raise
        for path, key, done in jobs:
            try:
                if key in known:
                    FILE_HASHES[key] = known[key]
                else:
                    _digest_of(path, key)
            except OSError:
                pass  # reported by the fingerprint, which reads the file again
            finally:
                done.set()

    if jobs:
        threading.Thread(target=run, name="orienteer-hash", daemon=True).start()


def cached_digests(out: str | Path | None, keys: Sequence[FileKey]) -> dict[FileKey, str]:
    """The digests of the files `keys` that the store of the output folder `out` vouches
    for: a record with the same stat fields, of a file changed at least `RACY_NS` before
    its hashing began (see the module docstring).

    Reads ``out/tests.sqlite`` with one query; a missing folder, store or table, or a
    malformed row, gives no digest for the files concerned, never an error.
    """
    if out is None or not keys:
        return {}
    import sqlite3

    store = Path(out) / STORE_NAME
    by_path = {k.path: k for k in keys}
    try:
        if not store.is_file():
            return {}
        con = sqlite3.connect(store.resolve().as_uri() + "?mode=rw", uri=True, timeout=1.0)
        try:
            rows = con.execute(
                "SELECT path, dev, ino, size, mtime_ns, ctime_ns, sha256, hashed_ns FROM digests "
                f"WHERE path IN ({','.join('?' * len(by_path))})", list(by_path)).fetchall()
        finally:
            con.close()
    except (sqlite3.Error, OSError, ValueError):
        return {}
    now = time.time_ns()
    found = {}
    for path, dev, ino, size, mtime, ctime, digest, hashed in rows:
        key = by_path.get(path)
        if key is None or (dev, ino, size, mtime, ctime) != _stat_fields(key):
            continue
        if not (type(hashed) is int and max(mtime, ctime) <= hashed - RACY_NS and hashed <= now):
            continue  # racy, or hashed "later" than now: the clock was set back
        if isinstance(digest, str) and len(digest) == 64 and not digest.strip(_HEX):
            found[key] = digest
    return found


_HEX = "0123456789abcdef"


def _stat_fields(key: FileKey) -> tuple[int, int, int, int, int]:
    """``(dev, ino, size, mtime_ns, ctime_ns)`` as stored (SQLite integers are signed 64-bit)."""
    return (_signed(key.dev), _signed(key.ino), key.size, key.mtime_ns, key.ctime_ns)


def _signed(value: int) -> int:
    return value - (1 << 64) if value >= 1 << 63 else value


def digest_records(paths: Sequence[str | Path]) -> list[tuple]:
    """The digest records to keep of the files `paths`: those hashed here that a later run
    may trust (the file unchanged since, and changed at least `RACY_NS` before its hashing
    began), as rows ``(path, dev, ino, size, mtime_ns, ctime_ns, sha256, hashed_ns)``.

    Files whose digest came from a record, or cannot be read, give no row.
    """
    rows = []
    for _, key in _readable(paths):
        started = _STARTED.get(key)
        if started is not None and max(key.mtime_ns, key.ctime_ns) <= started - RACY_NS:
            rows.append((key.path, *_stat_fields(key), FILE_HASHES[key], started))
    return rows


def _digest_of(path: Path, key: FileKey, stop=None) -> str:
    """The SHA-256 of `path` (stat'ed as `key`), kept in `FILE_HASHES` with the time its
    hashing began when the file was still as `key` says after the hashing."""
    started = time.time_ns()
    digest = file_digest(path, stop)
    try:
        unchanged = file_key(path) == key
    except OSError:
        unchanged = False
    if unchanged:
        FILE_HASHES[key] = digest
        _STARTED[key] = started
    return digest


def file_digest(path: Path, stop=None) -> str:
    """Hex SHA-256 of the bytes of `path` (raises `_Stopped` once `stop` is set)."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while block := fh.read(_BLOCK):
            if stop is not None and stop.is_set():
                raise _Stopped
            h.update(block)
    return h.hexdigest()


def _hash_file(h: hashlib._Hash, path: Path, role: bytes, stop=None) -> None:
    """Feed `h` the role, size and digest of `path` (the digest kept in `FILE_HASHES`;
    taken from `hash_in_background` when it hashed the file as it is now)."""
    try:
        key = file_key(path)
        pending = _PENDING.pop(key, None)
        if pending is not None:
            pending.wait()
        digest = FILE_HASHES.get(key)
        if digest is None:
            digest = _digest_of(path, key, stop)
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror}); check the path") from None
    h.update(role + b"\0" + str(key[1]).encode() + b"\0" + digest.encode() + b"\0")


def fingerprint_inputs(data: Sequence[str | Path], regimes: str | Path, *,
                       regime_column: str = "regime", ignore_columns: Sequence[str] = (),
                       drop_missing: bool = False, reference: str | None = None,
                       test: str = "gaussian", decimal: str | None = None,
                       regime_from: str | None = None, sheet: str | None = None,
                       genes: str | Path | Sequence[str] | None = None,
                       out: str | Path | None = None) -> str:
    """Return the hex SHA-256 fingerprint of the input bytes and the statistics options.

    Takes the same arguments as :func:`pipeline.intake.read.read_inputs` (those that
    change the statistics), so a caller can tell without parsing anything whether
    statistics stored from an earlier run still apply. With `out`, an output folder, the
    digests that its store vouches for are not computed again (`cached_digests`); the
    fingerprint is the same.

    Raises
    ------
    InputError
        If a file cannot be read, or a reading option is wrong (`genes` may name a genes
        file, read here).
    """
    from pipeline.intake.reading import reading_of

    r = reading_of(decimal, regime_from, sheet, genes)
    options = statistics_options(regime_column=regime_column, ignore_columns=ignore_columns,
                                 drop_missing=drop_missing, reference=reference, test=test,
                                 decimal=r.decimal, regime_from=r.regime_from, sheet=r.sheet,
                                 genes=r.genes)
    if isinstance(data, (str, Path)):
        data = [data]
    if out is not None:
        _from_cache(out, [*data, regimes])
    return _fingerprint(data, regimes, options)


def _from_cache(out: str | Path, paths: Sequence[str | Path]) -> None:
    """Put into `FILE_HASHES` the digests of `paths` that the store in `out` vouches for
    (files already hashed, or being hashed, are left alone)."""
    keys = []
    for p in paths:
        try:
            key = file_key(Path(p))
        except OSError:
            continue  # reported by the fingerprint
        if key not in FILE_HASHES and key not in _PENDING:
            keys.append(key)
    FILE_HASHES.update(cached_digests(out, keys))


def _fingerprint(data, regimes, options: dict, stop=None) -> str | None:
    """The fingerprint; None if the `stop` event (a threading.Event) was set meanwhile."""
    if isinstance(data, (str, Path)):
        data = [data]
    h = hashlib.sha256(_FORMAT + b"\0")
    try:
        for path in data:
            _hash_file(h, Path(path), b"data", stop)
        _hash_file(h, Path(regimes), b"regimes", stop)
    except _Stopped:
        return None
    h.update(json.dumps(_with_names(data, options), sort_keys=True).encode())
    return h.hexdigest()


def _with_names(data, options: dict) -> dict:
    """`options` plus what the file names say about the reading (see the module docstring)."""
    from pipeline.intake.formats import detect, file_stem

    kinds = [detect(p) for p in data]
    if any(k is not None and k[0] not in ("csv", "parquet") or k is not None and k[1]
           for k in kinds):
        options = {**options, "formats": [list(k) if k else None for k in kinds]}
    if options.get("regime_from") == "filename":
        options = {**options, "stems": [file_stem(p) for p in data]}
    return options
