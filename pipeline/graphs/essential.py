"""The interventional essential graph, with the reason behind every directed edge.

Under a family of intervention targets, the interventional essential graph of a DAG has
an edge directed iff every DAG of its interventional Markov equivalence class directs it
the same way [1]_. It is computed from the augmented graph (one intervention node per
non-reference regime, see `pipeline.graphs.augmented`): its skeleton and v-structures,
the edges out of intervention nodes directed, then Meek's rules R1-R4 to closure [3]_,
then the intervention nodes dropped [2]_. For observational data alone this is the
CPDAG (completed partially directed acyclic graph).

Each directed edge among measured variables keeps its reason (`EdgeReason`):
``"intervention"`` when an intervention node is the other parent of a collider that
directed it, or when R1 used an intervention node (``F -> x - y`` gives ``x -> y``);
``"collider"`` for a collider among measured variables; ``"meek-1"`` .. ``"meek-4"``
for Meek's rules with the nodes they used.

>>> import networkx as nx
>>> e = essential_graph(nx.DiGraph([("A", "B"), ("B", "C")]), {"kd_A": ["A"]})
>>> sorted(e.graph.directed_edges()), e.reasons[("A", "B")].rule
([('A', 'B'), ('B', 'C')], 'intervention')

References
----------
1. A. Hauser, P. Buhlmann (2012). Characterization and greedy learning of interventional
   Markov equivalence classes of directed acyclic graphs. JMLR 13, 2409-2464.
2. K. Yang, A. Katcoff, C. Uhler (2018). Characterizing and learning equivalence classes of
   causal DAGs under interventions. ICML.
3. C. Meek (1995). Causal inference and causal explanation with background knowledge. UAI.
"""

from __future__ import annotations

from collections.abc import Hashable, Iterable, Mapping
from dataclasses import field
from typing import TYPE_CHECKING

from pipeline.graphs.augmented import augmented_graph
from pipeline.graphs.meek import meek_closure
from pipeline.graphs.pdag import PDAG, InterventionNode
from pipeline.records import record

if TYPE_CHECKING:  # the learner's graphs are PDAGs: networkx only where a DAG is given
    import networkx as nx

__all__ = ["EdgeReason", "EssentialGraph", "orient_pattern", "essential_graph", "v_structures"]

Node = Hashable


@record(frozen=True)
class EdgeReason:
    """Why a directed edge has its direction.

    `rule` is ``"intervention"``, ``"collider"``, ``"meek-1"`` .. ``"meek-4"`` or
    ``"none"`` (a directed edge given in the input, background knowledge); `via` holds the
    intervention node(s) or measured nodes the rule used.
    """

    rule: str
    via: tuple[Node, ...] = ()


@record
class EssentialGraph:
    """An (interventional) essential graph and the reasons for its directed edges."""

    graph: PDAG
    augmented: PDAG
    reasons: dict[tuple[Node, Node], EdgeReason] = field(default_factory=dict)

    def class_size(self) -> int:
        """The number of DAGs in the class (exact), see `pipeline.graphs.counting`."""
        from pipeline.graphs.counting import class_size

        return class_size(self.graph)

    def undirected_edges(self) -> list[tuple[Node, Node]]:
        """The undirected edges, earlier node first."""
        return list(self.graph.undirected_edges())

    def __repr__(self) -> str:
        return f"EssentialGraph({self.graph!r})"


