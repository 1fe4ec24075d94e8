"""Essential graphs checked against an outside oracle: d-separation in networkx.

For every labelled DAG on up to 4 nodes and several target families, DAGs are grouped by
the d-separation statements of their augmented graphs (METHODS.md section 8); the edges
on which a group agrees are the directed edges of the essential graph, and the group's
size is the class size (Hauser & Buhlmann 2012; Yang, Katcoff & Uhler 2018).
"""

from __future__ import annotations

import itertools
import random

import networkx as nx
import pytest
from dags import all_dags, random_dag

from pipeline.graphs import InterventionNode, essential_graph
from pipeline.graphs.augmented import augmented_graph
from pipeline.graphs.essential import EdgeReason, orient_pattern
from pipeline.graphs.pdag import PDAG

_dsep = getattr(nx, "is_d_separator", None) or nx.d_separated


def _subsets(items):
    return itertools.chain.from_iterable(
        itertools.combinations(items, k) for k in range(len(items) + 1))


def dsep_statements(aug: nx.DiGraph, measured, fnodes) -> tuple[bool, ...]:
    """METHODS.md 8: X _||_ Y | S u F, and F_k _||_ X | S u (F minus F_k)."""
    fs = set(fnodes)
    out = []
    for x, y in itertools.combinations(measured, 2):
        rest = [z for z in measured if z not in (x, y)]
        out.extend(_dsep(aug, {x}, {y}, set(s) | fs) for s in _subsets(rest))
    for f in fnodes:
        for x in measured:
            rest = [z for z in measured if z != x]
            out.extend(_dsep(aug, {f}, {x}, set(s) | (fs - {f})) for s in _subsets(rest))
    return tuple(out)


def oracle_check(nodes, targets, reference=()):
    """Group all DAGs by their d-separations; compare every member's essential graph."""
    groups: dict[tuple, list[nx.DiGraph]] = {}
    fnodes = [InterventionNode(k) for k in targets]
    for d in all_dags(nodes):
        aug = augmented_graph(d, targets, reference)
        groups.setdefault(dsep_statements(aug, nodes, fnodes), []).append(d)
    for members in groups.values():
        skeletons = {frozenset(map(frozenset, m.edges)) for m in members}
        assert len(skeletons) == 1  # equivalent DAGs share their skeleton
        directed = set.intersection(*(set(m.edges) for m in members))
        undirected = next(iter(skeletons)) - {frozenset(e) for e in directed}
        for m in members:
            e = essential_graph(m, targets, reference)
            got_d, got_u = e.graph.edge_set()
            assert got_d == directed, (list(m.edges), targets)
            assert got_u == undirected, (list(m.edges), targets)
            assert e.class_size() == len(members)
            assert set(e.reasons) == directed
    return len(groups)


FAMILIES = {
    "observational": ({}, ()),
    "single-target": ({"kd1": ["A"]}, ()),
    "multi-target": ({"kd1": ["A", "B"], "kd2": ["C"]}, ()),
    "all-but-one": ({"kdA": ["A"], "kdB": ["B"], "kdC": ["C"]}, ()),
    "reference-with-targets": ({"r1": ["A"], "r2": ["B", "C"]}, ("B",)),
}


@pytest.mark.parametrize("family", sorted(FAMILIES))
def test_dseparation_oracle_three_nodes(family):
    targets, ref = FAMILIES[family]
    groups = oracle_check(["A", "B", "C"], targets, ref)
    if family == "observational":
        assert groups == 11  # Gillispie & Perlman (2001), OEIS A007984
    if family == "all-but-one":
        assert groups == 25  # every DAG identified (Eberhardt, Glymour & Scheines 2005)


@pytest.mark.slow
@pytest.mark.parametrize("family", sorted(set(FAMILIES) - {"all-but-one"}))
def test_dseparation_oracle_four_nodes(family):
    # "all-but-one" on four nodes has its own slow-marked test below
    targets, ref = FAMILIES[family]
    groups = oracle_check(["A", "B", "C", "D"], targets, ref)
    if family == "observational":
        assert groups == 185  # Gillispie & Perlman (2001), OEIS A007984


