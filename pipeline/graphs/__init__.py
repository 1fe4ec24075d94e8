"""Graph theory of interventional Markov equivalence; imports no statistics."""

from pipeline.graphs.augmented import augmented_graph
from pipeline.graphs.counting import chain_components, class_size, count_amos
from pipeline.graphs.essential import (
    EdgeReason,
    EssentialGraph,
    essential_graph,
    orient_pattern,
    v_structures,
)
from pipeline.graphs.meek import Orientation, meek_closure
from pipeline.graphs.pdag import PDAG, InterventionNode
from pipeline.graphs.sampling import enumerate_dags, sample_dags, sample_orientations
from pipeline.graphs.validity import essential_graph_problems

__all__ = [
    "PDAG", "InterventionNode", "augmented_graph", "Orientation", "meek_closure",
    "EdgeReason", "EssentialGraph", "essential_graph", "orient_pattern", "v_structures",
    "chain_components", "class_size", "count_amos", "sample_dags", "sample_orientations",
    "enumerate_dags",
    "essential_graph_problems",
]
