"""Graph theory of interventional Markov equivalence; imports no statistics.

Names are imported on first use, so that importing one module of the package does not
import the others (the command line starts faster).
"""

from __future__ import annotations

import importlib
from typing import Any

_WHERE = {
    "PDAG": "pipeline.graphs.pdag",
    "InterventionNode": "pipeline.graphs.pdag",
    "augmented_graph": "pipeline.graphs.augmented",
    "Orientation": "pipeline.graphs.meek",
    "meek_closure": "pipeline.graphs.meek",
    "EdgeReason": "pipeline.graphs.essential",
    "EssentialGraph": "pipeline.graphs.essential",
    "essential_graph": "pipeline.graphs.essential",
    "orient_pattern": "pipeline.graphs.essential",
    "v_structures": "pipeline.graphs.essential",
    "chain_components": "pipeline.graphs.counting",
    "class_size": "pipeline.graphs.counting",
    "count_amos": "pipeline.graphs.counting",
    "sample_dags": "pipeline.graphs.sampling",
    "sample_orientations": "pipeline.graphs.sampling",
    "enumerate_dags": "pipeline.graphs.sampling",
    "essential_graph_problems": "pipeline.graphs.validity",
}

__all__ = list(_WHERE)


def __getattr__(name: str) -> Any:
    if name in _WHERE:
        return getattr(importlib.import_module(_WHERE[name]), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(list(globals()) + __all__)
