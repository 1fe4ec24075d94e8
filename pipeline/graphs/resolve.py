"""Conflicting collider decisions resolved into a valid interventional essential graph.

Tests on finite samples err, so the colliders (unshielded triples ``a -> c <- b``) that a
learner decides may contradict each other: two colliders direct one edge both ways,
their arrows close a directed cycle, or an arrow of one makes with an arrow of another a
collider that the tests placed a non-collider. Orienting them all, or leaving every
disputed edge undirected, then gives a graph that no DAG fits (no class, size 0).

`resolve_orientations` returns a graph that always is a valid interventional essential
graph (a chain graph with chordal chain components, closed under Meek's rules, class
size at least 1 [2]_, [4]_), in three stages:

1. *Acceptance by strength*: the colliders are taken strongest first; one is set aside
   when it would direct an edge against an arrow already accepted, close a directed
   cycle, or make with an accepted arrow a collider that the tests rejected (the
   conflicts of order-dependent collider orientation [1]_, decided by evidence instead
   of by order). Every set-aside collider is returned with the reason (`Rejection`).
2. *Meek's rules* R1-R4 to closure [3]_, first leaving the edges of undecided triples
   undirected, then, if that is not a valid essential graph, without that restraint.
3. *Repair*, when the closure still is not a valid essential graph (the accepted arrows
   admit no DAG without a further collider, e.g. a chordless undirected cycle): a DAG
   extension of the accepted pattern by the algorithm of Dor & Tarsi [5]_, which, when
   no node qualifies as its next sink, takes the sink that creates the fewest new
   colliders; the result is the essential graph of that DAG under the same intervention
   nodes, valid by construction [2]_. The colliders the repair had to add are returned.

The graph core imports no statistics: strengths are plain numbers given by the caller.

>>> from pipeline.graphs.pdag import PDAG
>>> g = PDAG("ABCD")
>>> for u, v in ("AB", "BC", "CD"):
...     g.add_undirected(u, v)
>>> r = resolve_orientations(g, [("A", "B", "C"), ("B", "C", "D")], weights=[2.0, 1.0])
>>> sorted(r.essential.graph.directed_edges()), r.rejected[0].reason
([('A', 'B'), ('C', 'B')], 'contradiction')

References
----------
1. D. Colombo, M. H. Maathuis (2014). Order-independent constraint-based causal structure
   learning. Journal of Machine Learning Research 15, 3741-3782.
2. A. Hauser, P. Buhlmann (2012). Characterization and greedy learning of interventional
   Markov equivalence classes of directed acyclic graphs. JMLR 13, 2409-2464.
3. C. Meek (1995). Causal inference and causal explanation with background knowledge. UAI.
4. S. A. Andersson, D. Madigan, M. D. Perlman (1997). A characterization of Markov
   equivalence classes for acyclic digraphs. Annals of Statistics 25, 505-541.
5. D. Dor, M. Tarsi (1992). A simple algorithm to construct a consistent extension of a
   partially oriented graph. Technical Report R-185, Cognitive Systems Laboratory, UCLA.
"""

from __future__ import annotations

from collections.abc import Hashable, Iterable, Sequence
from dataclasses import field
from typing import TYPE_CHECKING

from pipeline.graphs.essential import EssentialGraph, orient_pattern, v_structures
from pipeline.graphs.pdag import PDAG, InterventionNode
from pipeline.graphs.validity import essential_graph_problems
from pipeline.records import record

if TYPE_CHECKING:  # networkx is imported where a DAG is built (a faster start)
    import networkx as nx

__all__ = ["Rejection", "Resolution", "accept_colliders", "consistent_extension",
           "resolve_orientations"]

Node = Hashable
Triple = tuple[Node, Node, Node]


@record(frozen=True)
class Rejection:
    """A collider set aside, and why.

    `reason` is ``"contradiction"`` (an accepted arrow points the other way: `against`
    holds the accepted collider that set it, or is empty for an arrow given in the
    input), ``"cycle"`` (`against` is the directed path from the centre back to an end)
    or ``"rejected-collider"`` (`against` is the triple ``(u, c, d)`` the tests decided is
    no collider, which the arrow would have made one).
    """

    collider: Triple
    reason: str
    against: tuple = ()


