"""Tests of pipeline.results.drawing: the SVG drawing of the learned graph in report.html.

The outside references: the standard library XML parser (the SVG must be well-formed and
its names escaped) and networkx (layers of a DAG against ``topological_generations``).
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

import networkx as nx
import numpy as np
import pytest

from pipeline.design import Design, Regime
from pipeline.results.drawing import (
    COLOURS,
    MAX_DRAWN,
    MAX_WITH_ISOLATED,
    graph_section,
    graph_svg,
)
from pipeline.results.report import render_report
from pipeline.results.schema import EdgeRecord
from pipeline.simulation import simulate
from pipeline.stats.moments import Moments
from pipeline.workflow import learn_from_moments

WEIRD = 'a<b>&"c'


def _parse(svg: str) -> ET.Element:
    """The SVG parsed by the standard library (wrapped as it sits in the page)."""
    return ET.fromstring(f"<div>{svg}</div>").find("svg")


def _edges(root: ET.Element) -> list[ET.Element]:
    return [p for p in root.iter("path") if "og-edge" in p.get("class", "")]


def _centres(root: ET.Element) -> dict[str, tuple[float, float]]:
    """Node name (from its tooltip) -> centre of its box."""
    out = {}
    for g in root.iter("g"):
        if g.get("class") == "og-node":
            r = g.find("rect")
            out[g.find("title").text] = (float(r.get("x")) + float(r.get("width")) / 2,
                                         float(r.get("y")) + float(r.get("height")) / 2)
    return out


def _mixed() -> tuple[list[str], list[EdgeRecord]]:
    nodes = ["A", "B", WEIRD, "D", "E", "lonely"]
    edges = [EdgeRecord("A", "B", "directed", "intervention", ["kd_A"], 1e-9, 0.4),
             EdgeRecord("B", WEIRD, "directed", "meek-1", ["A"], 1e-4),
             EdgeRecord("D", WEIRD, "directed", "collider", ["B"], 2e-3, 0.6),
             EdgeRecord("D", "E", "undirected", "none", [], 1e-3),
             EdgeRecord("A", "E", "undirected", "none", [], 1e-2, conflict=True)]
    return nodes, edges


def test_parses_and_has_one_mark_per_edge_and_node():
    nodes, edges = _mixed()
    svg = graph_svg(nodes, edges)
    assert "xmlns" not in svg and "<script" not in svg and "http" not in svg
    root = _parse(svg)
    assert root is not None
    marks = _edges(root)
    assert len(marks) == len(edges)
    # every node is drawn (the isolated one in its own row) with one box each
    boxes = [r for r in root.iter("rect") if r.get("class") == "og-box"]
    assert len(boxes) == len(nodes)
    assert set(_centres(root)) == set(nodes)


def test_heads_only_on_directed_edges_and_conflicts_dashed():
    nodes, edges = _mixed()
    edges.append(EdgeRecord("B", "D", "directed", "collider", ["E"], 1e-3, conflict=True,
                            strength=2.5, explanation="B -> D: why."))
    marks = _edges(_parse(graph_svg(nodes, edges)))
    for e, mark in zip(edges, marks, strict=True):
        directed = e.orientation == "directed"
        assert (mark.get("marker-end") is not None) == directed
        assert (mark.get("stroke-dasharray") is not None) == e.conflict
        # the tooltip carries the evidence: ends, rule, via, p adjacency
        tip = mark.find("title").text
        arrow = "->" if e.orientation == "directed" else "--"
        assert tip.startswith(f"{e.source} {arrow} {e.target}; rule {e.rule}; via ")
        assert "p_adjacency" in tip
    kinds = [m.get("stroke") for m in marks]
    assert kinds == [COLOURS["intervention"], COLOURS["meek"], COLOURS["collider"],
                     COLOURS["undirected"], COLOURS["conflict"], COLOURS["conflict"]]
    assert marks[-1].find("title").text.endswith("strength 2.5; conflicting evidence. "
                                                 "B -> D: why.")
    # every marker an edge points to is defined in <defs>
    svg = graph_svg(nodes, edges)
    root = _parse(svg)
    ids = {m.get("id") for m in root.iter("marker")}
    assert {m.get("marker-end")[5:-1] for m in marks if m.get("marker-end")} <= ids


def test_names_are_escaped():
    nodes, edges = _mixed()
    svg = graph_svg(nodes, edges)
    assert WEIRD not in svg and "a&lt;b&gt;&amp;&quot;c" in svg
    # the parser gives back the name as the user wrote it
    texts = {t.text for t in _parse(svg).iter("text")}
    assert WEIRD in texts


def _random_dag(seed: int) -> nx.DiGraph:
    """A connected DAG: a growing-network tree plus a few edges from later to earlier nodes."""
    g = nx.gn_graph(12, seed=seed)
    rng = np.random.default_rng(seed)
    for _ in range(6):
        a, b = sorted(rng.choice(12, size=2, replace=False))
        g.add_edge(int(b), int(a))
    return nx.relabel_nodes(g, {i: f"V{i}" for i in g})


@pytest.mark.parametrize("seed", range(6))
def test_layers_of_a_dag_follow_its_topological_generations(seed):
    dag = _random_dag(seed)
    assert nx.is_directed_acyclic_graph(dag) and nx.is_weakly_connected(dag)
    nodes = sorted(dag.nodes)
    edges = [EdgeRecord(a, b, "directed", "intervention") for a, b in dag.edges]
    centre = _centres(_parse(graph_svg(nodes, edges)))
    for a, b in dag.edges:
        assert centre[a][1] < centre[b][1], (a, b)
    # longest-path layering has as many layers as the DAG has generations (networkx)
    assert len({y for _, y in centre.values()}) == len(list(nx.topological_generations(dag)))


@pytest.mark.parametrize("seed", range(4))
def test_parts_are_the_connected_components(seed):
    # networkx's connected_components is the reference
    from pipeline.results.layout import components

    g = nx.gnp_random_graph(25, 0.06, seed=seed)
    nodes = [f"V{i}" for i in g]
    edges = [EdgeRecord(f"V{a}", f"V{b}", "undirected", "none") for a, b in g.edges]
    parts = components(nodes, edges)
    want = {frozenset(f"V{i}" for i in c) for c in nx.connected_components(g)}
    assert {frozenset(p) for p, _ in parts} == want
    assert [len(p) for p, _ in parts] == sorted((len(c) for c in want), reverse=True)
    assert sorted((e.source, e.target) for _, es in parts for e in es) \
        == sorted((e.source, e.target) for e in edges)
    for part, es in parts:
        assert all(e.source in part and e.target in part for e in es)


def test_crossing_removed_by_the_barycentre_order():
    # A -> D and B -> C with the node order A, B, C, D: the order of the nodes would cross
    # the two edges; a barycentre sweep puts D left of C (common practice, Sugiyama 1981)
    edges = [EdgeRecord("A", "D", "directed", "intervention"),
             EdgeRecord("B", "C", "directed", "intervention")]
    c = _centres(_parse(graph_svg(["A", "B", "C", "D"], edges)))
    assert (c["A"][0] < c["B"][0]) == (c["D"][0] < c["C"][0])


def test_undirected_and_cyclic_graphs_are_drawn_and_deterministic():
    # an invalid result with a directed cycle still draws every edge
    edges = [EdgeRecord("X", "Y", "directed", "meek-2"), EdgeRecord("Y", "Z", "directed", "meek-1"),
             EdgeRecord("Z", "X", "directed", "collider"), EdgeRecord("Z", "W", "undirected")]
    svg = graph_svg(["X", "Y", "Z", "W"], edges)
    assert len(_edges(_parse(svg))) == 4
    assert svg == graph_svg(["X", "Y", "Z", "W"], edges)


def test_large_graphs_omit_isolated_nodes_then_are_not_drawn():
    n = MAX_WITH_ISOLATED + 10
    nodes = [f"N{i}" for i in range(n)]
    edges = [EdgeRecord(f"N{i}", f"N{i + 1}", "directed", "meek-1") for i in range(0, 60, 2)]
    section = graph_section(nodes, edges)
    root = _parse(section[section.index("<svg"):section.index("</svg>") + 6])
    assert len(_centres(root)) == 60 and "omitted" in section
    nodes = [f"N{i}" for i in range(MAX_DRAWN + 1)]
    section = graph_section(nodes, edges)
    assert "<svg" not in section and "graph.graphml" in section


def test_invalid_arguments():
    with pytest.raises(ValueError, match="not in nodes"):
        graph_svg(["A"], [EdgeRecord("A", "B", "directed")])
    with pytest.raises(ValueError, match="appears twice"):
        graph_svg(["A", "A"], [])
    with pytest.raises(ValueError, match="width"):
        graph_svg(["A"], [], width=10)


def test_report_page_of_a_learned_graph():
    sim = simulate(nodes=6, degree=2.0, regimes=3, samples=400, seed=5)
    variables = tuple(c for c in sim.data.columns if c != "regime")
    groups = {k: g[list(variables)].to_numpy() for k, g in sim.data.groupby("regime", sort=False)}
    design = Design(variables, tuple(
        Regime(row.regime, tuple(filter(None, row.targets.split(";"))), True,
               reference=not row.targets, samples=len(groups[row.regime]))
        for row in sim.regimes.itertuples()))
    moments = Moments.from_samples({r.name: groups[r.name] for r in design.regimes}, variables)
    result = learn_from_moments(design, moments)
    assert result.edge_records  # the simulated graph has edges
    page = render_report(result.record(), result.check)
    assert "<h2>Graph</h2>" in page and "<svg" in page
    assert "http://" not in page and "https://" not in page and "<script" not in page
    root = _parse(page[page.index("<svg"):page.index("</svg>") + 6])
    assert len(_edges(root)) == len(result.edge_records)
    # the drawing comes after the summary and before the edge table
    assert page.index("class size") < page.index("<h2>Graph</h2>") < page.index("<h2>Edges</h2>")
