"""The PDAG type, checked against networkx conversions."""

from __future__ import annotations

import networkx as nx
import pytest

from pipeline.graphs.pdag import PDAG, InterventionNode


def sample():
    g = PDAG(["A", "B", "C", "D"])
    g.add_directed("A", "B")
    g.add_undirected("B", "C")
    g.add_undirected("C", "D")
    return g


def test_queries():
    g = sample()
    assert g.parents("B") == {"A"} and g.children("A") == {"B"}
    assert g.neighbors("C") == {"B", "D"}
    assert g.adjacencies("B") == {"A", "C"}
    assert g.adjacent("B", "A") and not g.adjacent("A", "C")
    assert g.number_of_edges() == 3
    assert list(g.undirected_edges()) == [("B", "C"), ("C", "D")]


def test_networkx_round_trip():
    g = sample()
    d = g.to_networkx()
    assert d.number_of_edges() == 5  # 1 arc + 2 x 2 arcs
    assert PDAG.from_networkx(d) == g
    assert nx.utils.graphs_equal(g.skeleton(), nx.Graph([("A", "B"), ("B", "C"), ("C", "D")]))


def test_orient_and_replace():
    g = sample()
    g.orient("B", "C")
    assert g.has_directed("B", "C") and not g.has_undirected("B", "C")
    with pytest.raises(ValueError):
        g.orient("A", "B")  # already directed
    g.add_undirected("A", "B")  # replaces the arc
    assert g.has_undirected("A", "B") and not g.has_directed("A", "B")


def test_is_dag_agrees_with_networkx():
    g = PDAG("ABC")
    g.add_directed("A", "B")
    g.add_directed("B", "C")
    assert g.is_dag() == nx.is_directed_acyclic_graph(g.directed_graph()) is True
    g.add_directed("C", "A")
    assert g.is_dag() == nx.is_directed_acyclic_graph(g.directed_graph()) is False


def test_subgraph_and_intervention_node():
    g = sample()
    g.add_directed(InterventionNode("r"), "A")
    assert str(InterventionNode("r")) == "F[r]"
    s = g.subgraph(["A", "B", "C"])
    assert s.nodes == ["A", "B", "C"] and s.has_directed("A", "B")
    assert s.number_of_edges() == 2
