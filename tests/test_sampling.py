"""Uniform sampling and enumeration of a class, checked with networkx and scipy."""

from __future__ import annotations

import itertools
import random
from collections import Counter

import networkx as nx
import pytest
from dags import random_dag
from scipy.stats import chisquare

from pipeline.graphs import essential_graph
from pipeline.graphs.counting import class_size
from pipeline.graphs.pdag import PDAG
from pipeline.graphs.sampling import enumerate_dags, sample_dags, sample_orientations


def v_structures(d: nx.DiGraph) -> set:
    return {(frozenset((a, b)), c) for c in d for a, b in
            itertools.combinations(d.predecessors(c), 2)
            if not (d.has_edge(a, b) or d.has_edge(b, a))}


def random_chordal_pdag(rng: random.Random, n: int) -> PDAG:
    while True:
        g = nx.gnp_random_graph(n, rng.uniform(0.3, 0.8), seed=rng.randrange(10**6))
        if nx.is_connected(g) and nx.is_chordal(g):
            return PDAG.from_networkx(nx.relabel_nodes(g, {i: f"X{i}" for i in g}))


def test_enumeration_matches_count_on_random_chordal_graphs():
    rng = random.Random(5)
    for _ in range(30):
        g = random_chordal_pdag(rng, rng.randint(3, 7))
        dags = list(enumerate_dags(g))
        assert len(dags) == class_size(g)
        assert len({frozenset(d.edges) for d in dags}) == len(dags)  # each DAG once
        skel = nx.Graph(g.skeleton())
        vs = v_structures(dags[0])
        for d in dags:
            assert nx.is_directed_acyclic_graph(d)  # networkx as the check
            assert nx.utils.graphs_equal(nx.Graph(d.to_undirected()), skel)
            assert v_structures(d) == vs == set()  # an undirected component: no v-structure


def test_enumeration_keeps_directed_edges_and_class():
    # every enumerated DAG has the essential graph it came from (Hauser & Buhlmann 2012)
    rng = random.Random(9)
    for _ in range(15):
        n = rng.randint(4, 7)
        d = random_dag(n, 0.5, rng)
        targets = {"r": [rng.randrange(n)]} if rng.random() < 0.5 else {}
        e = essential_graph(d, targets)
        dags = list(enumerate_dags(e.graph))
        assert len(dags) == e.class_size()
        assert any(set(x.edges) == set(d.edges) for x in dags)
        for x in dags:
            assert set(e.graph.directed_edges()) <= set(x.edges)
            assert essential_graph(x, targets).graph == e.graph


def test_enumeration_limit():
    g = PDAG.from_networkx(nx.complete_graph(4))
    assert len(list(enumerate_dags(g, limit=5))) == 5
    assert len(list(enumerate_dags(g))) == 24  # 4! (common practice)
    with pytest.raises(ValueError, match="limit"):
        list(enumerate_dags(g, limit=-1))


@pytest.mark.parametrize("edges", [
    [(0, 1), (1, 2), (2, 3), (0, 2)],             # triangle with a pendant: class of 8
    [(0, 1), (0, 2), (1, 2), (1, 3), (2, 3)],     # two triangles sharing an edge (diamond)
    [(0, 1), (1, 2), (2, 3), (3, 4), (1, 5)],     # a tree on 6 nodes: 6
])
def test_sampling_is_uniform(edges):
    g = PDAG.from_networkx(nx.Graph(edges))
    cls = [frozenset(d.edges) for d in enumerate_dags(g)]
    assert 6 <= len(cls) <= 24
    draws = Counter(frozenset(d.edges) for d in sample_dags(g, 3000, seed=1))
    assert set(draws) <= set(cls)
    observed = [draws[c] for c in cls]
    # chi-square goodness of fit against the uniform law on the class (scipy)
    assert chisquare(observed).pvalue > 0.001


def test_sampling_reproducible_and_keeps_directed_edges():
    d = nx.DiGraph([("A", "C"), ("B", "C"), ("C", "D"), ("D", "E"), ("E", "F"), ("D", "F")])
    e = essential_graph(d, {})
    a = sample_dags(e.graph, 20, seed=4)
    b = sample_dags(e.graph, 20, seed=4)
    assert [set(x.edges) for x in a] == [set(x.edges) for x in b]
    for x in a:
        assert nx.is_directed_acyclic_graph(x)
        assert set(e.graph.directed_edges()) <= set(x.edges)
        assert essential_graph(x).graph == e.graph
    with pytest.raises(ValueError, match="non-negative"):
        sample_dags(e.graph, -1)


def test_sampling_rejects_non_chordal():
    with pytest.raises(ValueError, match="not chordal"):
        sample_dags(PDAG.from_networkx(nx.cycle_graph(5)), 1)


def test_sample_orientations_match_sample_dags():
    # the light form draws the same DAGs for the same seed (networkx edges as the reference)
    g = PDAG("ABCDE")
    for u, v in [("A", "B"), ("B", "C"), ("A", "C"), ("C", "D")]:
        g.add_undirected(u, v)
    g.add_directed("E", "D")
    dags = sample_dags(g, 25, seed=5)
    light = sample_orientations(g, 25, seed=5)
    for d, edges in zip(dags, light, strict=True):
        assert set(d.edges) == set(edges) | {("E", "D")}