@record
class Resolution:
    """The resolved graph and what it took.

    Attributes
    ----------
    essential : EssentialGraph
        The valid interventional essential graph (intervention nodes dropped in
        ``essential.graph``, kept in ``essential.augmented``).
    accepted : list of triple
        The colliders oriented, strongest first.
    rejected : list of Rejection
        The colliders set aside.
    stage : str
        ``"closure"``, ``"unblocked"`` (the edges of undecided triples had to be
        released to Meek's rules) or ``"repair"``.
    added_colliders : list of triple
        Colliders ``(a, c, b)`` of the result that were not accepted (made by Meek's
        rules on conflicting input, or by the repair).
    changed : list of (u, v)
        Pairs whose edge differs from the first closure (stages ``unblocked`` and
        ``repair``), earlier node first.
    """

    essential: EssentialGraph
    accepted: list[Triple] = field(default_factory=list)
    rejected: list[Rejection] = field(default_factory=list)
    stage: str = "closure"
    added_colliders: list[Triple] = field(default_factory=list)
    changed: list[tuple[Node, Node]] = field(default_factory=list)


def _triple_key(t: Sequence[Node]) -> tuple[Node, frozenset]:
    return t[1], frozenset((t[0], t[2]))


def _path(g: PDAG, start: Node, goal: Node) -> list[Node] | None:
    """A directed path start -> ... -> goal in `g` (depth-first), or None."""
    prev: dict[Node, Node | None] = {start: None}
    stack = [start]
    while stack:
        x = stack.pop()
        if x == goal:
            path = [x]
            while prev[path[-1]] is not None:
                path.append(prev[path[-1]])
            return path[::-1]
        for y in sorted(g.children(x), key=g.index):
            if y not in prev:
                prev[y] = x
                stack.append(y)
    return None


def accept_colliders(pattern: PDAG, colliders: Sequence[Triple], *,
                     weights: Sequence[float] | None = None,
                     non_colliders: Iterable[Triple] = ()) -> tuple[list[Triple],
                                                                    list[Rejection], PDAG]:
    """Orient colliders strongest first, setting aside those that conflict.

    Parameters
    ----------
    pattern : PDAG
        The skeleton; its directed edges (edges out of intervention nodes) are fixed.
        It is not modified.
    colliders : sequence of (a, c, b)
        Candidate colliders ``a -> c <- b``; `c` adjacent to `a` and `b`.
    weights : sequence of float, optional
        Strength of each collider; the strongest is tried first, ties in the given
        order. None: the given order.
    non_colliders : iterable of (a, c, b)
        Triples the tests decided are not colliders: no accepted arrow may make one.

    Returns
    -------
    (accepted, rejected, oriented)
        The accepted triples in the order tried, the `Rejection` of each other one, and
        `pattern` with the accepted arrows (no further rule applied).

    Raises
    ------
    TypeError
        If `pattern` is not a PDAG.
    ValueError
        If `weights` and `colliders` differ in length, or a collider is not a triple of
        `pattern` with its centre adjacent to both ends.
    """
    if not isinstance(pattern, PDAG):
        raise TypeError(f"pattern should be a PDAG, got {type(pattern).__name__}")
    colliders = [tuple(t) for t in colliders]
    if weights is not None and len(weights) != len(colliders):
        raise ValueError(f"weights should have one number per collider ({len(colliders)}); "
                         f"got {len(weights)}")
    for t in colliders:
        if len(t) != 3 or any(n not in pattern for n in t) or not (
                pattern.adjacent(t[0], t[1]) and pattern.adjacent(t[2], t[1])):
            raise ValueError(f"collider {t!r} should be a triple of nodes of the pattern "
                             f"whose centre is adjacent to both ends")
    order = list(range(len(colliders)))
    if weights is not None:
        order.sort(key=lambda i: -float(weights[i]))
    rejected_pairs = {_triple_key(t) for t in non_colliders}
    g = pattern.copy()
    owner: dict[tuple[Node, Node], Triple] = {}
    accepted: list[Triple] = []
    rejected: list[Rejection] = []
    for i in order:
        a, c, b = t = colliders[i]
        new = [u for u in (a, b) if not g.has_directed(u, c)]
        verdict: Rejection | None = None
        for u in (a, b):
            if g.has_directed(c, u):
                verdict = Rejection(t, "contradiction", owner.get((c, u), ()))
                break
        if verdict is None:
            for u in new:
                path = _path(g, c, u)
                if path is not None:
                    verdict = Rejection(t, "cycle", tuple(path))
                    break
        if verdict is None:
            for u in new:
                for d in sorted(g.parents(c), key=g.index):
                    if d != u and not g.adjacent(d, u) and (c, frozenset((u, d))) \
                            in rejected_pairs:
                        verdict = Rejection(t, "rejected-collider", (u, c, d))
                        break
                if verdict is not None:
                    break
        if verdict is not None:
            rejected.append(verdict)
            continue
        for u in new:
            g.orient(u, c)
            owner[(u, c)] = t
        accepted.append(t)
    return accepted, rejected, g


