"""Class sizes by clique-picking, checked against published counts and brute force."""

from __future__ import annotations

import itertools
import math
import random

import networkx as nx
import pytest
from dags import all_dags

from pipeline.graphs import essential_graph
from pipeline.graphs.counting import chain_components, class_size, count_amos
from pipeline.graphs.pdag import PDAG


def class_key(d: nx.DiGraph):
    """Skeleton and v-structures: the Markov equivalence class (Verma & Pearl 1990)."""
    skel = frozenset(frozenset(e) for e in d.edges)
    vs = frozenset((frozenset((a, b)), c) for c in d for a, b in
                   itertools.combinations(d.predecessors(c), 2)
                   if not (d.has_edge(a, b) or d.has_edge(b, a)))
    return skel, vs


def check_counts(n: int, n_dags: int, n_classes: int) -> None:
    classes: dict = {}
    count = 0
    for d in all_dags(n):
        count += 1
        classes.setdefault(class_key(d), []).append(d)
    assert count == n_dags
    assert len(classes) == n_classes
    essentials = set()
    total = 0
    for members in classes.values():
        e = essential_graph(members[0])  # once per class (fast path)
        essentials.add(e.graph.edge_set())
        size = e.class_size()
        assert size == len(members)
        total += size
    assert len(essentials) == n_classes  # distinct classes give distinct essential graphs
    assert total == n_dags


@pytest.mark.parametrize("n, n_dags, n_classes", [(1, 1, 1), (2, 3, 2), (3, 25, 11),
                                                  (4, 543, 185)])
def test_dag_and_class_counts(n, n_dags, n_classes):
    # Robinson (1973), OEIS A003024; Gillispie & Perlman (2001), OEIS A007984
    check_counts(n, n_dags, n_classes)


@pytest.mark.slow
def test_dag_and_class_counts_five_nodes():
    # Robinson (1973), OEIS A003024: 29281; Gillispie & Perlman (2001), OEIS A007984: 8782
    check_counts(5, 29281, 8782)


@pytest.mark.parametrize("n", range(1, 9))
def test_complete_component_has_factorial(n):
    # a complete undirected graph on n nodes: n! orientations (common practice)
    g = PDAG(range(n))
    for u, v in itertools.combinations(range(n), 2):
        g.add_undirected(u, v)
    assert class_size(g) == math.factorial(n)


def test_trees_have_n():
    # a tree on n nodes has n acyclic moral orientations (He, Jia & Yu 2015)
    rng = random.Random(3)
    for n in range(2, 40, 3):
        prufer = [rng.randrange(n) for _ in range(n - 2)]
        t = nx.from_prufer_sequence(prufer) if n > 2 else nx.path_graph(2)
        assert class_size(PDAG.from_networkx(t)) == n
        # a path of n nodes, the extreme tree
        assert class_size(PDAG.from_networkx(nx.path_graph(n))) == n


def brute_force_amos(g: nx.Graph) -> int:
    """Count orientations that are acyclic (networkx) and have no v-structure."""
    edges = list(g.edges)
    total = 0
    for bits in itertools.product((0, 1), repeat=len(edges)):
        d = nx.DiGraph()
        d.add_nodes_from(g)
        d.add_edges_from((u, v) if b else (v, u) for (u, v), b in zip(edges, bits, strict=True))
        if not nx.is_directed_acyclic_graph(d):
            continue
        pairs = (p for c in d for p in itertools.combinations(d.predecessors(c), 2))
        if all(g.has_edge(a, b) for a, b in pairs):
            total += 1
    return total


def random_chordal(rng: random.Random, n: int, max_edges: int) -> nx.Graph | None:
    g = nx.gnp_random_graph(n, rng.uniform(0.3, 0.8), seed=rng.randrange(10**6))
    if nx.is_connected(g) and nx.is_chordal(g) and g.number_of_edges() <= max_edges:
        return g
    return None


def test_count_against_brute_force():
    rng = random.Random(11)
    checked = 0
    while checked < 25:
        g = random_chordal(rng, rng.randint(4, 7), 12)
        if g is None:
            continue
        checked += 1
        assert count_amos({v: set(g[v]) for v in g}) == brute_force_amos(g), list(g.edges)


def test_class_size_is_product_over_components():
    g = PDAG("ABCDEF")
    g.add_undirected("A", "B")
    g.add_undirected("B", "C")  # a path of 3: 3
    g.add_directed("C", "D")
    for u, v in itertools.combinations("DEF", 2):
        g.add_undirected(u, v)  # a triangle: 3! = 6
    assert chain_components(g) == [["A", "B", "C"], ["D", "E", "F"]]
    assert class_size(g) == 18


def test_large_exact_integer():
    # 30 nodes complete: 30! needs more than 64 bits (common practice)
    g = PDAG.from_networkx(nx.complete_graph(30))
    assert class_size(g) == math.factorial(30)


def test_non_chordal_component_is_rejected():
    with pytest.raises(ValueError, match="not chordal"):
        class_size(PDAG.from_networkx(nx.cycle_graph(4)))


def test_clique_tree_subproblems_match_the_direct_search():
    # the subproblems of each clique, read off the clique tree, are those of the
    # lexicographic search of Wienobst, Bannach & Liskiewicz (2021)
    from collections import Counter

    from pipeline.graphs.counting import AMOCounter

    rng = random.Random(13)
    checked = 0
    while checked < 40:
        g = random_chordal(rng, rng.randint(4, 12), 40)
        if g is None:
            continue
        checked += 1
        p = PDAG.from_networkx(g)
        c = AMOCounter.of_component(p, p.nodes)
        full = frozenset(range(len(p)))
        for _, clique, _, edges in c.clique_weights(full):
            assert Counter(c.subproblems(full, clique)) == Counter(c.iter_subproblems(full, edges))
