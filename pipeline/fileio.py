"""Files: atomic output (write beside the destination, then rename over it), and JSON input."""

from __future__ import annotations

import itertools
import json
import os
from collections.abc import Callable
from pathlib import Path
from typing import IO, Any

__all__ = ["atomic_write", "write_text", "write_json", "read_json", "json_text"]

#: Numbers the temporary files of this process (with its pid, unique in a folder).
_SERIAL = itertools.count()


def _temporary(path: Path) -> tuple[int, str]:
    """Create a new hidden file beside `path` for writing: ``(descriptor, name)``.

    Named ``.<name>.<pid>.<serial>.tmp`` and created exclusively (``O_EXCL``), with the
    permissions of an ordinary file under the umask. (What `tempfile.mkstemp` does,
    without the libraries it imports: a rerun's start-up counts its milliseconds.)
    """
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0)
    while True:
        tmp = str(path.parent / f".{path.name}.{os.getpid()}.{next(_SERIAL)}.tmp")
        try:
            return os.open(tmp, flags, 0o666), tmp
        except FileExistsError:  # left by a process of the same pid long ago
            continue


def atomic_write(path: str | Path, write: Callable[[IO[Any]], None], binary: bool = False) -> Path:
    """Call ``write(handle)`` on a temporary file in the destination folder, then rename it.

    An interrupted run leaves either the old file or the new one, never half of one.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = _temporary(path)
    try:
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


def json_text(obj: Any, levels: int = 2) -> str:
    """`obj` as JSON text: the outer `levels` of objects and arrays one member per line
    (indented by two spaces), each deeper value on one line.

    A result's edges, regimes and matrix rows thus read one per line, and each is encoded
    by the standard library's C encoder (indenting every level goes through its slower
    pure-Python one). NaN and infinity are refused, as JSON has neither.

    >>> print(json_text({"edges": [{"source": "A", "via": ["I1"]}], "n": 1}), end="")
    {
      "edges": [
        {"source": "A", "via": ["I1"]}
      ],
      "n": 1
    }
    """
    return _json_lines(obj, levels, "") + "\n"


def _json_lines(obj: Any, levels: int, pad: str) -> str:
    if levels <= 0 or not isinstance(obj, (dict, list, tuple)) or not obj:
        return json.dumps(obj, allow_nan=False)
    inner = pad + "  "
    if isinstance(obj, dict):
        members = [f"{inner}{json.dumps(_key(k))}: {_json_lines(v, levels - 1, inner)}"
                   for k, v in obj.items()]
        return "{\n" + ",\n".join(members) + "\n" + pad + "}"
    members = [inner + _json_lines(v, levels - 1, inner) for v in obj]
    return "[\n" + ",\n".join(members) + "\n" + pad + "]"


def _key(k: Any) -> str:
    """A member name as the standard encoder writes it (JSON names are strings: ``1`` is
    written ``"1"``, ``True`` ``"true"``; other types raise TypeError as there)."""
    if isinstance(k, str):
        return k
    return next(iter(json.loads(json.dumps({k: 0}))))


def write_json(path: str | Path, obj: Any) -> Path:
    """Write `obj` as JSON (`json_text`) to `path` atomically."""
    return write_text(path, json_text(obj))


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
