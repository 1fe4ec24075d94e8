"""Meek's orientation rules R1-R4, applied to closure.

Given a partially directed graph whose directed edges are known (v-structures, edges
out of intervention nodes, background knowledge), Meek's four rules orient every
undirected edge whose direction is forced in all DAGs that keep those edges and create
no new v-structure and no directed cycle [1]_. The rules, for an undirected edge
``x - y`` that becomes ``x -> y``:

* R1: ``a -> x - y`` with `a` and `y` non-adjacent (else a new v-structure);
* R2: ``x -> b -> y`` (else a directed cycle);
* R3: ``x - c -> y`` and ``x - d -> y`` with `c`, `d` non-adjacent;
* R4: ``x - d -> c -> y`` with `x` adjacent to `c` and `d`, `y` non-adjacent.

With background knowledge the four rules are complete [1]_. The closure here is driven
by a worklist: when an edge is oriented only the undirected edges near its endpoints are
examined again, so a sparse graph is closed in time close to linear in its edges.

>>> from pipeline.graphs.pdag import PDAG
>>> g = PDAG(["A", "B", "C"]); g.add_directed("A", "B"); g.add_undirected("B", "C")
>>> [(o.source, o.target, o.rule) for o in meek_closure(g)]
[('B', 'C', 'meek-1')]

References
----------
1. C. Meek (1995). Causal inference and causal explanation with background knowledge.
   Proceedings of UAI, 403-410.
"""

from __future__ import annotations

from collections import deque
from collections.abc import Hashable, Iterable

from pipeline.graphs.pdag import PDAG, InterventionNode
from pipeline.records import record

__all__ = ["Orientation", "meek_closure"]

Node = Hashable


@record(frozen=True)
class Orientation:
    """One edge oriented by a Meek rule.

    `via` holds the other node(s) the rule used: R1 the `a` of ``a -> source - target``;
    R2 the middle `b` of ``source -> b -> target``; R3 the two parents ``(c, d)``; R4 the
    ``(d, c)`` of ``source - d -> c -> target``.
    """

    source: Node
    target: Node
    rule: str
    via: tuple[Node, ...]


def meek_closure(g: PDAG, *, keep_undirected: Iterable[frozenset] = ()) -> list[Orientation]:
    """Apply Meek's rules R1-R4 to `g` in place until no rule applies.

    Parameters
    ----------
    g : PDAG
        The graph; its directed edges are background knowledge and never change.
    keep_undirected : iterable of frozenset
        Edges ``frozenset({u, v})`` that must stay undirected (conflicts, say).

    Returns
    -------
    list of Orientation
        The orientations in the order they were made. When several witnesses exist for a
        rule, an intervention node is preferred, then the earliest node in `g`'s order.

    Raises
    ------
    TypeError
        If `g` is not a PDAG.
    """
    if not isinstance(g, PDAG):
        raise TypeError(f"g should be a PDAG, got {type(g).__name__}")
    keep = {frozenset(e) for e in keep_undirected}
    key = _witness_key(g)

    # Step 1: every undirected edge is examined once to begin with.
    queue: deque[tuple[Node, Node]] = deque(g.undirected_edges())
    queued: set[frozenset] = {frozenset(e) for e in queue}
    made: list[Orientation] = []

    def push(u: Node, v: Node) -> None:
        e = frozenset((u, v))
        if e not in queued and e not in keep:
            queued.add(e)
            queue.append((u, v))

    # Step 2: pop an edge, try the rules both ways, re-examine around what changed.
    while queue:
        u, v = queue.popleft()
        queued.discard(frozenset((u, v)))
        if not g.has_undirected(u, v) or frozenset((u, v)) in keep:
            continue
        found = _rule_for(g, u, v, key) or _rule_for(g, v, u, key)
        if found is None:
            continue
        x, y, rule, via = found
        g.orient(x, y)
        made.append(Orientation(x, y, rule, via))
        # R1, R2, R3 fire on undirected edges at an endpoint of the new arc x -> y
        # (sorted, so that the rule and witness recorded do not vary from run to run)
        for z in (x, y):
            for w in sorted(g.neighbors(z), key=g.index):
                push(z, w)
        # R4 (a - x -> y -> b): the edge a - b, a neighbour of x, b a child of y
        kids = g.children(y)
        if kids:
            for a in sorted(g.neighbors(x), key=g.index):
                for b in sorted(g.neighbors(a) & kids, key=g.index):
                    push(a, b)
    return made


def _witness_key(g: PDAG):
    def key(n: Node) -> tuple[bool, int]:
        return (not isinstance(n, InterventionNode), g.index(n))
    return key


def _rule_for(g: PDAG, x: Node, y: Node, key) -> tuple | None:
    """Return ``(x, y, rule, via)`` if a rule orients ``x - y`` as ``x -> y``, else None."""
    # R1: a -> x - y, a and y non-adjacent
    cands = [a for a in g.parents(x) if not g.adjacent(a, y)]
    if cands:
        return x, y, "meek-1", (min(cands, key=key),)
    # R2: x -> b -> y
    mids = g.children(x) & g.parents(y)
    if mids:
        return x, y, "meek-2", (min(mids, key=key),)
    # R3: x - c -> y, x - d -> y, c and d non-adjacent
    both = sorted(g.neighbors(x) & g.parents(y), key=key)
    for i, c in enumerate(both):
        for d in both[i + 1:]:
            if not g.adjacent(c, d):
                return x, y, "meek-3", (c, d)
    # R4: x - d -> c -> y, x adjacent to c, d and y non-adjacent
    ne_x = g.neighbors(x)
    for c in sorted(g.parents(y), key=key):
        if not g.adjacent(x, c):
            continue
        ds = [d for d in g.parents(c) & ne_x if not g.adjacent(d, y)]
        if ds:
            return x, y, "meek-4", (min(ds, key=key), c)
    return None
