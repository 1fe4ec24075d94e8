"""The augmented graph (Yang, Katcoff & Uhler 2018; Kocaoglu et al. 2019)."""

from __future__ import annotations

import networkx as nx
import pytest

from pipeline.graphs.augmented import augmented_graph
from pipeline.graphs.pdag import InterventionNode


def test_one_intervention_node_per_regime():
    d = nx.DiGraph([("A", "B"), ("B", "C")])
    g = augmented_graph(d, {"kd_A": ["A"], "kd_BC": ["B", "C"]})
    f1, f2 = InterventionNode("kd_A"), InterventionNode("kd_BC")
    assert set(g.successors(f1)) == {"A"}
    assert set(g.successors(f2)) == {"B", "C"}
    for f in (f1, f2):
        assert g.in_degree(f) == 0  # no parents, no edges among intervention nodes
    assert set(d.edges) <= set(g.edges)
    assert nx.is_directed_acyclic_graph(g)


def test_symmetric_difference_with_reference_targets():
    # METHODS.md 1: F_k points at T_k xor T_ref
    d = nx.DiGraph([("A", "B"), ("B", "C")])
    g = augmented_graph(d, {"r1": ["A", "B"], "r2": []}, reference_targets=["B"])
    assert set(g.successors(InterventionNode("r1"))) == {"A"}
    assert set(g.successors(InterventionNode("r2"))) == {"B"}


def test_rejects_cycle_and_unknown_target():
    with pytest.raises(ValueError, match="acyclic"):
        augmented_graph(nx.DiGraph([("A", "B"), ("B", "A")]), {})
    with pytest.raises(ValueError, match="not nodes"):
        augmented_graph(nx.DiGraph([("A", "B")]), {"r": ["Z"]})