def consistent_extension(g: PDAG) -> tuple[nx.DiGraph, list[Triple]]:
    """A DAG with the skeleton and the arrows of `g`, adding as few colliders as it can.

    The algorithm of Dor & Tarsi [5]_: repeatedly take a node `x` with no arrow out of it
    whose undirected neighbours are each adjacent to every other node adjacent to `x`;
    direct its undirected edges into it and remove it. Such a node exists at every step
    iff `g` has a consistent extension (one with no collider beyond those of `g`). When
    none does, the node without arrows out of it that makes the fewest new colliders is
    taken instead (ties: the earliest in `g`), so a DAG is always returned.

    Parameters
    ----------
    g : PDAG
        A graph whose directed edges form no directed cycle.

    Returns
    -------
    (dag, added)
        The DAG (nodes in `g`'s order) and the colliders ``(y, x, z)`` it has beyond
        those formed by arrows of `g` (empty when `g` has a consistent extension).

    Raises
    ------
    ValueError
        If the directed edges of `g` form a directed cycle.
    """
    if not isinstance(g, PDAG):
        raise TypeError(f"g should be a PDAG, got {type(g).__name__}")
    import networkx as nx

    if not nx.is_directed_acyclic_graph(g.directed_graph()):
        raise ValueError("g should have no directed cycle among its directed edges")
    pa = {n: set(g.parents(n)) for n in g.nodes}
    ch = {n: set(g.children(n)) for n in g.nodes}
    ne = {n: set(g.neighbors(n)) for n in g.nodes}
    alive = dict.fromkeys(g.nodes)
    dag = g.directed_graph()
    added: list[Triple] = []

    def adj(x: Node) -> set[Node]:
        return pa[x] | ch[x] | ne[x]

    def new_colliders(x: Node) -> list[Triple]:
        out = []
        others = sorted(adj(x), key=g.index)
        for y in sorted(ne[x], key=g.index):
            for z in others:
                if z != y and z not in adj(y) and (z not in ne[x] or g.index(y) < g.index(z)):
                    out.append((y, x, z))
        return out

    while alive:
        sinks = [x for x in alive if not ch[x]]
        pick = next((x for x in sinks if all(adj(x) - {y} <= adj(y) for y in ne[x])), None)
        if pick is None:
            pick = min(sinks, key=lambda x: (len(new_colliders(x)), g.index(x)))
            added.extend(new_colliders(pick))
        for y in ne[pick]:
            dag.add_edge(y, pick)
            ne[y].discard(pick)
        for y in pa[pick]:
            ch[y].discard(pick)
        for y in ne[pick]:
            ch[y].discard(pick)
        del alive[pick]
        pa[pick], ne[pick] = set(), set()
    return dag, added


def _apply(skeleton: PDAG, colliders: Iterable[Triple]) -> PDAG:
    g = skeleton.copy()
    for a, c, b in colliders:
        for u in (a, b):
            if g.has_undirected(u, c):
                g.orient(u, c)
    return g


def _colliders_of(g: PDAG) -> list[Triple]:
    """Every ``a -> c <- b`` of `g` with `a`, `b` non-adjacent (not both intervention nodes)."""
    out = []
    for c in g.nodes:
        pa = sorted(g.parents(c), key=g.index)
        for i, a in enumerate(pa):
            for b in pa[i + 1:]:
                if not g.adjacent(a, b) and not (isinstance(a, InterventionNode)
                                                 and isinstance(b, InterventionNode)):
                    out.append((a, c, b))
    return out


def _marks(g: PDAG) -> dict[frozenset, tuple]:
    out: dict[frozenset, tuple] = {}
    for u, v in g.directed_edges():
        out[frozenset((u, v))] = (u, v)
    for u, v in g.undirected_edges():
        out[frozenset((u, v))] = ()
    return out


