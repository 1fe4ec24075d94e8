"""How often a node is a descendant of a set of nodes across the DAGs of a class.

An intervention on targets T shifts, under faithfulness, exactly the descendants of T
[1]_. When only an essential graph is known, a node ``v`` is a descendant of T in some
DAGs of its class and not in others; its **descendant fraction** is the share of the
DAGs of the class in which ``v`` is a descendant of some node of T (``v`` reachable from
T along directed edges; a node of T counts only as the descendant of another node of
T). The fraction is 1 for a definite descendant (every DAG agrees), 0 for a node no
DAG makes a descendant, and in between for the possible ones.

`descendant_fractions` computes it exactly by listing the DAGs of the class when there
are at most `samples` of them, and otherwise estimates it from `samples` DAGs drawn
uniformly by the clique-picking recursion [2]_ (`pipeline.graphs.sampling`); the
standard error of an estimate is at most ``0.5 / sqrt(samples)``. Nodes that no path of
directed or undirected edges reaches from T are 0 in every DAG and are not looked at.

`reachability_scores` is the fallback for a graph that is not a valid essential graph
(a directed cycle, a non-chordal undirected part), whose DAGs cannot be listed: 1 for a
node reachable from T along directed edges alone, 0.5 for a node reachable only
through some undirected edge, 0 otherwise.

>>> from pipeline.graphs.pdag import PDAG
>>> g = PDAG("ABC"); g.add_undirected("A", "B"); g.add_undirected("B", "C")
>>> d = descendant_fractions(g, ["B"])
>>> d.method, d.dags, round(d.fractions["A"], 3), d.fractions["B"]
('exact', 3, 0.667, 0.0)

References
----------
.. [1] Eberhardt, F. & Scheines, R. (2007). Interventions and causal inference.
   *Philosophy of Science* 74(5), 981-995.
.. [2] Wienobst, M., Bannach, M. & Liskiewicz, M. (2021). Polynomial-time algorithms for
   counting and sampling Markov equivalent DAGs. *AAAI* 35, 12198-12206.
"""

from __future__ import annotations

import numbers
from collections.abc import Hashable, Iterable

import networkx as nx

from pipeline.graphs.counting import class_size
from pipeline.graphs.pdag import PDAG
from pipeline.graphs.sampling import enumerate_dags, sample_orientations
from pipeline.records import record

__all__ = ["DescendantFractions", "descendant_fractions", "reachability_scores"]

Node = Hashable


@record(frozen=True)
class DescendantFractions:
    """Descendant fractions of every node of a graph.

    Attributes
    ----------
    fractions : dict
        Node -> share of the DAGs of the class in which it descends from the sources.
    method : {"exact", "sampled"}
        Every DAG of the class listed, or `dags` drawn uniformly.
    dags : int
        The number of DAGs the fractions average over.
    class_size : int
        The number of DAGs in the class.
    """

    fractions: dict
    method: str
    dags: int
    class_size: int


def _check(g: PDAG, sources: Iterable[Node]) -> set:
    if not isinstance(g, PDAG):
        raise TypeError(f"g should be a PDAG, got {type(g).__name__}")
    sources = set(sources)
    missing = [s for s in sources if s not in g]
    if missing:
        raise ValueError(f"sources should be nodes of g; not in g: {sorted(map(str, missing))}")
    return sources


def _reach(g: PDAG, sources: set, undirected: bool) -> set:
    """Nodes reachable from `sources` by a path of one edge or more (directed edges
    forwards, and undirected edges too if `undirected`)."""
    seen: set = set()
    stack = list(sources)
    while stack:
        u = stack.pop()
        nxt = g.children(u) | g.neighbors(u) if undirected else g.children(u)
        for w in nxt:
            if w not in seen:
                seen.add(w)
                stack.append(w)
    return seen


def descendant_fractions(g: PDAG, sources: Iterable[Node], *, samples: int = 1000,
                         seed: int | None = None) -> DescendantFractions:
    """The share of the DAGs of the class of `g` in which each node descends from `sources`.

    Parameters
    ----------
    g : PDAG
        An essential graph (acyclic directed part, chordal chain components).
    sources : iterable of nodes of `g`
        The nodes acted on (an empty set gives 0 everywhere).
    samples : int >= 1
        List every DAG when the class has at most this many, else draw this many
        uniformly.
    seed : int, optional
        Seed of the draws (the same seed gives the same fractions).

    Returns
    -------
    DescendantFractions

    Raises
    ------
    TypeError
        If `g` is not a PDAG.
    ValueError
        If a source is not a node of `g`, `samples` is not a whole number >= 1, the
        directed part has a cycle or a chain component is not chordal.
    """
    sources = _check(g, sources)
    if isinstance(samples, bool) or not isinstance(samples, numbers.Integral) or samples < 1:
        raise ValueError(f"samples should be a whole number >= 1, got {samples!r}")
    if not nx.is_directed_acyclic_graph(g.directed_graph()):
        raise ValueError("g has a directed cycle: it is not an essential graph; use "
                         "reachability_scores")
    size = class_size(g)  # raises ValueError on a non-chordal component
    counts = dict.fromkeys(g.nodes, 0)
    possible = _reach(g, sources, undirected=True)
    if not sources or not possible:
        return DescendantFractions({v: 0.0 for v in g.nodes}, "exact", size, size)
    if size <= samples:
        n = 0
        for dag in enumerate_dags(g):
            n += 1
            for v in _dag_descendants(dag, sources):
                counts[v] += 1
        method = "exact"
    else:
        n = int(samples)
        base = {u: list(g.children(u)) for u in g.nodes}
        for oriented in sample_orientations(g, n, seed):
            children = {u: list(c) for u, c in base.items()}
            for u, v in oriented:
                children[u].append(v)
            for v in _descendants(children, sources):
                counts[v] += 1
        method = "sampled"
    return DescendantFractions({v: counts[v] / n for v in g.nodes}, method, n, size)


def _dag_descendants(dag: nx.DiGraph, sources: set) -> set:
    out: set = set()
    for s in sources:
        out |= nx.descendants(dag, s)
    return out


def _descendants(children: dict, sources: set) -> set:
    seen: set = set()
    stack = list(sources)
    while stack:
        for w in children[stack.pop()]:
            if w not in seen:
                seen.add(w)
                stack.append(w)
    return seen


def reachability_scores(g: PDAG, sources: Iterable[Node]) -> dict:
    """Scores from paths alone, for a graph whose DAGs cannot be listed.

    1 for a node reachable from `sources` along directed edges only, 0.5 for one
    reachable only through an undirected edge, 0 otherwise (a source counts only when
    reachable from another source).

    Raises
    ------
    TypeError
        If `g` is not a PDAG.
    ValueError
        If a source is not a node of `g`.
    """
    sources = _check(g, sources)
    definite = _reach(g, sources, undirected=False)
    possible = _reach(g, sources, undirected=True)
    return {v: 1.0 if v in definite else 0.5 if v in possible else 0.0 for v in g.nodes}
