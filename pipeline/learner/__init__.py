"""The learner: PC on the graph augmented with intervention nodes.

`learn_graph` learns the interventional essential graph from a `Tester` and returns a
`Learned` result with the evidence of every decision; `DSeparationTester` answers the
tests from d-separation in a known DAG (the oracle the learner is checked against).
"""

from pipeline.learner.evidence import (
    Conflict,
    KeptPair,
    Learned,
    RemovedPair,
    TargetFinding,
)
from pipeline.learner.oracle import DSeparationTester
from pipeline.learner.orient import COLLIDER_RULES
from pipeline.learner.pc import TARGET_MODES, learn_graph

__all__ = [
    "learn_graph",
    "Learned",
    "RemovedPair",
    "KeptPair",
    "TargetFinding",
    "Conflict",
    "DSeparationTester",
    "COLLIDER_RULES",
    "TARGET_MODES",
]
