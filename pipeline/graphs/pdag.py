"""Partially directed graphs: the common currency of the graph core.

A partially directed graph (PDAG) has directed edges ``u -> v`` and undirected edges
``u - v``, at most one edge per pair of nodes. Essential graphs, skeletons with colliders,
and DAGs (no undirected edge) are all held in this one type. Nodes are any hashable
values; measured variables are strings and intervention nodes are `InterventionNode`.

>>> g = PDAG(["A", "B", "C"])
>>> g.add_directed("A", "B"); g.add_undirected("B", "C")
>>> sorted(g.adjacencies("B"))
['A', 'C']
"""

from __future__ import annotations

from collections.abc import Hashable, Iterable, Iterator
from dataclasses import dataclass
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # networkx is imported where a conversion needs it
    import networkx as nx

__all__ = ["PDAG", "InterventionNode"]

Node = Hashable


@dataclass(frozen=True, order=True)
class InterventionNode:
    """The intervention node F of one non-reference regime in an augmented graph."""

    regime: str

    def __str__(self) -> str:
        return f"F[{self.regime}]"


class PDAG:
    """A graph with directed and undirected edges, at most one edge per pair.

    Node order is the insertion order; it fixes how undirected edges are listed
    (the earlier node first).
    """

    __slots__ = ("_order", "_pa", "_ch", "_ne")

    def __init__(self, nodes: Iterable[Node] = ()) -> None:
        self._order: dict[Node, int] = {}
        self._pa: dict[Node, set[Node]] = {}
        self._ch: dict[Node, set[Node]] = {}
        self._ne: dict[Node, set[Node]] = {}
        for n in nodes:
            self.add_node(n)

    # -- construction -------------------------------------------------------------------
    def add_node(self, n: Node) -> None:
        """Add node `n` (no effect if present)."""
        if n not in self._order:
            self._order[n] = len(self._order)
            self._pa[n] = set()
            self._ch[n] = set()
            self._ne[n] = set()

    def add_directed(self, u: Node, v: Node) -> None:
        """Add ``u -> v``, replacing any edge between `u` and `v`."""
        if u == v:
            raise ValueError(f"self-loop on {u!r}")
        self.add_node(u)
        self.add_node(v)
        self.remove_edge(u, v)
        self._ch[u].add(v)
        self._pa[v].add(u)

    def add_undirected(self, u: Node, v: Node) -> None:
        """Add ``u - v``, replacing any edge between `u` and `v`."""
        if u == v:
            raise ValueError(f"self-loop on {u!r}")
        self.add_node(u)
        self.add_node(v)
        self.remove_edge(u, v)
        self._ne[u].add(v)
        self._ne[v].add(u)

    def remove_edge(self, u: Node, v: Node) -> None:
        """Remove whatever edge joins `u` and `v` (no effect if none)."""
        self._ch[u].discard(v)
        self._pa[v].discard(u)
        self._ch[v].discard(u)
        self._pa[u].discard(v)
        self._ne[u].discard(v)
        self._ne[v].discard(u)

    def orient(self, u: Node, v: Node) -> None:
        """Turn the undirected edge ``u - v`` into ``u -> v``."""
        if v not in self._ne[u]:
            raise ValueError(f"no undirected edge {u!r} - {v!r} to orient")
        self.add_directed(u, v)

    # -- queries --------------------------------------------------------------------------
    @property
    def nodes(self) -> list[Node]:
        """The nodes in insertion order."""
        return list(self._order)

    def __contains__(self, n: object) -> bool:
        return n in self._order

    def __len__(self) -> int:
        return len(self._order)

    def index(self, n: Node) -> int:
        """Position of `n` in the node order."""
        return self._order[n]

    def parents(self, v: Node) -> set[Node]:
        return self._pa[v]

    def children(self, v: Node) -> set[Node]:
        return self._ch[v]

    def neighbors(self, v: Node) -> set[Node]:
        """Nodes joined to `v` by an undirected edge."""
        return self._ne[v]

    def adjacencies(self, v: Node) -> set[Node]:
        """Nodes joined to `v` by any edge."""
        return self._pa[v] | self._ch[v] | self._ne[v]

    def adjacent(self, u: Node, v: Node) -> bool:
        return v in self._ch[u] or v in self._pa[u] or v in self._ne[u]

    def has_directed(self, u: Node, v: Node) -> bool:
        return v in self._ch[u]

    def has_undirected(self, u: Node, v: Node) -> bool:
        return v in self._ne[u]

    def directed_edges(self) -> Iterator[tuple[Node, Node]]:
        """Directed edges ``(u, v)``, by node order of `u` then `v`."""
        for u in self._order:
            for v in sorted(self._ch[u], key=self._order.__getitem__):
                yield u, v

    def undirected_edges(self) -> Iterator[tuple[Node, Node]]:
        """Undirected edges ``(u, v)`` with `u` before `v` in node order."""
        order = self._order
        for u in order:
            for v in sorted(self._ne[u], key=order.__getitem__):
                if order[u] < order[v]:
                    yield u, v

    def number_of_edges(self) -> int:
        return sum(len(c) for c in self._ch.values()) + sum(len(n) for n in self._ne.values()) // 2

    def is_dag(self) -> bool:
        """True if there is no undirected edge and the directed edges form no cycle."""
        import networkx as nx

        return not any(self._ne.values()) and nx.is_directed_acyclic_graph(self.directed_graph())

    # -- copies and conversions ---------------------------------------------------------
    def copy(self) -> PDAG:
        g = PDAG()
        g._order = dict(self._order)
        g._pa = {k: set(v) for k, v in self._pa.items()}
        g._ch = {k: set(v) for k, v in self._ch.items()}
        g._ne = {k: set(v) for k, v in self._ne.items()}
        return g

    def subgraph(self, nodes: Iterable[Node]) -> PDAG:
        """The induced subgraph on `nodes` (kept in this graph's node order)."""
        keep = set(nodes)
        g = PDAG(n for n in self._order if n in keep)
        for u, v in self.directed_edges():
            if u in keep and v in keep:
                g.add_directed(u, v)
        for u, v in self.undirected_edges():
            if u in keep and v in keep:
                g.add_undirected(u, v)
        return g

    def directed_graph(self) -> nx.DiGraph:
        """The directed part as a networkx DiGraph over all nodes."""
        import networkx as nx

        d = nx.DiGraph()
        d.add_nodes_from(self._order)
        d.add_edges_from(self.directed_edges())
        return d

    def undirected_graph(self) -> nx.Graph:
        """The undirected part as a networkx Graph over all nodes."""
        import networkx as nx

        u = nx.Graph()
        u.add_nodes_from(self._order)
        u.add_edges_from(self.undirected_edges())
        return u

    def skeleton(self) -> nx.Graph:
        """All adjacencies, ignoring direction."""

        s = self.undirected_graph()
        s.add_edges_from(self.directed_edges())
        return s

    def to_networkx(self) -> nx.DiGraph:
        """A DiGraph: a directed edge is one arc, an undirected edge two opposite arcs.

        Every arc carries ``orientation`` = ``"directed"`` or ``"undirected"``.
        """
        import networkx as nx

        d = nx.DiGraph()
        d.add_nodes_from(self._order)
        for u, v in self.directed_edges():
            d.add_edge(u, v, orientation="directed")
        for u, v in self.undirected_edges():
            d.add_edge(u, v, orientation="undirected")
            d.add_edge(v, u, orientation="undirected")
        return d

    @classmethod
    def from_networkx(cls, g: nx.DiGraph | nx.Graph) -> PDAG:
        """Inverse of `to_networkx`; a DiGraph's opposite arc pairs become undirected edges.

        An undirected ``nx.Graph`` gives a graph with every edge undirected.
        """

        p = cls(g.nodes)
        if not g.is_directed():
            for u, v in g.edges:
                p.add_undirected(u, v)
            return p
        for u, v in g.edges:
            if g.has_edge(v, u):
                p.add_undirected(u, v)
            else:
                p.add_directed(u, v)
        return p

    # -- comparisons ----------------------------------------------------------------------
    def edge_set(self) -> tuple[frozenset, frozenset]:
        """``(directed pairs, undirected frozensets)``, for comparing graphs."""
        return (frozenset(self.directed_edges()),
                frozenset(frozenset(e) for e in self.undirected_edges()))

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, PDAG):
            return NotImplemented
        return set(self._order) == set(other._order) and self.edge_set() == other.edge_set()

    __hash__ = None  # type: ignore[assignment]

    def __repr__(self) -> str:
        d = sum(len(c) for c in self._ch.values())
        u = sum(len(n) for n in self._ne.values()) // 2
        return f"PDAG({len(self)} nodes, {d} directed, {u} undirected)"
