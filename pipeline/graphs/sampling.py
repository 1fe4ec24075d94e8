"""Uniform sampling and enumeration of the DAGs in a Markov equivalence class.

A DAG of the class of an essential graph is a choice of acyclic moral orientation for
each chain component (see `pipeline.graphs.counting`). The clique-picking recursion that
counts them also draws them exactly uniformly [1]_: pick a maximal clique with
probability proportional to the number of orientations counted at it, an order of the
clique uniformly among those counted there, then recurse into the subproblems; the
result is a topological order, and every undirected edge is directed along it.
Enumeration walks the same recursion and lists each DAG once.

>>> from pipeline.graphs.pdag import PDAG
>>> g = PDAG("ABC"); g.add_undirected("A", "B"); g.add_undirected("B", "C")
>>> len(list(enumerate_dags(g)))
3

References
----------
1. M. Wienobst, M. Bannach, M. Liskiewicz (2021). Polynomial-time algorithms for counting
   and sampling Markov equivalent DAGs. AAAI 35, 12198-12206.
"""

from __future__ import annotations

import itertools
import operator
import random
from collections.abc import Hashable, Iterator

import networkx as nx

from pipeline.graphs.counting import AMOCounter, chain_components
from pipeline.graphs.pdag import PDAG

__all__ = ["sample_dags", "sample_orientations", "enumerate_dags"]

Node = Hashable


def _check(g: PDAG) -> list[AMOCounter]:
    if not isinstance(g, PDAG):
        raise TypeError(f"g should be a PDAG, got {type(g).__name__}")
    return [AMOCounter.of_component(g, comp) for comp in chain_components(g) if len(comp) > 1]


def _to_dag(g: PDAG, rank: dict[Node, int], directed: list | None = None,
            undirected: list | None = None) -> nx.DiGraph:
    d = nx.DiGraph()
    d.add_nodes_from(g.nodes)
    d.add_edges_from(g.directed_edges() if directed is None else directed)
    d.add_edges_from((u, v) if rank[u] < rank[v] else (v, u)
                     for u, v in (g.undirected_edges() if undirected is None else undirected))
    return d


def sample_dags(g: PDAG, n: int, seed: int | None = None) -> list[nx.DiGraph]:
    """Draw `n` DAGs uniformly (with replacement) from the class of the essential graph `g`.

    Parameters
    ----------
    g : PDAG
        An essential graph (chordal chain components); its directed edges are kept.
    n : int
        Number of DAGs to draw (>= 0).
    seed : int, optional
        Seed of the random generator; the same seed gives the same DAGs.

    Returns
    -------
    list of nx.DiGraph
        Each over the nodes of `g`, in `g`'s node order.

    Raises
    ------
    ValueError
        If `n` is negative or a chain component is not chordal.
    """
    directed = list(g.directed_edges()) if isinstance(g, PDAG) else []
    out = []
    for oriented in sample_orientations(g, n, seed):
        d = nx.DiGraph()
        d.add_nodes_from(g.nodes)
        d.add_edges_from(directed)
        d.add_edges_from(oriented)
        out.append(d)
    return out


def sample_orientations(g: PDAG, n: int, seed: int | None = None) -> list[list[tuple]]:
    """Like `sample_dags`, but each draw is only the list of `g`'s undirected edges as
    directed in the drawn DAG (in the order of ``g.undirected_edges()``).

    The same seed draws the same DAGs as `sample_dags`; building no graph objects, it is
    the form to use when many draws are scored (experiment planning).
    """
    try:
        n = operator.index(n)
    except TypeError:
        raise ValueError(f"n should be a non-negative integer, got {n!r}") from None
    if n < 0:
        raise ValueError(f"n should be a non-negative integer, got {n!r}")
    counters = _check(g)
    rng = random.Random(seed)
    undirected = list(g.undirected_edges())
    out = []
    for _ in range(n):
        rank: dict[Node, int] = {}
        for c in counters:
            c.count()  # fills the memo the draw reads
            order = _sample_order(c, frozenset(range(len(c.adj))), rng)
            rank.update((c.labels[v], i) for i, v in enumerate(order))
        out.append([(u, v) if rank[u] < rank[v] else (v, u) for u, v in undirected])
    return out


