"""Sufficient statistics: the only thing the tests read.

Names are imported on first use, so that importing one module of the package does not
import the others (the command line starts faster).
"""

from __future__ import annotations

from pipeline.lazy import lazy_exports

_WHERE = {
    "Moments": "pipeline.stats.moments",
    "MomentAccumulator": "pipeline.stats.accumulate",
    "normal_scores": "pipeline.stats.ranks",
    "fingerprint_inputs": "pipeline.stats.fingerprint",
}

__all__ = list(_WHERE)

__getattr__, __dir__ = lazy_exports(__name__, _WHERE, globals())
