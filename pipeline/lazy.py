"""Lazy re-exports for package ``__init__`` modules: a name is imported on first use.

A package that re-exports its modules' names eagerly imports every module (and their
libraries) as soon as any one is imported, which slows the command line's start. With
``__getattr__, __dir__ = lazy_exports(__name__, WHERE, globals())`` a package maps each
public name to the module that defines it, and imports that module only when the name is
first asked for (PEP 562).
"""

from __future__ import annotations

import importlib
from collections.abc import Callable, Mapping
from typing import Any

__all__ = ["lazy_exports"]


def lazy_exports(package: str, where: Mapping[str, str], namespace: dict[str, Any]
                 ) -> tuple[Callable[[str], Any], Callable[[], list[str]]]:
    """``(__getattr__, __dir__)`` for `package` re-exporting ``where[name]``'s `name`."""
    def __getattr__(name: str) -> Any:
        if name in where:
            return getattr(importlib.import_module(where[name]), name)
        raise AttributeError(f"module {package!r} has no attribute {name!r}")

    def __dir__() -> list[str]:
        return sorted(set(namespace) | set(where))

    return __getattr__, __dir__
