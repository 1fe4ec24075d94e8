"""Errors the command line turns into exit codes.

`InputError` is the user's to fix (exit 2, one ``error:`` line, no traceback);
every other exception is a fault of ours (exit 1, the traceback goes to a log).
"""

from __future__ import annotations

from collections.abc import Iterable

__all__ = ["InputError", "nearest_names"]


class InputError(ValueError):
    """The input files or the command line are wrong; the message says what and how to fix it."""


def nearest_names(name: str, candidates: Iterable[str], n: int = 3) -> str:
    """Return ``" (nearest: A, B)"`` naming the candidates closest to `name`, or ``""``."""
    import difflib

    close = difflib.get_close_matches(name, list(candidates), n=n, cutoff=0.5)
    return f" (nearest: {', '.join(close)})" if close else ""
