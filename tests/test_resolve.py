"""Conflicting colliders settled into a valid essential graph; consistent DAG extensions.

Checks from outside the project: acyclicity, skeletons and class sizes by brute force with
networkx; Markov equivalence of a DAG and its extension by the criterion of Verma & Pearl
(1990): same skeleton, same v-structures; validity of an essential graph by the
characterization of Andersson, Madigan & Perlman (1997) / Hauser & Buhlmann (2012).
"""

from __future__ import annotations

import itertools
import random

import networkx as nx
import pytest

from pipeline.graphs.counting import class_size
from pipeline.graphs.essential import essential_graph, orient_pattern, v_structures
from pipeline.graphs.pdag import PDAG, InterventionNode
from pipeline.graphs.resolve import (
    accept_colliders,
    consistent_extension,
    resolve_orientations,
)
from pipeline.graphs.validity import essential_graph_problems
from tests.dags import random_dag


def unshielded(dag: nx.DiGraph, skeleton: nx.Graph | None = None) -> set[tuple]:
    """v-structures of a DAG, written out here (Verma & Pearl 1990), as (c, {a, b}).

    Adjacency is read from `skeleton` when given (a partially directed graph's arrows).
    """
    skeleton = skeleton if skeleton is not None else dag.to_undirected()
    out = set()
    for c in dag.nodes:
        for a, b in itertools.combinations(list(dag.predecessors(c)), 2):
            if not skeleton.has_edge(a, b):
                out.add((c, frozenset((a, b))))
    return out


def brute_force_class_size(g: PDAG) -> int:
    """DAGs that keep g's arrows, orient its lines and add no v-structure (small graphs)."""
    lines = list(g.undirected_edges())
    base = unshielded(g.directed_graph(), g.skeleton())
    count = 0
    for bits in itertools.product((0, 1), repeat=len(lines)):
        d = g.directed_graph()
        d.add_edges_from((u, v) if b else (v, u) for (u, v), b in zip(lines, bits, strict=True))
        if nx.is_directed_acyclic_graph(d) and unshielded(d) == base:
            count += 1
    return count


def random_pattern(rng: random.Random, n: int, p: float) -> tuple[PDAG, list, list]:
    """A random skeleton (undirected), random colliders and non-colliders on its triples."""
    g = PDAG([f"V{i}" for i in range(n)])
    for u, v in itertools.combinations(g.nodes, 2):
        if rng.random() < p:
            g.add_undirected(u, v)
    colliders, non = [], []
    for c in g.nodes:
        for a, b in itertools.combinations(sorted(g.neighbors(c)), 2):
            if not g.adjacent(a, b):
                (colliders if rng.random() < 0.4 else non).append((a, c, b))
    return g, colliders, non


def test_dor_tarsi_extension_is_markov_equivalent():
    # Dor & Tarsi (1992): an essential graph has an extension with its v-structures only
    rng = random.Random(3)
    for _ in range(60):
        dag = random_dag(rng.randint(2, 9), rng.uniform(0.1, 0.6), rng)
        cpdag = essential_graph(dag).graph
        ext, added = consistent_extension(cpdag)
        assert added == []
        assert nx.is_directed_acyclic_graph(ext)
        assert {frozenset(e) for e in ext.edges} == {frozenset(e) for e in dag.edges}
        assert unshielded(ext) == unshielded(dag)


def test_extension_of_a_chordless_cycle_adds_one_collider():
    # A four-cycle a - b - c - d - a has no orientation without a new v-structure
    # (common practice: chordal graphs are exactly those with such orientations).
    g = PDAG("abcd")
    for u, v in ("ab", "bc", "cd", "da"):
        g.add_undirected(u, v)
    ext, added = consistent_extension(g)
    assert nx.is_directed_acyclic_graph(ext) and ext.number_of_edges() == 4
    assert len(added) == 1 and unshielded(ext) == {(added[0][1],
                                                    frozenset((added[0][0], added[0][2])))}


def test_extension_refuses_a_directed_cycle():
    g = PDAG("abc")
    g.add_directed("a", "b")
    g.add_directed("b", "c")
    g.add_directed("c", "a")
    with pytest.raises(ValueError, match="directed cycle"):
        consistent_extension(g)


def test_stronger_collider_wins_a_contradiction():
    g = PDAG("ABCD")
    for u, v in ("AB", "BC", "CD"):
        g.add_undirected(u, v)
    for weights, want in (([1.0, 2.0], [("B", "C"), ("D", "C")]),
                          ([2.0, 1.0], [("A", "B"), ("C", "B")])):
        r = resolve_orientations(g, [("A", "B", "C"), ("B", "C", "D")], weights=weights)
        assert sorted(r.essential.graph.directed_edges()) == want
        assert len(r.rejected) == 1 and r.rejected[0].reason == "contradiction"
        assert r.rejected[0].against == r.accepted[0]
        assert essential_graph_problems(r.essential.augmented) == []


