"""The size of a Markov equivalence class: acyclic moral orientations by clique-picking.

The undirected part of an (interventional) essential graph splits into chain
components, each a connected chordal graph. The DAGs of the class are exactly the
choices, per component, of an acyclic moral orientation (AMO: acyclic, no v-structure),
so the class size is the product over components of their numbers of AMOs [1]_.

Each number is computed in polynomial time by clique-picking [2]_: every AMO of a
connected chordal graph G has a topological order that starts with a maximal clique C;
fixing C first (in an order pi) splits the rest of G into smaller connected chordal
subproblems, found by a lexicographic breadth-first search that starts with pi, and the
subproblems do not depend on pi. Walking the clique tree breadth-first and discounting
the orders pi that start with a set already counted at an earlier clique gives

    #AMO(G) = sum over cliques C of phi(C, FP(C)) * prod over subproblems H of #AMO(H),

with phi(C, FP) the number of orders of C that start with none of the sets in FP. The
subproblems of C split over the clique-tree edges out of C, and those behind an edge
C -> D depend on that edge only, so they are computed once per edge, from the edges
further out, rather than by one search per clique. The counts are exact Python integers
and subproblems are memoized. Known values: a complete graph on n nodes has n! AMOs, a
tree on n nodes has n [3]_.

>>> from pipeline.graphs.pdag import PDAG
>>> g = PDAG("ABCD"); g.add_undirected("A", "B"); g.add_undirected("B", "C")
>>> g.add_undirected("C", "D")
>>> class_size(g)
4

References
----------
1. A. Hauser, P. Buhlmann (2012). Characterization and greedy learning of interventional
   Markov equivalence classes of directed acyclic graphs. JMLR 13, 2409-2464.
2. M. Wienobst, M. Bannach, M. Liskiewicz (2021). Polynomial-time algorithms for counting
   and sampling Markov equivalent DAGs. AAAI 35, 12198-12206.
3. Y. He, J. Jia, B. Yu (2015). Counting and exploring sizes of Markov equivalence classes
   of directed acyclic graphs. JMLR 16, 2589-2609.
4. J. R. S. Blair, B. Peyton (1993). An introduction to chordal graphs and clique trees.
   In: Graph Theory and Sparse Matrix Computation, Springer, 1-29.
"""

from __future__ import annotations

import math
from collections.abc import Hashable

from pipeline.graphs.pdag import PDAG

__all__ = ["chain_components", "class_size", "count_amos"]

Node = Hashable


def chain_components(g: PDAG) -> list[list[Node]]:
    """The chain components of `g`: connected components of its undirected part.

    Every node is in exactly one component (a node with no undirected edge is a
    component of its own). Components and their nodes follow `g`'s node order.
    """
    if not isinstance(g, PDAG):
        raise TypeError(f"g should be a PDAG, got {type(g).__name__}")
    seen: set[Node] = set()
    out = []
    for s in g.nodes:
        if s in seen:
            continue
        seen.add(s)
        comp, stack = [s], [s]
        while stack:
            for w in g.neighbors(stack.pop()):
                if w not in seen:
                    seen.add(w)
                    comp.append(w)
                    stack.append(w)
        comp.sort(key=g.index)
        out.append(comp)
    return out


def class_size(g: PDAG) -> int:
    """The number of DAGs in the class of the essential graph `g` (exact).

    Parameters
    ----------
    g : PDAG
        An essential graph: chordal chain components (see `pipeline.graphs.validity`).

    Returns
    -------
    int
        The product over chain components of their numbers of acyclic moral orientations.

    Raises
    ------
    ValueError
        If a chain component is not chordal.
    """
    total = 1
    for comp in chain_components(g):
        if len(comp) > 1:
            total *= AMOCounter.of_component(g, comp).count()
    return total


def count_amos(adj: dict[Node, set[Node]]) -> int:
    """The number of acyclic moral orientations of a connected chordal undirected graph.

    `adj` maps each node to its set of neighbours.
    """
    nodes = sorted(adj, key=repr)
    idx = {n: i for i, n in enumerate(nodes)}
    return AMOCounter([{idx[w] for w in adj[n]} for n in nodes], nodes).count()


