"""Meek's rules R1-R4 on hand-made textbook cases (Meek 1995; common practice)."""

from __future__ import annotations

from pipeline.graphs.meek import Orientation, meek_closure
from pipeline.graphs.pdag import PDAG


def pdag(directed=(), undirected=()):
    g = PDAG()
    for u, v in directed:
        g.add_directed(u, v)
    for u, v in undirected:
        g.add_undirected(u, v)
    return g


def test_rule_1():
    # a -> b - c, a and c non-adjacent: b -> c (Meek 1995, rule 1)
    g = pdag([("a", "b")], [("b", "c")])
    assert meek_closure(g) == [Orientation("b", "c", "meek-1", ("a",))]
    assert g.has_directed("b", "c")


def test_rule_1_not_when_shielded():
    # a -> b - c with a - c adjacent: nothing forced (common practice)
    g = pdag([("a", "b")], [("b", "c"), ("a", "c")])
    assert meek_closure(g) == []
    assert g.has_undirected("b", "c")


def test_rule_2():
    # a -> b -> c and a - c: a -> c (Meek 1995, rule 2)
    g = pdag([("a", "b"), ("b", "c")], [("a", "c")])
    assert meek_closure(g) == [Orientation("a", "c", "meek-2", ("b",))]


def test_rule_3():
    # a - b, a - c, a - d, c -> b <- d, c and d non-adjacent: a -> b (Meek 1995, rule 3)
    g = pdag([("c", "b"), ("d", "b")], [("a", "b"), ("a", "c"), ("a", "d")])
    made = meek_closure(g)
    assert made == [Orientation("a", "b", "meek-3", ("c", "d"))]
    assert g.has_undirected("a", "c") and g.has_undirected("a", "d")


def test_rule_4():
    # a - b, a - d, a - c, d -> c -> b, b and d non-adjacent: a -> b (Meek 1995, rule 4)
    g = pdag([("d", "c"), ("c", "b")], [("a", "b"), ("a", "d"), ("a", "c")])
    made = meek_closure(g)
    assert Orientation("a", "b", "meek-4", ("d", "c")) in made
    assert g.has_directed("a", "b")


def test_chain_propagates():
    # a -> b - c - d - e: R1 all the way (common practice)
    g = pdag([("a", "b")], [("b", "c"), ("c", "d"), ("d", "e")])
    made = meek_closure(g)
    assert [(o.source, o.target) for o in made] == [("b", "c"), ("c", "d"), ("d", "e")]
    assert all(o.rule == "meek-1" for o in made)


def test_keep_undirected_is_honoured():
    g = pdag([("a", "b")], [("b", "c"), ("c", "d")])
    made = meek_closure(g, keep_undirected=[frozenset({"b", "c"})])
    assert made == []
    assert g.has_undirected("b", "c") and g.has_undirected("c", "d")


def test_background_edges_never_change():
    # directed input edges stay even where they disagree with what the rules would do
    g = pdag([("a", "b"), ("c", "b"), ("b", "d")], [("d", "e"), ("a", "c")])
    before = set(g.directed_edges())
    meek_closure(g)
    assert before <= set(g.directed_edges())
    assert g.has_directed("d", "e")


def test_no_orientation_of_complete_undirected_graph():
    g = pdag([], [("a", "b"), ("b", "c"), ("a", "c")])
    assert meek_closure(g) == []
