"""Files: atomic output (write beside the destination, then rename over it), and JSON input."""

from __future__ import annotations

import json
import os
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import IO, Any

__all__ = ["atomic_write", "write_text", "write_json", "read_json"]

_UMASK = os.umask(0o022)
os.umask(_UMASK)


def atomic_write(path: str | Path, write: Callable[[IO[Any]], None], binary: bool = False) -> Path:
    """Call ``write(handle)`` on a temporary file in the destination folder, then rename it.

    An interrupted run leaves either the old file or the new one, never half of one.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        os.chmod(tmp, 0o666 & ~_UMASK)  # mkstemp makes 0600; outputs are ordinary files
        with os.fdopen(fd, "wb" if binary else "w", **({} if binary else {"encoding": "utf-8",
                                                                            "newline": ""})) as fh:
            write(fh)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path


def write_text(path: str | Path, text: str) -> Path:
    """Write `text` to `path` atomically."""
    return atomic_write(path, lambda fh: fh.write(text))


def write_json(path: str | Path, obj: Any) -> Path:
    """Write `obj` as indented JSON to `path` atomically."""
    return write_text(path, json.dumps(obj, indent=2, allow_nan=False) + "\n")


def read_json(path: str | Path) -> Any:
    """The JSON content of `path`.

    Raises
    ------
    InputError
        If the file is missing or is not UTF-8 JSON (the message names the file).
    """
    from pipeline.errors import InputError

    path = Path(path)
    if not path.is_file():
        raise InputError(f"{path}: no such file")
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except (OSError, json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: not valid JSON ({exc})") from None
