"""Sufficient statistics: the only thing the tests read.

Names are imported on first use, so that importing one module of the package does not
import the others (the command line starts faster).
"""

from __future__ import annotations

import importlib
from typing import Any

_WHERE = {
    "Moments": "pipeline.stats.moments",
    "MomentAccumulator": "pipeline.stats.accumulate",
    "normal_scores": "pipeline.stats.ranks",
    "fingerprint_inputs": "pipeline.stats.fingerprint",
}

__all__ = list(_WHERE)


def __getattr__(name: str) -> Any:
    if name in _WHERE:
        return getattr(importlib.import_module(_WHERE[name]), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(list(globals()) + __all__)
