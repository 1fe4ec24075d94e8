"""Graphs shared by the tests: every labelled DAG on a few nodes, by brute force."""

from __future__ import annotations

import itertools
from collections.abc import Iterable, Iterator

import networkx as nx


def all_dags(nodes: int | Iterable) -> Iterator[nx.DiGraph]:
    """Every labelled DAG on `nodes` (an int n means 0..n-1): each pair gets no edge or one
    of its two directions, and the acyclic ones (networkx's check) are kept."""
    nodes = list(range(nodes)) if isinstance(nodes, int) else list(nodes)
    pairs = list(itertools.combinations(nodes, 2))
    for states in itertools.product((0, 1, 2), repeat=len(pairs)):
        d = nx.DiGraph()
        d.add_nodes_from(nodes)
        d.add_edges_from((a, b) if s == 1 else (b, a)
                         for (a, b), s in zip(pairs, states, strict=True) if s)
        if nx.is_directed_acyclic_graph(d):
            yield d


def random_dag(nodes: int | Iterable, p: float, rng) -> nx.DiGraph:
    """A random DAG: each pair, in the order of `nodes`, an edge forwards with chance `p`.

    `rng` is a `random.Random`; its draws are one per pair, in order.
    """
    nodes = list(range(nodes)) if isinstance(nodes, int) else list(nodes)
    d = nx.DiGraph()
    d.add_nodes_from(nodes)
    d.add_edges_from((u, v) for i, u in enumerate(nodes) for v in nodes[i + 1:]
                     if rng.random() < p)
    return d