def test_reasons_intervention_and_collider():
    # A -> C <- B, C -> D; kd_A: the textbook collider plus an intervention (common practice)
    d = nx.DiGraph([("A", "C"), ("B", "C"), ("C", "D")])
    e = essential_graph(d, {"kd_D": ["D"]})
    assert e.reasons[("A", "C")] == EdgeReason("collider", ("B",))
    assert e.reasons[("B", "C")] == EdgeReason("collider", ("A",))
    # C -> D: Meek R1 from A (or B); the F node of kd_D forms a collider F -> D <- C
    assert e.reasons[("C", "D")].rule == "intervention"
    assert e.reasons[("C", "D")].via == (InterventionNode("kd_D"),)


def test_meek1_through_intervention_node():
    # F -> A - B with F, B non-adjacent: A -> B by R1, reported as "intervention"
    e = essential_graph(nx.DiGraph([("A", "B")]), {"kd_A": ["A"]})
    assert e.reasons[("A", "B")] == EdgeReason("intervention", (InterventionNode("kd_A"),))
    assert e.class_size() == 1


def test_observational_chain_is_undirected():
    # a chain is Markov equivalent to its reversal (common practice)
    e = essential_graph(nx.DiGraph([("A", "B"), ("B", "C")]))
    assert not list(e.graph.directed_edges())
    assert e.class_size() == 3
    assert e.reasons == {}


def test_orient_pattern_keep_undirected_and_first_reason():
    skel = PDAG(["A", "B", "C", InterventionNode("r")])
    skel.add_undirected("A", "C")
    skel.add_undirected("B", "C")
    skel.add_directed(InterventionNode("r"), "C")
    e = orient_pattern(skel, [("A", "C", "B"), ("A", "C", InterventionNode("r"))],
                       keep_undirected=[frozenset({"B", "C"})])
    assert e.graph.has_undirected("B", "C")
    # the intervention collider is taken first although listed second
    assert e.reasons[("A", "C")] == EdgeReason("intervention", (InterventionNode("r"),))
    assert InterventionNode("r") not in e.graph and InterventionNode("r") in e.augmented


def test_orient_pattern_rejects_bad_collider():
    skel = PDAG(["A", "B", "C"])
    skel.add_undirected("A", "B")
    with pytest.raises(ValueError, match="adjacent"):
        orient_pattern(skel, [("A", "C", "B")])


def test_single_target_on_all_but_one_identifies_random_dags():
    # p - 1 single-target experiments identify every DAG (Eberhardt, Glymour & Scheines 2005)
    rng = random.Random(7)
    for _ in range(20):
        n = rng.randint(3, 9)
        names = [f"X{i}" for i in range(n)]
        d = random_dag(names, 0.5, rng)
        skip = rng.randrange(n)
        targets = {f"kd_{v}": [v] for i, v in enumerate(names) if i != skip}
        e = essential_graph(d, targets)
        assert e.class_size() == 1
        assert set(e.graph.directed_edges()) == set(d.edges)


def test_one_regime_on_all_but_one_does_not_identify():
    # METHODS.md 6: one regime acting on p - 1 variables leaves an edge between two of its
    # targets undirected when nothing else reaches it (Eberhardt et al. 2005)
    d = nx.DiGraph([("A", "B")])
    d.add_node("C")
    e = essential_graph(d, {"kd": ["A", "B"]})
    assert e.graph.has_undirected("A", "B")
    assert e.class_size() == 2


def test_essential_graph_rejects_cycle():
    with pytest.raises(ValueError, match="acyclic"):
        essential_graph(nx.DiGraph([("A", "B"), ("B", "A")]))


@pytest.mark.slow
def test_dseparation_oracle_four_nodes_all_but_one():
    # single-target regimes on every node but D: every DAG on 4 nodes is identified
    targets = {"kdA": ["A"], "kdB": ["B"], "kdC": ["C"]}
    groups = oracle_check(["A", "B", "C", "D"], targets, ())
    assert groups == 543  # Eberhardt, Glymour & Scheines (2005); OEIS A003024 for the count