class AMOCounter:
    """Clique-picking over one connected chordal graph, nodes renumbered 0..n-1.

    Shared by counting and sampling. Integer labels make every step reproducible
    (set iteration order of small ints does not vary between runs).
    """

    def __init__(self, adj: list[set[int]], labels: list[Node]) -> None:
        self.adj = adj
        self.labels = labels
        self._memo: dict[frozenset, int] = {}
        self._detail: dict[frozenset, list[tuple]] = {}
        self._kind: dict[frozenset, str] = {}
        self._info: dict[frozenset, dict] = {}

    @classmethod
    def of_component(cls, g: PDAG, comp: list[Node]) -> AMOCounter:
        idx = {n: i for i, n in enumerate(comp)}
        adj = [{idx[w] for w in g.neighbors(n)} for n in comp]
        if not _is_chordal(adj):
            raise ValueError("chain component containing "
                             f"{comp[0]!r} is not chordal: not an essential graph")
        return cls(adj, comp)

    # -- counting ---------------------------------------------------------------------
    def count(self, nodes: frozenset | None = None) -> int:
        """#AMO of the induced subgraph on `nodes` (connected; default: all)."""
        if nodes is None:
            nodes = frozenset(range(len(self.adj)))
        n = len(nodes)
        if n <= 2:
            return n if n else 1
        hit = self._memo.get(nodes)
        if hit is not None:
            return hit
        kind = self.kind(nodes)
        if kind == "complete":  # n! orders
            total = math.factorial(n)
        elif kind == "tree":  # n, one per source (He, Jia & Yu 2015)
            total = n
        else:
            total = sum(d[0] for d in self.clique_weights(nodes))
        self._memo[nodes] = total
        return total

    def kind(self, nodes: frozenset) -> str:
        """``"complete"``, ``"tree"`` or ``"general"``: the connected subgraph on `nodes`."""
        hit = self._kind.get(nodes)
        if hit is None:
            n, adj = len(nodes), self.adj
            m2 = sum(len(adj[v] & nodes) for v in nodes)  # twice the number of edges
            hit = "complete" if m2 == n * (n - 1) else "tree" if m2 == 2 * (n - 1) else "general"
            self._kind[nodes] = hit
        return hit

    def clique_weights(self, nodes: frozenset) -> list[tuple[int, list[int], list[frozenset],
                                                             list[tuple[int, int]]]]:
        """Per maximal clique (breadth-first over the clique tree): ``(weight, C, FP, edges)``.

        The weight is the number of AMOs counted at clique C; FP lists the separators on
        C's path from the root that lie inside it, smallest first (nested); `edges` are
        the clique-tree edges out of C, whose branches hold C's subproblems (see
        `iter_subproblems`).
        """
        hit = self._detail.get(nodes)
        if hit is not None:
            return hit
        cliques, parent = clique_tree(self.adj, nodes)
        info, nb = self._branches(cliques, parent)
        self._info[nodes] = info
        out = []
        for c in _bfs(parent):
            clique = cliques[c]
            cset = set(clique)
            # FP: the separators on the path from the root that lie inside the clique
            fp: dict[int, frozenset] = {}
            b, a = c, parent[c]
            while a >= 0 and not cset.isdisjoint(cliques[a]):
                # (C meets its ancestors in growing sets, so the walk stops at the first
                # ancestor it does not meet: no separator above lies inside C)
                sep = set(cliques[a]).intersection(cliques[b])
                if sep <= cset:
                    fp[len(sep)] = frozenset(sep)
                b, a = a, parent[a]
            weight = phi(len(clique), sorted(fp))
            edges = [(c, d) for d in nb[c]]
            for e in edges:
                weight *= info[e][0]
            out.append((weight, clique, [fp[k] for k in sorted(fp)], edges))
        self._detail[nodes] = out
        return out

    def _branches(self, cliques: list[list[int]], parent: list[int]) -> tuple[dict, list]:
        """For every directed clique-tree edge C -> D: the subproblems on D's side.

        With C first, the vertices on D's side adjacent to all of S = C & D (the union of
        the cliques containing S reached from D, minus S) form one block of the search in
        `subproblems`; the rest of D's side hangs off that block through clique-tree
        edges E -> F (E contains S, F does not) and is the same problem again for E -> F.
        Returns ``{(C, D): (product of counts, block components, [(E, F), ...])}`` and the
        clique-tree neighbours; down edges are filled bottom-up, then up edges top-down.
        """
        k = len(cliques)
        nb: list[list[int]] = [[] for _ in range(k)]
        for c, p in enumerate(parent):
            if p >= 0:
                nb[c].append(p)
                nb[p].append(c)
        csets = [frozenset(q) for q in cliques]
        info: dict[tuple[int, int], tuple[int, list[frozenset], list[tuple[int, int]]]] = {}

        def fill(c: int, d: int) -> None:
            sep = csets[c] & csets[d]
            tree, seen, bound = [d], {c, d}, []
            i = 0
            while i < len(tree):
                e = tree[i]
                i += 1
                for f in nb[e]:
                    if f not in seen:
                        seen.add(f)
                        if sep <= csets[f]:
                            tree.append(f)
                        else:
                            bound.append((e, f))
            block = set().union(*(csets[e] for e in tree)) - sep
            comps = ([frozenset(block)] if len(block) == 1
                     else self.components(frozenset(block)))
            total = 1
            for h in comps:
                total *= self.count(h)
            for e in bound:
                total *= info[e][0]
            info[(c, d)] = (total, comps, bound)

        order = _bfs(parent)
        for d in reversed(order):  # C -> D downwards, deepest first
            if parent[d] >= 0:
                fill(parent[d], d)
        for c in order:  # D -> parent upwards, from the root
            if parent[c] >= 0:
                fill(c, parent[c])
        return info, nb

    def iter_subproblems(self, nodes: frozenset, edges: list[tuple[int, int]]):
        """Yield the subproblems behind clique-tree `edges` in an order the search allows.

        Each block comes before the branches that hang off it, so directing every edge
        between different subproblems along this order, and the clique first, gives the
        AMO that the subproblems' own orders complete.
        """
        info = self._info[nodes]
        stack = list(reversed(edges))
        while stack:
            _, comps, bound = info[stack.pop()]
            yield from comps
            stack.extend(reversed(bound))

    # -- subproblems, directly ----------------------------------------------------------
    def subproblems(self, nodes: frozenset, start: list[int]) -> list[frozenset]:
        """The subproblems left when the clique `start` comes first, in visiting order.

        The direct definition [2]_, linear per clique; counting and sampling get the same
        subproblems from the clique tree (`_branches`), which shares work between
        cliques. Kept as the reference the tests compare with.

        A lexicographic breadth-first search (partition refinement: the unvisited
        vertices form an ordered list of classes, and visiting x splits every class into
        its neighbours of x, moved in front, and the rest) visits `start`, then always a
        vertex of the first class. When a class is entered for the first time, its
        vertices form a block that is visited without interruption; the connected
        components of the blocks are the subproblems [2]_. Linear in the size of the
        induced subgraph.
        """
        adj = self.adj
        where = [-1] * len(adj)  # class of each unvisited vertex of `nodes`, else -1
        for v in nodes:
            where[v] = 0
        members = [set(nodes)]
        flag = [False]  # the class (or the class it was split from) has been entered
        nxt, prv = [-1], [-1]  # the classes as a doubly linked list from `head`
        head = 0
        out: list[frozenset] = []
        todo = list(start)
        todo.reverse()
        while True:
            if todo:
                x = todo.pop()
            elif head < 0:
                return out
            else:
                mem = members[head]
                if not flag[head]:
                    flag[head] = True
                    if len(mem) == 1:
                        out.append(frozenset(mem))
                    else:
                        out.extend(self.components(frozenset(mem)))
                x = next(iter(mem))
            # take x out of its class
            c = where[x]
            where[x] = -1
            mem = members[c]
            mem.discard(x)
            if not mem:
                p, q = prv[c], nxt[c]
                if p >= 0:
                    nxt[p] = q
                else:
                    head = q
                if q >= 0:
                    prv[q] = p
            # refine: the neighbours of x move to a new class just before theirs
            split: dict[int, int] = {}
            for y in adj[x]:
                cy = where[y]
                if cy < 0:
                    continue
                new = split.get(cy)
                if new is None:
                    mem = members[cy]
                    if len(mem) == 1:  # a singleton class: y moves as the whole class
                        continue
                    new = len(members)
                    members.append({y})
                    flag.append(flag[cy])
                    p = prv[cy]
                    prv.append(p)
                    nxt.append(cy)
                    prv[cy] = new
                    if p >= 0:
                        nxt[p] = new
                    else:
                        head = new
                    split[cy] = new
                    mem.discard(y)
                    where[y] = new
                    continue
                members[cy].discard(y)
                members[new].add(y)
                where[y] = new
            for cy in split:
                if not members[cy]:
                    p, q = prv[cy], nxt[cy]
                    if p >= 0:
                        nxt[p] = q
                    else:
                        head = q
                    if q >= 0:
                        prv[q] = p

    def components(self, nodes: frozenset) -> list[frozenset]:
        """Connected components of the induced subgraph on `nodes`, smallest vertex first."""
        seen: set[int] = set()
        out = []
        for s in sorted(nodes):
            if s in seen:
                continue
            seen.add(s)
            comp, stack = [s], [s]
            while stack:
                for w in self.adj[stack.pop()] & nodes:
                    if w not in seen:
                        seen.add(w)
                        comp.append(w)
                        stack.append(w)
            out.append(frozenset(comp))
        return out