def test_cycle_and_rejected_collider_are_set_aside():
    # a -> c <- b, then c -> d <- e; the collider d -> a <- y would close the cycle
    # a -> c -> d -> a.
    g = PDAG(["a", "b", "c", "d", "e", "y"])
    for u, v in ("ac", "bc", "cd", "ed", "da", "ya"):
        g.add_undirected(u, v)
    acc, rej, _ = accept_colliders(g, [("a", "c", "b"), ("c", "d", "e"), ("d", "a", "y")],
                                   weights=[3.0, 2.0, 1.0])
    assert acc == [("a", "c", "b"), ("c", "d", "e")]
    assert rej[0].reason == "cycle" and rej[0].against == ("a", "c", "d")
    # a collider the tests rejected: b -> c <- a accepted, then x -> c would make x, a meet
    h = PDAG(["a", "b", "c", "x"])
    for u, v in ("ac", "bc", "xc"):
        h.add_undirected(u, v)
    acc, rej, _ = accept_colliders(h, [("a", "c", "b"), ("b", "c", "x")], weights=[2.0, 1.0],
                                   non_colliders=[("a", "c", "x")])
    assert acc == [("a", "c", "b")]
    assert rej[0].reason == "rejected-collider" and rej[0].against == ("x", "c", "a")


def test_consistent_colliders_give_the_essential_graph():
    # With the colliders of a true DAG (no conflict) the result is its essential graph,
    # intervention nodes included (Hauser & Buhlmann 2012).
    rng = random.Random(11)
    for _ in range(40):
        dag = random_dag(rng.randint(3, 9), rng.uniform(0.2, 0.5), rng)
        targets = {"kd": rng.sample(sorted(dag.nodes), 1)}
        truth = essential_graph(dag, targets)
        skel = PDAG(truth.augmented.nodes)
        for u, v in truth.augmented.skeleton().edges:
            if isinstance(u, InterventionNode):
                skel.add_directed(u, v)
            elif isinstance(v, InterventionNode):
                skel.add_directed(v, u)
            else:
                skel.add_undirected(u, v)
        aug = nx.DiGraph(dag)
        aug.add_edges_from((InterventionNode("kd"), t) for t in targets["kd"])
        cols = v_structures(aug)
        r = resolve_orientations(skel, cols, weights=[1.0] * len(cols))
        assert r.essential.graph == truth.graph
        assert r.stage == "closure" and r.rejected == [] and r.added_colliders == []


def test_random_conflicting_patterns_always_give_a_valid_class():
    # Whatever the colliders, the result is an essential graph: valid (Andersson, Madigan
    # & Perlman 1997), equal to the essential graph of its own extension, and its class
    # size (clique-picking) matches a brute-force count (>= 1).
    rng = random.Random(2024)
    stages = set()
    for _ in range(150):
        g, cols, non = random_pattern(rng, rng.randint(4, 8), rng.uniform(0.3, 0.6))
        weights = [rng.random() for _ in cols]
        keep = [frozenset(e) for e in g.undirected_edges() if rng.random() < 0.1]
        r = resolve_orientations(g, cols, weights=weights, non_colliders=non,
                                 keep_undirected=keep)
        stages.add(r.stage)
        e = r.essential.graph
        assert essential_graph_problems(e) == []
        n = class_size(e)
        assert n >= 1
        if len(list(e.undirected_edges())) <= 10:
            assert n == brute_force_class_size(e)
        if r.stage != "closure" or not keep:
            ext, added = consistent_extension(e)
            assert added == []
            assert orient_pattern(_lines(e), v_structures(ext)).graph == e
    assert stages == {"closure", "unblocked", "repair"}


def _lines(g: PDAG) -> PDAG:
    out = PDAG(g.nodes)
    for u, v in g.skeleton().edges:
        out.add_undirected(u, v)
    return out


def test_result_does_not_depend_on_node_order():
    rng = random.Random(5)
    for _ in range(30):
        g, cols, non = random_pattern(rng, 7, 0.5)
        weights = [round(rng.random(), 1) for _ in cols]  # ties included
        first = resolve_orientations(g, cols, weights=weights, non_colliders=non)
        nodes = g.nodes
        rng.shuffle(nodes)
        h = PDAG(nodes)
        for u, v in g.undirected_edges():
            h.add_undirected(u, v)
        again = resolve_orientations(h, cols, weights=weights, non_colliders=non)
        assert again.essential.graph == first.essential.graph
        assert again.accepted == first.accepted


def test_bad_arguments():
    g = PDAG("abc")
    g.add_undirected("a", "b")
    with pytest.raises(TypeError, match="PDAG"):
        accept_colliders(nx.Graph(), [])
    with pytest.raises(ValueError, match="centre"):
        accept_colliders(g, [("a", "c", "b")])
    with pytest.raises(ValueError, match="weights"):
        accept_colliders(g, [], weights=[1.0])