def resolve_orientations(skeleton: PDAG, colliders: Sequence[Triple], *,
                         weights: Sequence[float] | None = None,
                         non_colliders: Iterable[Triple] = (),
                         keep_undirected: Iterable[frozenset] = ()) -> Resolution:
    """Orient colliders by strength, close under Meek's rules, repair if need be.

    Parameters
    ----------
    skeleton : PDAG
        The augmented skeleton: edges among measured nodes undirected, edges out of
        intervention nodes directed. It is not modified.
    colliders : sequence of (a, c, b)
        The colliders decided by the tests.
    weights : sequence of float, optional
        Their strengths (larger: stronger); see `accept_colliders`.
    non_colliders : iterable of (a, c, b)
        The triples decided not to be colliders.
    keep_undirected : iterable of frozenset
        Edges Meek's rules should leave alone (those of undecided triples), released
        when keeping them would not give a valid essential graph.

    Returns
    -------
    Resolution
        Its ``essential`` always passes `essential_graph_problems` on the augmented
        graph, so the class it describes holds at least one DAG.
    """
    if not isinstance(skeleton, PDAG):
        raise TypeError(f"skeleton should be a PDAG, got {type(skeleton).__name__}")
    colliders = [tuple(t) for t in colliders]
    non_colliders = [tuple(t) for t in non_colliders]
    keep = [frozenset(e) for e in keep_undirected]
    out = _resolve(skeleton, colliders, weights, non_colliders, keep)
    if out.rejected or out.stage != "closure":
        # Meek's rules and the repair on conflicting input may depend on the order of
        # the nodes: settle it by their names, so the result does not depend on it.
        canon = _reorder(skeleton, sorted(skeleton.nodes, key=_name_key))
        out = _resolve(canon, colliders, weights, non_colliders, keep)
        e = out.essential
        out.essential = EssentialGraph(
            graph=_reorder(e.graph, [n for n in skeleton.nodes if n in e.graph]),
            augmented=_reorder(e.augmented, skeleton.nodes), reasons=e.reasons)
        out.changed = sorted((tuple(sorted(p, key=skeleton.index)) for p in out.changed),
                             key=lambda p: (skeleton.index(p[0]), skeleton.index(p[1])))
    return out


def _name_key(n: Node) -> tuple[bool, str]:
    return isinstance(n, InterventionNode), str(n)


def _reorder(g: PDAG, nodes: Sequence[Node]) -> PDAG:
    """`g` with its nodes in the order `nodes` (the same edges)."""
    out = PDAG(nodes)
    for u, v in g.directed_edges():
        out.add_directed(u, v)
    for u, v in g.undirected_edges():
        out.add_undirected(u, v)
    return out


def _resolve(skeleton: PDAG, colliders: list[Triple], weights: Sequence[float] | None,
             non_colliders: list[Triple], keep_undirected: list[frozenset]) -> Resolution:
    """`resolve_orientations` in the node order of `skeleton`."""
    accepted, rejected, pattern = accept_colliders(skeleton, colliders, weights=weights,
                                                   non_colliders=non_colliders)
    first = orient_pattern(skeleton, accepted, keep_undirected=keep_undirected)
    essential, stage = first, "closure"
    if essential_graph_problems(first.augmented):
        essential, stage = orient_pattern(skeleton, accepted), "unblocked"
        if essential_graph_problems(essential.augmented):
            dag, _ = consistent_extension(pattern)
            order = {n: i for i, n in enumerate(skeleton.nodes)}
            made = {_triple_key(t) for t in accepted}
            found = v_structures(dag)
            # the accepted colliders first, so that their reasons are kept
            found.sort(key=lambda t: (_triple_key(t) not in made,
                                      order[t[1]], order[t[0]], order[t[2]]))
            essential, stage = orient_pattern(skeleton, found), "repair"
            problems = essential_graph_problems(essential.augmented)
            if problems:  # the essential graph of a DAG is valid: a fault of this module
                raise RuntimeError("repair gave an invalid essential graph: "
                                   + "; ".join(problems))
    made = {_triple_key(t) for t in accepted}
    added = [t for t in _colliders_of(essential.augmented) if _triple_key(t) not in made]
    changed: list[tuple[Node, Node]] = []
    if stage != "closure":
        before, after = _marks(first.graph), _marks(essential.graph)
        for pair in sorted(after, key=lambda p: sorted(first.graph.index(n) for n in p)):
            if before.get(pair) != after[pair]:
                u, v = sorted(pair, key=first.graph.index)
                changed.append((u, v))
    return Resolution(essential=essential, accepted=accepted, rejected=rejected, stage=stage,
                      added_colliders=added, changed=changed)
