"""The learner: PC on the graph augmented with intervention nodes.

`learn_graph` learns the interventional essential graph from a `Tester` and returns a
`Learned` result with the evidence of every decision; `DSeparationTester` answers the
tests from d-separation in a known DAG (the oracle the learner is checked against).

Names are imported on first use, so that importing one module of the package does not
import the others (the command line starts faster).
"""

from __future__ import annotations

from pipeline.lazy import lazy_exports

_WHERE = {
    "learn_graph": "pipeline.learner.pc",
    "Learned": "pipeline.learner.evidence",
    "RemovedPair": "pipeline.learner.evidence",
    "KeptPair": "pipeline.learner.evidence",
    "TargetFinding": "pipeline.learner.evidence",
    "Conflict": "pipeline.learner.evidence",
    "DSeparationTester": "pipeline.learner.oracle",
    "COLLIDER_RULES": "pipeline.options",
    "TARGET_MODES": "pipeline.options",
}

__all__ = list(_WHERE)

__getattr__, __dir__ = lazy_exports(__name__, _WHERE, globals())
