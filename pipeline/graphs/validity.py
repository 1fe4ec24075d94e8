"""Is a partially directed graph a valid (interventional) essential graph?

An essential graph is a chain graph whose chain components (the connected components of
its undirected part) are chordal, and in which no directed edge ``a -> b`` meets an
undirected edge ``b - c`` with `a` and `c` non-adjacent [1]_, [2]_. A learned graph can
fail these when tests err; this module names what fails, with the offending edges:

* a directed or partially directed cycle (the graph is not a chain graph);
* a chain component with a chordless cycle of four or more nodes;
* an induced ``a -> b - c`` (a would make a v-structure with either direction of b - c).

Cycles are found by depth-first search; chordality by a maximum cardinality search, whose
visiting order is a perfect elimination order (read backwards) iff the graph is chordal
[3]_.

>>> from pipeline.graphs.pdag import PDAG
>>> g = PDAG("ABC"); g.add_directed("A", "B"); g.add_undirected("B", "C")
>>> essential_graph_problems(g)
['A -> B - C is an induced subgraph (A and C are not adjacent): B - C should be directed.']

References
----------
1. S. A. Andersson, D. Madigan, M. D. Perlman (1997). A characterization of Markov
   equivalence classes for acyclic digraphs. Annals of Statistics 25, 505-541.
2. A. Hauser, P. Buhlmann (2012). Characterization and greedy learning of interventional
   Markov equivalence classes of directed acyclic graphs. JMLR 13, 2409-2464.
3. R. E. Tarjan, M. Yannakakis (1984). Simple linear-time algorithms to test chordality of
   graphs, test acyclicity of hypergraphs, and selectively reduce acyclic hypergraphs.
   SIAM Journal on Computing 13(3), 566-579.
"""

from __future__ import annotations

import itertools
from collections import deque
from collections.abc import Hashable, Iterable, Mapping

from pipeline.graphs.counting import chain_components
from pipeline.graphs.pdag import PDAG

__all__ = ["essential_graph_problems"]

Node = Hashable
#: A graph as each node's neighbours (or successors), in a fixed order.
Adjacency = Mapping[Node, Iterable[Node]]
_MAX_REPORTED = 20


def essential_graph_problems(g: PDAG) -> list[str]:
    """List why `g` is not a valid essential graph; empty when it is.

    Parameters
    ----------
    g : PDAG

    Returns
    -------
    list of str
        Plain sentences, each naming the offending edges. At most 20 induced
        ``a -> b - c`` configurations are listed, then their total.

    Raises
    ------
    TypeError
        If `g` is not a PDAG.
    """
    if not isinstance(g, PDAG):
        raise TypeError(f"g should be a PDAG, got {type(g).__name__}")
    problems: list[str] = []
    comps = chain_components(g)

    # Step 1: no (partially) directed cycle: the directed edges between chain components
    # must form an acyclic graph
    comp_of = {n: i for i, comp in enumerate(comps) for n in comp}
    cycle = _find_cycle({n: sorted(g.children(n), key=g.index) for n in g.nodes})
    if cycle is not None:
        problems.append(f"directed cycle {_path(cycle)}: the graph must have no directed cycle.")
    else:
        quotient: dict[int, dict[int, tuple[Node, Node]]] = {}
        for u, v in g.directed_edges():
            a, b = comp_of[u], comp_of[v]
            if a == b:
                problems.append(f"{u} -> {v} joins two nodes of one chain component: "
                                "a partially directed cycle.")
            else:
                quotient.setdefault(a, {})[b] = (u, v)
                quotient.setdefault(b, {})
        cycle = _find_cycle(quotient)
        if cycle is not None:
            arcs = [quotient[a][b] for a, b in cycle]
            problems.append("partially directed cycle through the directed edges "
                            f"{', '.join(f'{u} -> {v}' for u, v in arcs)} "
                            "(joined by undirected paths): the graph must be a chain graph.")

    # Step 2: every chain component chordal
    for comp in comps:
        if len(comp) < 4:
            continue
        und = {v: sorted(g.neighbors(v), key=g.index) for v in comp}
        if _not_perfect(und) is not None:
            cyc = _chordless_cycle(und)
            problems.append(f"the undirected part containing {comp[0]} is not chordal: "
                            f"chordless cycle {' - '.join(map(str, cyc + cyc[:1]))}.")

    # Step 3: no induced a -> b - c
    bad = []
    for a, b in g.directed_edges():
        for c in sorted(g.neighbors(b), key=g.index):
            if c != a and not g.adjacent(a, c):
                bad.append(f"{a} -> {b} - {c} is an induced subgraph ({a} and {c} are not "
                           f"adjacent): {b} - {c} should be directed.")
    problems.extend(bad[:_MAX_REPORTED])
    if len(bad) > _MAX_REPORTED:
        problems.append(f"... {len(bad)} induced a -> b - c configurations in all.")
    return problems


