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
file is hashed once, its digest kept for the provenance of the result.
"""

from __future__ import annotations

import hashlib
import json
import threading
from collections.abc import Sequence
from pathlib import Path

from pipeline.errors import InputError

__all__ = ["fingerprint_inputs", "statistics_options", "hash_in_background", "file_digest",
           "file_key", "FILE_HASHES"]

_FORMAT = b"orienteer.fingerprint/2"
#: The version of the statistics and tests kept under a fingerprint: raised whenever a
#: test's definition changes, so that a store never answers with results of an older one.
METHODS_VERSION = 4
_BLOCK = 1 << 20


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


#: SHA-256 of each file hashed here, by (resolved path, size, modification time): the
#: provenance of a result names the same hashes without reading the bytes again.
FILE_HASHES: dict[tuple[str, int, int], str] = {}


def file_key(path: Path) -> tuple[str, int, int]:
    """The key of `path` in `FILE_HASHES` (raises OSError if it cannot be read)."""
    st = path.stat()
    return (str(path.resolve()), int(st.st_size), int(st.st_mtime_ns))


#: Digests being computed by `hash_in_background`, by file key: set when in FILE_HASHES.
_PENDING: dict[tuple[str, int, int], threading.Event] = {}


def hash_in_background(paths: Sequence[str | Path]) -> None:
    """Start hashing the files `paths` on a background thread.

    A fingerprint asked for later waits for these digests instead of reading the bytes
    itself. Called before the heavy imports of a command, the hashing (which releases the
    interpreter lock) runs on another core meanwhile. A file that cannot be read is left
    to `fingerprint_inputs`, which reports it.
    """
    jobs = []
    for p in paths:
        try:
            key = file_key(Path(p))
        except OSError:
            continue
        if key not in _PENDING and key not in FILE_HASHES:
            _PENDING[key] = done = threading.Event()
            jobs.append((Path(p), key, done))

    def run() -> None:
        for path, key, done in jobs:
            try:
                FILE_HASHES[key] = file_digest(path)
            except OSError:
                pass  # reported by the fingerprint, which reads the file again
            finally:
                done.set()

    if jobs:
        threading.Thread(target=run, name="orienteer-hash", daemon=True).start()


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
        digest = None
        if pending is not None:
            pending.wait()
            digest = FILE_HASHES.get(key)
        if digest is None:
            digest = FILE_HASHES[key] = file_digest(path, stop)
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror}); check the path") from None
    h.update(role + b"\0" + str(key[1]).encode() + b"\0" + digest.encode() + b"\0")


def fingerprint_inputs(data: Sequence[str | Path], regimes: str | Path, *,
                       regime_column: str = "regime", ignore_columns: Sequence[str] = (),
                       drop_missing: bool = False, reference: str | None = None,
                       test: str = "gaussian", decimal: str | None = None,
                       regime_from: str | None = None, sheet: str | None = None,
                       genes: str | Path | Sequence[str] | None = None) -> str:
    """Return the hex SHA-256 fingerprint of the input bytes and the statistics options.

    Takes the same arguments as :func:`pipeline.intake.read.read_inputs` (those that
    change the statistics), so a caller can tell without parsing anything whether
    statistics stored from an earlier run still apply.

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
    return _fingerprint(data, regimes, options)


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
