"""Scores against a truth: SHD as defined by Tsamardinos, Brown & Aliferis (2006)."""

from __future__ import annotations

import pytest

from pipeline.analyses.scoring import score, shd
from pipeline.graphs.pdag import PDAG


def _g(nodes, directed=(), undirected=()):
    g = PDAG(nodes)
    for u, v in directed:
        g.add_directed(u, v)
    for u, v in undirected:
        g.add_undirected(u, v)
    return g


# Tsamardinos, Brown & Aliferis (2006): one per missing or extra adjacency, one per
# adjacency whose marks differ. The counts below are worked by hand from that definition.
@pytest.mark.parametrize("a, b, expected", [
    # identical graphs
    (_g("ABC", [("A", "B")], [("B", "C")]), _g("ABC", [("A", "B")], [("B", "C")]), 0),
    # one missing adjacency
    (_g("ABC", [("A", "B")]), _g("ABC", [("A", "B"), ("B", "C")]), 1),
    # one extra adjacency
    (_g("ABC", [("A", "B")], [("A", "C")]), _g("ABC", [("A", "B")]), 1),
    # reversed edge counts one, not two
    (_g("AB", [("B", "A")]), _g("AB", [("A", "B")]), 1),
    # undirected against directed counts one
    (_g("AB", [], [("A", "B")]), _g("AB", [("A", "B")]), 1),
    # collider A -> C <- B against chain A - C - B (two mark errors)
    (_g("ABC", [("A", "C"), ("B", "C")]), _g("ABC", [], [("A", "C"), ("C", "B")]), 2),
    # empty against complete on 4 nodes: 6 missing adjacencies
    (_g("ABCD"), _g("ABCD", [], [(u, v) for i, u in enumerate("ABCD") for v in "ABCD"[i + 1:]]),
     6),
])
def test_shd_hand_computed(a, b, expected):
    assert shd(a, b) == expected
    assert shd(b, a) == expected  # symmetric by definition


def test_shd_node_sets_must_match():
    with pytest.raises(ValueError, match="same nodes"):
        shd(_g("AB"), _g("ABC"))


def test_score_fractions_hand_computed():
    # truth: A -> B -> C, C - D ; learned: A -> B, C -> B (wrong), B - D (extra), C - D
    truth = _g("ABCD", [("A", "B"), ("B", "C")], [("C", "D")])
    learned = _g("ABCD", [("A", "B"), ("C", "B")], [("B", "D"), ("C", "D")])
    s = score(learned, truth)
    # adjacencies: learned {AB, BC, BD, CD}, truth {AB, BC, CD}: 3 shared
    assert s.adjacency_precision == pytest.approx(3 / 4)
    assert s.adjacency_recall == pytest.approx(3 / 3)
    # directed: learned {A->B, C->B}, truth {A->B, B->C}: 1 shared
    assert s.orientation_precision == pytest.approx(1 / 2)
    assert s.orientation_recall == pytest.approx(1 / 2)
    # SHD: extra BD (1) + reversed BC (1)
    assert s.shd == 2
    assert s.to_dict()["shd"] == 2
    assert "structural Hamming distance" in s.summary()


def test_score_undefined_fractions_are_none():
    s = score(_g("AB"), _g("AB"))
    assert s.shd == 0
    assert s.adjacency_precision is None and s.orientation_recall is None


def _record(edges, declared):
    from pipeline.results.schema import EdgeRecord, RegimeRecord, ResultRecord

    return ResultRecord(
        nodes=["A", "B", "C"],
        regimes=[RegimeRecord("ctrl", [], reference=True), RegimeRecord("kd", list(declared))],
        edges=[EdgeRecord(u, v, "directed") for u, v in edges], class_size=1)


def test_compare_uses_the_true_targets_and_the_dag_as_fixed_references():
    # Truth: the fork A -> B, A -> C. The regime declares A but really acted on B.
    # Essential graphs (Hauser & Buhlmann 2012), worked by hand: under {A}, F -> A - B and
    # F -> A - C orient both edges (Meek's rule 1); under {B}, F -> B <- A orients A -> B
    # only, A - C stays undirected.
    import networkx as nx

    from pipeline.analyses.scoring import compare_result
    from pipeline.design import Regime

    dag = nx.DiGraph([("A", "B"), ("A", "C")])
    rec = _record([("A", "B"), ("A", "C")], ["A"])
    truth = [Regime("ctrl", (), reference=True), Regime("kd", ("B",))]
    c = compare_result(rec, dag, truth)
    assert c.design.shd == 0                     # the result's own (declared) design
    assert c.true_design.shd == 1                # A - C is not identified by the truth
    assert (c.true_design.orientation_precision, c.true_design.orientation_recall) == (0.5, 1.0)
    assert c.dag.shd == 0 and c.dag.orientation_recall == 1.0
    d = c.to_dict()
    assert d["shd"] == 0 and d["against_true_design"]["shd"] == 1
    assert d["true_design_targets"] == "true"
    # without the true targets the declared ones stand in
    assert compare_result(rec, dag).true_design.shd == 0
    with pytest.raises(ValueError, match="kd"):
        compare_result(rec, dag, [Regime("ctrl", (), reference=True)])
    assert "true DAG" in c.summary() and "true targets" in c.summary()
