"""Where a result comes from: input files, tool version, date and command line.

`provenance` returns a plain dict for ``result.json`` (``provenance``) and the report:
each input file as given (path, size in bytes, SHA-256 of its bytes), the tool's
version (from the installed package metadata), the date and time in UTC (ISO 8601),
the command line (``orienteer ...`` when run from the command line, ``python API``
otherwise) and the versions of Python and numpy. Hashing reads each file in blocks and
parses nothing.

>>> p = provenance([])
>>> p["command"], sorted(p)[:3]
('python API', ['command', 'date', 'inputs'])
"""

from __future__ import annotations

import shlex
import sys
from collections.abc import Iterable, Iterator, Sequence
from contextlib import contextmanager
from contextvars import ContextVar
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from pipeline.errors import InputError

__all__ = ["provenance", "command_line", "running_command", "tool_version", "file_record"]

_COMMAND: ContextVar[str | None] = ContextVar("orienteer_command_line", default=None)


@contextmanager
def running_command(argv: Sequence[str]) -> Iterator[None]:
    """Inside the block, `command_line` is ``orienteer`` followed by `argv` (quoted).

    The command-line entry point wraps each command in it; afterwards the earlier value
    is back, so a later call through the Python API says ``python API``.
    """
    token = _COMMAND.set(shlex.join(["orienteer", *map(str, argv)]))
    try:
        yield
    finally:
        _COMMAND.reset(token)


def command_line() -> str:
    """The command line of the running command (`running_command`), else ``"python API"``."""
    return _COMMAND.get() or "python API"


def tool_version() -> str:
    """The version of Orienteer."""
    from pipeline import __version__

    return __version__


def file_record(path: str | Path, role: str) -> dict[str, Any]:
    """``{"role", "path", "bytes", "sha256"}`` of one input file (the path as given).

    Raises
    ------
    InputError
        If the file cannot be read.
    """
    from pipeline.stats.fingerprint import FILE_HASHES, file_digest, file_key

    try:
        key = file_key(Path(path))
        digest = FILE_HASHES.get(key) or file_digest(Path(path))  # hashed by the fingerprint
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror}); check the path") from None
    return {"role": role, "path": str(path), "bytes": key[1], "sha256": digest}


def provenance(data: Iterable[str | Path], regimes: str | Path | None = None) -> dict[str, Any]:
    """The provenance of a run on the measurement files `data` and the `regimes` file."""
    import numpy

    inputs = [file_record(p, "data") for p in data]
    if regimes is not None:
        inputs.append(file_record(regimes, "regimes"))
    return {
        "inputs": inputs,
        "tool": "orienteer",
        "version": tool_version(),
        "date": datetime.now(UTC).replace(microsecond=0).isoformat().replace(
            "+00:00", "Z"),
        "command": command_line(),
        "python": "{}.{}.{}".format(*sys.version_info[:3]),
        "numpy": numpy.__version__,
    }
