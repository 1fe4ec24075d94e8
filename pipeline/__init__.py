"""Orienteer: orient the edges of a causal graph from control and perturbation experiments.

The Python API mirrors the command line::

    import pipeline
    result = pipeline.learn(["data.csv"], "regimes.csv", alpha=0.01)
    result.edges            # DataFrame, one row per edge with its evidence
    result.to_networkx()
    result.save("out/")
    pipeline.sweep("out/", [0.001, 0.01, 0.05])   # the same run at other alphas, from its store

Names are imported lazily so that ``import pipeline`` stays fast.
"""

from __future__ import annotations

from pipeline.lazy import lazy_exports

#: The version of Orienteer (the package metadata takes it from here).
__version__ = "0.1.0"

__all__ = [
    "learn",
    "sweep",
    "check",
    "simulate",
    "identify",
    "validate",
    "plan",
    "read_inputs",
    "read_regimes",
    "essential_graph",
    "class_size",
    "PDAG",
]

_WHERE = {
    "learn": "pipeline.workflow",
    "sweep": "pipeline.analyses.sweep",
    "check": "pipeline.analyses.check",
    "simulate": "pipeline.simulation",
    "identify": "pipeline.analyses.identify",
    "validate": "pipeline.analyses.validate",
    "plan": "pipeline.analyses.plan",
    "read_inputs": "pipeline.intake.read",
    "read_regimes": "pipeline.intake.regimes",
    "essential_graph": "pipeline.graphs.essential",
    "class_size": "pipeline.graphs.counting",
    "PDAG": "pipeline.graphs.pdag",
}

__getattr__, __dir__ = lazy_exports(__name__, _WHERE, globals())
