"""GraphML output, read back by networkx (the outside reader of the open standard)."""

import networkx as nx

from pipeline.results.graphml import graphml_text
from pipeline.results.schema import EdgeRecord


def test_special_characters_and_numbers_survive(tmp_path):
    nodes = ['a&b', 'c<d>', 'e"f', "plain"]
    edges = [EdgeRecord('a&b', 'c<d>', "directed", "intervention", ["kd_<x>"], 1e-30, 0.25),
             EdgeRecord('c<d>', 'e"f', "undirected", "none", [], None, None, conflict=True)]
    path = tmp_path / "g.graphml"
    path.write_text(graphml_text(nodes, edges), encoding="utf-8")
    g = nx.read_graphml(path)
    assert list(g.nodes) == nodes
    assert g.edges["a&b", "c<d>"]["via"] == "kd_<x>"
    assert g.edges["a&b", "c<d>"]["p_adjacency"] == 1e-30
    assert g.edges["c<d>", 'e"f']["conflict"] is True
    assert "p_adjacency" not in g.edges["c<d>", 'e"f']
    assert g.number_of_edges() == 2