def phi(s: int, fp: list[int]) -> int:
    """Orders of an s-set that start with none of the nested sets of sizes `fp` (ascending).

    phi(s, [x_1 < ... < x_l]) = s! - sum_i phi(x_i, [x_1..x_{i-1}]) (s - x_i)!  [2]_.
    """
    total = math.factorial(s)
    for i, x in enumerate(fp):
        total -= phi(x, fp[:i]) * math.factorial(s - x)
    return total


def clique_tree(adj: list[set[int]], nodes: frozenset) -> tuple[list[list[int]], list[int]]:
    """Maximal cliques of a connected chordal induced subgraph and a clique tree.

    Maximum cardinality search; a new clique starts whenever the number of numbered
    neighbours does not grow, and hangs below the clique of its latest numbered
    neighbour [4]_. Returns ``(cliques, parent)`` with ``parent[0] == -1``; cliques list
    their vertices in search order.
    """
    n = len(nodes)
    label = dict.fromkeys(nodes, 0)
    numbered: dict[int, int] = {}  # vertex -> its number
    buckets: list[list[int]] = [[] for _ in range(n + 1)]
    buckets[0] = sorted(nodes, reverse=True)
    cliques: list[list[int]] = []
    parent: list[int] = []
    clique_of: dict[int, int] = {}
    j, prev = 0, -1
    for i in range(n):
        while True:
            while not buckets[j]:
                j -= 1
            v = buckets[j].pop()
            if v not in numbered and label[v] == j:
                break
        earlier = [w for w in adj[v] if w in numbered]
        if len(earlier) <= prev or not cliques:
            if earlier:
                last = max(earlier, key=numbered.__getitem__)
                parent.append(clique_of[last])
            else:
                parent.append(-1)
            cliques.append(sorted(earlier, key=numbered.__getitem__))
        cliques[-1].append(v)
        clique_of[v] = len(cliques) - 1
        numbered[v] = i
        prev = len(earlier)
        for w in adj[v]:
            if w in label and w not in numbered:
                label[w] += 1
                buckets[label[w]].append(w)
                if label[w] > j:
                    j = label[w]
    return cliques, parent