def _path(cycle: list[tuple[Node, Node]]) -> str:
    return " -> ".join(str(u) for u, _ in cycle) + f" -> {cycle[0][0]}"


def _find_cycle(succ: Adjacency) -> list[tuple[Node, Node]] | None:
    """The edges of one directed cycle, or None when there is none (depth-first search
    from each node in turn, successors in the order given)."""
    state: dict[Node, int] = {}  # 1: on the search path, 2: done
    for root in succ:
        if root in state:
            continue
        path, stack = [root], [iter(succ[root])]
        state[root] = 1
        while stack:
            for w in stack[-1]:
                if state.get(w) == 1:  # back to the path: a cycle
                    loop = path[path.index(w):]
                    return list(zip(loop, loop[1:] + loop[:1], strict=True))
                if w not in state:
                    state[w] = 1
                    path.append(w)
                    stack.append(iter(succ.get(w, ())))
                    break
            else:
                state[path.pop()] = 2
                stack.pop()
    return None


def _chordless_cycle(und: Adjacency) -> list[Node]:
    """One chordless cycle of length >= 4 of a non-chordal graph.

    For a vertex v and two non-adjacent neighbours u, w, a shortest u-w path that avoids
    v's other neighbours closes a chordless cycle through v. Every chordless cycle has
    such a triple, so trying the triples (those of the vertices most likely to be on one
    first: where a maximum cardinality search order fails to be a perfect elimination
    order) always finds one.
    """
    for v in _suspects(und):
        nbrs = set(und[v])
        for u, w in itertools.combinations(sorted(nbrs, key=str), 2):
            if w in und[u]:
                continue
            path = _shortest_path_avoiding(und, u, w, nbrs | {v})
            if path is not None:
                return [v, *path]
    raise AssertionError("a non-chordal graph has a chordless cycle of length 4 or more")


def _not_perfect(und: Adjacency) -> Node | None:
    """The first vertex of a maximum cardinality search whose earlier neighbours are not a
    clique (the order is then no perfect elimination order), or None: the graph is
    chordal (Tarjan & Yannakakis 1984; ties broken by the order of `und`)."""
    pos: dict[Node, int] = {}
    label = dict.fromkeys(und, 0)
    while len(pos) < len(label):
        v = max((x for x in label if x not in pos), key=label.__getitem__)
        pos[v] = len(pos)
        earlier = [x for x in und[v] if x in pos and x != v]
        if len(earlier) > 1:
            last = max(earlier, key=pos.__getitem__)
            if any(x != last and x not in und[last] for x in earlier):
                return v
        for x in und[v]:
            if x not in pos:
                label[x] += 1
    return None


def _suspects(und: Adjacency) -> list[Node]:
    """Vertices in a useful order: the first failure of a perfect elimination order first."""
    first = _not_perfect(und)
    return ([first] if first is not None else []) + [x for x in und if x != first]


def _shortest_path_avoiding(und: Adjacency, u: Node, w: Node, avoid: set) -> list[Node] | None:
    """A shortest u-w path whose inner vertices are not in `avoid` (breadth-first)."""
    prev = {u: None}
    queue = deque([u])
    while queue:
        x = queue.popleft()
        for y in und[x]:
            if y in prev or (y in avoid and y != w):
                continue
            prev[y] = x
            if y == w:
                path = [w]
                while prev[path[-1]] is not None:
                    path.append(prev[path[-1]])
                return path[::-1]
            queue.append(y)
    return None
