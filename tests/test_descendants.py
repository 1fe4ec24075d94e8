"""Descendant fractions over a class, against brute force with networkx.descendants."""

from __future__ import annotations

import random
from collections import defaultdict

import networkx as nx
import pytest
from dags import all_dags, random_dag

from pipeline.graphs.descendants import descendant_fractions, reachability_scores
from pipeline.graphs.essential import essential_graph
from pipeline.graphs.pdag import PDAG


def _classes(nodes: int) -> dict:
    """Every DAG on `nodes` grouped by its (observational) essential graph."""
    groups: dict = defaultdict(list)
    for dag in all_dags(nodes):
        g = essential_graph(dag, {}).graph
        groups[g.edge_set()].append((dag, g))
    return groups


def _brute(dags: list[nx.DiGraph], sources: set) -> dict:
    """Share of `dags` in which each node descends from a source (networkx.descendants)."""
    counts: dict = defaultdict(int)
    for d in dags:
        for v in set().union(*(nx.descendants(d, s) for s in sources)):
            counts[v] += 1
    return {v: counts[v] / len(dags) for v in dags[0].nodes}


def test_exact_fractions_match_brute_force_on_every_class_of_4_nodes():
    # every DAG on 4 nodes (543: Robinson 1973, OEIS A003024) grouped into its 185 classes
    # (Gillispie & Perlman 2001, OEIS A007984); fractions by networkx.descendants
    groups = _classes(4)
    assert len(groups) == 185
    for members in groups.values():
        dags = [d for d, _ in members]
        g = members[0][1]
        for sources in ({0}, {2}, {1, 3}):
            got = descendant_fractions(g, sources)
            assert got.method == "exact" and got.dags == len(dags) == got.class_size
            want = _brute(dags, sources)
            assert got.fractions == pytest.approx(want)


def test_sampled_fractions_are_close_to_exact():
    g = PDAG(range(5))  # a complete undirected graph on 5 nodes: 120 DAGs
    for i in range(5):
        for j in range(i + 1, 5):
            g.add_undirected(i, j)
    exact = descendant_fractions(g, [0]).fractions
    sampled = descendant_fractions(g, [0], samples=100, seed=3)
    assert sampled.method == "sampled" and sampled.dags == 100 and sampled.class_size == 120
    # under a uniform DAG of K5, node 0 precedes another node with probability 1/2
    # (a uniform order; common practice)
    assert exact[1] == pytest.approx(0.5)
    for v in range(1, 5):
        assert abs(sampled.fractions[v] - exact[v]) < 0.2  # 4 standard errors of 100 draws
    again = descendant_fractions(g, [0], samples=100, seed=3)
    assert again.fractions == sampled.fractions


def test_true_dag_is_in_the_class_so_definite_descendants_are_true_ones():
    rng = random.Random(5)
    for _ in range(20):
        dag = random_dag(7, 0.35, rng)
        g = essential_graph(dag, {}).graph
        for s in dag.nodes:
            f = descendant_fractions(g, [s]).fractions
            truth = nx.descendants(dag, s)
            assert all(v in truth for v, x in f.items() if x == 1.0)
            assert all(f[v] > 0 for v in truth)


def test_no_descendant_and_no_source():
    g = PDAG("ABC")
    g.add_directed("A", "C")
    g.add_directed("B", "C")
    assert descendant_fractions(g, ["C"]).fractions == {"A": 0.0, "B": 0.0, "C": 0.0}
    assert descendant_fractions(g, []).fractions == {"A": 0.0, "B": 0.0, "C": 0.0}


def test_reachability_scores_and_refusals():
    g = PDAG("ABCD")
    g.add_directed("A", "B")
    g.add_undirected("B", "C")
    assert reachability_scores(g, ["A"]) == {"A": 0.0, "B": 1.0, "C": 0.5, "D": 0.0}
    cyclic = PDAG("ABC")
    cyclic.add_directed("A", "B")
    cyclic.add_directed("B", "C")
    cyclic.add_directed("C", "A")
    with pytest.raises(ValueError, match="directed cycle"):
        descendant_fractions(cyclic, ["A"])
    with pytest.raises(ValueError, match="not in g"):
        descendant_fractions(g, ["Z"])
    with pytest.raises(ValueError, match="samples"):
        descendant_fractions(g, ["A"], samples=0)
