"""Graph theory of interventional Markov equivalence; imports no statistics.

Names are imported on first use, so that importing one module of the package does not
import the others (the command line starts faster).
"""

from __future__ import annotations

from pipeline.lazy import lazy_exports

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

__getattr__, __dir__ = lazy_exports(__name__, _WHERE, globals())