def _bfs(parent: list[int]) -> list[int]:
    kids: list[list[int]] = [[] for _ in parent]
    for c, p in enumerate(parent):
        if p >= 0:
            kids[p].append(c)
    order, k = [0], 0
    while k < len(order):
        order.extend(kids[order[k]])
        k += 1
    return order


def _is_chordal(adj: list[set[int]]) -> bool:
    """Chordality test: a maximum cardinality search order is a perfect elimination order."""
    nodes = frozenset(range(len(adj)))
    if not nodes:
        return True
    order: list[int] = []
    pos: dict[int, int] = {}
    label = dict.fromkeys(nodes, 0)
    buckets: list[list[int]] = [[] for _ in range(len(adj) + 1)]
    buckets[0] = sorted(nodes, reverse=True)
    j = 0
    for i in range(len(adj)):
        while True:
            while not buckets[j]:
                j -= 1
            v = buckets[j].pop()
            if v not in pos and label[v] == j:
                break
        pos[v] = i
        order.append(v)
        for w in adj[v]:
            if w not in pos:
                label[w] += 1
                buckets[label[w]].append(w)
                j = max(j, label[w])
    # Tarjan & Yannakakis: the earlier neighbours of v, minus the latest one u, must be
    # neighbours of u
    for v in order:
        earlier = [w for w in adj[v] if pos[w] < pos[v]]
        if len(earlier) > 1:
            u = max(earlier, key=pos.__getitem__)
            if any(w != u and w not in adj[u] for w in earlier):
                return False
    return True