def _sample_order(c: AMOCounter, nodes: frozenset, rng: random.Random) -> list[int]:
    """A topological order of a uniformly drawn AMO of the subgraph on `nodes`."""
    if len(nodes) == 1:
        return list(nodes)
    kind = c.kind(nodes)
    if kind == "complete":  # every order is one AMO
        order = sorted(nodes)
        rng.shuffle(order)
        return order
    if kind == "tree":  # one AMO per source: edges point away from it
        return _bfs_from(c, nodes, rng.choice(sorted(nodes)))
    # Step 1: a clique, with probability proportional to the AMOs counted at it
    detail = c.clique_weights(nodes)
    r = rng.randrange(c.count(nodes))
    k = 0
    while r >= detail[k][0]:
        r -= detail[k][0]
        k += 1
    _, clique, fp, edges = detail[k]
    # Step 2: an order of the clique starting with no set of FP (rejection: uniform)
    while True:
        pi = list(clique)
        rng.shuffle(pi)
        if not any(set(pi[:len(s)]) == s for s in fp):
            break
    # Step 3: the subproblems, each drawn independently, in visiting order
    order = pi
    for h in c.iter_subproblems(nodes, edges):
        order.extend(_sample_order(c, h, rng))
    return order


def _bfs_from(c: AMOCounter, nodes: frozenset, root: int) -> list[int]:
    order, seen, k = [root], {root}, 0
    while k < len(order):
        for w in sorted(c.adj[order[k]] & nodes):
            if w not in seen:
                seen.add(w)
                order.append(w)
        k += 1
    return order


def enumerate_dags(g: PDAG, limit: int | None = None) -> Iterator[nx.DiGraph]:
    """Yield every DAG of the class of the essential graph `g`, each once.

    Parameters
    ----------
    g : PDAG
        An essential graph (chordal chain components); its directed edges are kept.
    limit : int, optional
        Stop after this many DAGs.

    Yields
    ------
    nx.DiGraph
        Over the nodes of `g`, in `g`'s node order.

    Raises
    ------
    ValueError
        If `limit` is negative or a chain component is not chordal.
    """
    if limit is not None and limit < 0:
        raise ValueError(f"limit should be a non-negative integer or None, got {limit!r}")
    counters = _check(g)
    per_component = [_orders_of(c, frozenset(range(len(c.adj)))) for c in counters]
    made = 0
    for combo in _product(counters, per_component):
        if limit is not None and made >= limit:
            return
        rank: dict[Node, int] = {}
        for c, order in zip(counters, combo, strict=True):
            rank.update((c.labels[v], i) for i, v in enumerate(order))
        made += 1
        yield _to_dag(g, rank)


def _product(counters: list[AMOCounter], first: list[Iterator]) -> Iterator[tuple]:
    """Lazy product: the first component's orders stream, the others are re-walked."""
    if not counters:
        yield ()
        return
    head, rest = first[0], counters[1:]
    for order in head:
        fresh = [_orders_of(c, frozenset(range(len(c.adj)))) for c in rest]
        for tail in _product(rest, fresh):
            yield (order, *tail)


def _orders_of(c: AMOCounter, nodes: frozenset) -> Iterator[list[int]]:
    """Every AMO of the subgraph on `nodes`, as one topological order each."""
    if len(nodes) == 1:
        yield list(nodes)
        return
    for _, clique, fp, edges in c.clique_weights(nodes):
        subs = list(c.iter_subproblems(nodes, edges))
        for pi in itertools.permutations(sorted(clique)):
            if any(set(pi[:len(s)]) == s for s in fp):
                continue
            for tail in _sub_orders(c, subs):
                yield list(pi) + tail


def _sub_orders(c: AMOCounter, subs: list[frozenset]) -> Iterator[list[int]]:
    if not subs:
        yield []
        return
    for head in _orders_of(c, subs[0]):
        for tail in _sub_orders(c, subs[1:]):
            yield head + tail
