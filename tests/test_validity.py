"""Validity of essential graphs (Andersson, Madigan & Perlman 1997; Hauser & Buhlmann 2012)."""

from __future__ import annotations

import random

import networkx as nx
from dags import random_dag

from pipeline.graphs import essential_graph
from pipeline.graphs.pdag import PDAG
from pipeline.graphs.validity import essential_graph_problems


def test_directed_cycle_is_named():
    g = PDAG("ABC")
    g.add_directed("A", "B")
    g.add_directed("B", "C")
    g.add_directed("C", "A")
    problems = essential_graph_problems(g)
    assert any("directed cycle" in p and "A -> B -> C -> A" in p for p in problems)


def test_non_chordal_four_cycle_is_named():
    g = PDAG.from_networkx(nx.cycle_graph(["A", "B", "C", "D"]))
    problems = essential_graph_problems(g)
    assert len(problems) == 1
    assert "not chordal" in problems[0]
    for n in "ABCD":
        assert n in problems[0]


def test_induced_arrow_then_line_is_named():
    g = PDAG("ABC")
    g.add_directed("A", "B")
    g.add_undirected("B", "C")
    assert essential_graph_problems(g) == [
        "A -> B - C is an induced subgraph (A and C are not adjacent): B - C should be directed."]


def test_partially_directed_cycle():
    g = PDAG("ABC")
    g.add_directed("A", "B")
    g.add_undirected("B", "C")
    g.add_undirected("C", "A")
    assert any("partially directed cycle" in p for p in essential_graph_problems(g))


def test_computed_essential_graphs_are_valid():
    rng = random.Random(2)
    for _ in range(30):
        n = rng.randint(2, 10)
        d = random_dag(n, 0.4, rng)
        targets = {"r": [rng.randrange(n)]} if rng.random() < 0.5 else {}
        assert essential_graph_problems(essential_graph(d, targets).graph) == []


def test_named_chordless_cycles_are_chordless():
    # the cycle named induces a cycle graph in networkx (no chord), length >= 4
    from pipeline.graphs.validity import _chordless_cycle

    rng = random.Random(8)
    found = 0
    while found < 30:
        g = nx.gnp_random_graph(rng.randint(5, 40), rng.uniform(0.05, 0.4),
                                seed=rng.randrange(10**6))
        if nx.is_chordal(g):
            continue
        found += 1
        cyc = _chordless_cycle(g)
        assert len(cyc) >= 4
        assert nx.is_isomorphic(g.subgraph(cyc), nx.cycle_graph(len(cyc)))


def test_cycles_found_where_networkx_finds_them():
    # networkx's is_directed_acyclic_graph is the reference; a returned cycle is closed and
    # made of edges of the graph
    from pipeline.graphs.validity import _find_cycle

    rng = random.Random(4)
    with_cycle = 0
    for _ in range(300):
        n = rng.randint(1, 12)
        d = nx.gnp_random_graph(n, rng.uniform(0.05, 0.3), seed=rng.randrange(10**6),
                                directed=True)
        cycle = _find_cycle({v: list(d.successors(v)) for v in d})
        assert (cycle is None) == nx.is_directed_acyclic_graph(d)
        if cycle is not None:
            with_cycle += 1
            assert all(d.has_edge(u, v) for u, v in cycle)
            assert all(cycle[i][1] == cycle[(i + 1) % len(cycle)][0] for i in range(len(cycle)))
    assert 50 < with_cycle < 300


def test_chordality_agrees_with_networkx():
    # networkx's is_chordal is the reference (maximum cardinality search, Tarjan &
    # Yannakakis 1984)
    from pipeline.graphs.validity import _not_perfect

    rng = random.Random(5)
    chordal = 0
    for _ in range(300):
        g = nx.gnp_random_graph(rng.randint(1, 14), rng.uniform(0.1, 0.7),
                                seed=rng.randrange(10**6))
        verdict = _not_perfect({v: list(g[v]) for v in g}) is None
        assert verdict == nx.is_chordal(g)
        chordal += verdict
    assert 50 < chordal < 250