def orient_pattern(skeleton: PDAG, colliders: Iterable[tuple[Node, Node, Node]], *,
                   keep_undirected: Iterable[frozenset] = ()) -> EssentialGraph:
    """Orient colliders, close under Meek's rules and classify every directed edge.

    Parameters
    ----------
    skeleton : PDAG
        The augmented skeleton: edges among measured nodes undirected, edges out of
        intervention nodes directed. It is not modified.
    colliders : iterable of (a, c, b)
        Unshielded triples to orient ``a -> c <- b``. An edge in `keep_undirected`, or one
        already directed (either way), is left as it is.
    keep_undirected : iterable of frozenset
        Edges ``frozenset({u, v})`` that stay undirected (collider conflicts).

    Returns
    -------
    EssentialGraph
        When an edge belongs to several colliders the first reason is kept, with the
        colliders that involve an intervention node taken before the others (so
        ``"intervention"`` wins over ``"collider"``), each group in the given order.

    Raises
    ------
    TypeError
        If `skeleton` is not a PDAG.
    ValueError
        If a collider names a node not in `skeleton` or a pair that is not adjacent.
    """
    if not isinstance(skeleton, PDAG):
        raise TypeError(f"skeleton should be a PDAG, got {type(skeleton).__name__}")
    colliders = [tuple(t) for t in colliders]
    for t in colliders:
        if len(t) != 3 or any(n not in skeleton for n in t):
            raise ValueError(f"collider {t!r} should be a triple of nodes of the skeleton")
        a, c, b = t
        if not (skeleton.adjacent(a, c) and skeleton.adjacent(b, c)):
            raise ValueError(f"collider {t!r}: {a!r} and {b!r} should both be adjacent to {c!r}")
    keep = {frozenset(e) for e in keep_undirected}
    g = skeleton.copy()
    reasons: dict[tuple[Node, Node], EdgeReason] = {}

    # Step 1: colliders, those with an intervention node first (a stable sort)
    def has_f(t: tuple) -> bool:
        return isinstance(t[0], InterventionNode) or isinstance(t[2], InterventionNode)

    for a, c, b in sorted(colliders, key=lambda t: not has_f(t)):
        for p, other in ((a, b), (b, a)):
            if isinstance(p, InterventionNode) or frozenset((p, c)) in keep:
                continue
            if g.has_undirected(p, c):
                g.orient(p, c)
                rule = "intervention" if isinstance(other, InterventionNode) else "collider"
                reasons[(p, c)] = EdgeReason(rule, (other,))

    # Step 2: Meek's rules to closure
    for o in meek_closure(g, keep_undirected=keep):
        if o.rule == "meek-1" and isinstance(o.via[0], InterventionNode):
            reasons[(o.source, o.target)] = EdgeReason("intervention", o.via)
        else:
            reasons[(o.source, o.target)] = EdgeReason(o.rule, o.via)

    # Step 3: drop the intervention nodes; directed input edges keep the reason "none"
    measured = [n for n in g.nodes if not isinstance(n, InterventionNode)]
    graph = g.subgraph(measured)
    final = {e: reasons.get(e, EdgeReason("none")) for e in graph.directed_edges()}
    return EssentialGraph(graph=graph, augmented=g, reasons=final)


def v_structures(dag: nx.DiGraph) -> list[tuple[Node, Node, Node]]:
    """The v-structures ``a -> c <- b`` (a, b non-adjacent) of a DAG, as triples (a, c, b).

    Pairs of parents that are both intervention nodes are left out (their edges are
    directed anyway). Each measured pair is listed once, `a` before `b` in node order.
    Cost: sum over nodes of (measured in-degree) x (in-degree).
    """
    order = {n: i for i, n in enumerate(dag.nodes)}
    out = []
    for c in dag.nodes:
        pa = sorted(dag.predecessors(c), key=order.__getitem__)
        if len(pa) < 2:
            continue
        for a in pa:
            if isinstance(a, InterventionNode):
                continue
            for b in pa:
                if b == a or (not isinstance(b, InterventionNode) and order[b] < order[a]):
                    continue
                if not (dag.has_edge(a, b) or dag.has_edge(b, a)):
                    out.append((a, c, b))
    return out


def essential_graph(dag: nx.DiGraph, targets: Mapping[str, Iterable[Node]] | None = None,
                    reference_targets: Iterable[Node] = ()) -> EssentialGraph:
    """The interventional essential graph of `dag` under the regimes' `targets`.

    Parameters
    ----------
    dag : nx.DiGraph
        A directed acyclic graph over the measured variables.
    targets : mapping of regime name to iterable of nodes, optional
        Targets of each non-reference regime; empty or None gives the CPDAG.
    reference_targets : iterable of nodes
        Targets of the reference regime (see `augmented_graph`).

    Returns
    -------
    EssentialGraph

    Raises
    ------
    ValueError
        If `dag` is not directed acyclic or a target is not one of its nodes.
    """
    aug = augmented_graph(dag, targets or {}, reference_targets)
    # Step 1: the augmented skeleton, edges out of intervention nodes directed
    skel = PDAG(aug.nodes)
    for u, v in aug.edges:
        if isinstance(u, InterventionNode):
            skel.add_directed(u, v)
        else:
            skel.add_undirected(u, v)
    # Step 2: the v-structures, then Meek's rules (in orient_pattern)
    return orient_pattern(skel, v_structures(aug))
