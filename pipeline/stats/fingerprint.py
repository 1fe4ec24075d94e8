"""A content fingerprint of the inputs, to tell whether stored statistics still apply.

The fingerprint is the SHA-256 of the raw bytes of every data file (in the order given),
of the regimes file, and of the options that change the statistics (regime column,
ignored columns, dropping of missing rows, reference, test). File names and dates do not
enter: renaming or touching a file keeps its fingerprint; editing one byte changes it.
Hashing reads the bytes in blocks and parses nothing, so it is cheap next to reading.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Sequence
from pathlib import Path

from pipeline.errors import InputError

__all__ = ["fingerprint_inputs", "statistics_options"]

_FORMAT = b"orienteer.fingerprint/1"
_BLOCK = 1 << 20


def statistics_options(*, regime_column: str = "regime", ignore_columns: Sequence[str] = (),
                       drop_missing: bool = False, reference: str | None = None,
                       test: str = "gaussian") -> dict:
    """The options that change the statistics, normalized (ignored columns sorted)."""
    if isinstance(ignore_columns, str):
        ignore_columns = [c for c in ignore_columns.split(",")]
    return {"regime_column": str(regime_column),
            "ignore_columns": sorted({str(c).strip() for c in ignore_columns if str(c).strip()}),
            "drop_missing": bool(drop_missing),
            "reference": None if reference is None else str(reference),
            "test": str(test)}


class _Stopped(Exception):
    """Hashing was abandoned (the caller failed and no longer needs the fingerprint)."""


def _hash_file(h: hashlib._Hash, path: Path, role: bytes, stop=None) -> None:
    try:
        size = path.stat().st_size
        fh = open(path, "rb")  # noqa: SIM115 - read-only, closed below
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror}); check the path") from None
    with fh:
        h.update(role + b"\0" + str(size).encode() + b"\0")
        while block := fh.read(_BLOCK):
            if stop is not None and stop.is_set():
                raise _Stopped
            h.update(block)


def fingerprint_inputs(data: Sequence[str | Path], regimes: str | Path, *,
                       regime_column: str = "regime", ignore_columns: Sequence[str] = (),
                       drop_missing: bool = False, reference: str | None = None,
                       test: str = "gaussian") -> str:
    """Return the hex SHA-256 fingerprint of the input bytes and the statistics options.

    Takes the same arguments as :func:`pipeline.intake.read.read_inputs` (those that
    change the statistics), so a caller can tell without parsing anything whether
    statistics stored from an earlier run still apply.

    Raises
    ------
    InputError
        If a file cannot be read.
    """
    options = statistics_options(regime_column=regime_column, ignore_columns=ignore_columns,
                                 drop_missing=drop_missing, reference=reference, test=test)
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
    h.update(json.dumps(options, sort_keys=True).encode())
    return h.hexdigest()
