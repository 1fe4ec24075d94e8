"""The augmented graph: a DAG with one intervention node per non-reference regime.

Each regime k gets an intervention node ``F_k`` (an `InterventionNode`) with an edge
``F_k -> X`` for every variable X in the symmetric difference of its targets and the
reference's targets. Intervention nodes have no parents and no edges among themselves.
Two DAGs are interventionally Markov equivalent under the targets iff their augmented
graphs have the same skeleton and the same v-structures [1]_, [2]_.

>>> import networkx as nx
>>> g = augmented_graph(nx.DiGraph([("A", "B")]), {"kd_A": ["A"]})
>>> sorted(map(str, g.predecessors("A")))
['F[kd_A]']

References
----------
1. K. Yang, A. Katcoff, C. Uhler (2018). Characterizing and learning equivalence classes of
   causal DAGs under interventions. ICML.
2. M. Kocaoglu, A. Jaber, K. Shanmugam, E. Bareinboim (2019). Characterization and learning
   of causal graphs with latent variables from soft interventions. NeurIPS.
"""

from __future__ import annotations

from collections.abc import Hashable, Iterable, Mapping
from typing import TYPE_CHECKING

from pipeline.graphs.pdag import InterventionNode

if TYPE_CHECKING:  # imported where a graph is built: importing this module stays light
    import networkx as nx

__all__ = ["augmented_graph"]

Node = Hashable


def augmented_graph(dag: nx.DiGraph, targets: Mapping[str, Iterable[Node]],
                    reference_targets: Iterable[Node] = ()) -> nx.DiGraph:
    """Return `dag` with one intervention node per regime of `targets`.

    Parameters
    ----------
    dag : nx.DiGraph
        A directed acyclic graph over the measured variables.
    targets : mapping of regime name to iterable of nodes
        The targets of each non-reference regime.
    reference_targets : iterable of nodes
        Targets of the reference regime; each intervention node points at the symmetric
        difference of its regime's targets and these.

    Returns
    -------
    nx.DiGraph
        A new graph: the measured nodes (in `dag` order) and then the intervention nodes
        (in `targets` order), with the edges of `dag` and the edges ``F_k -> X``.

    Raises
    ------
    ValueError
        If `dag` is not directed acyclic or a target is not a node of `dag`.
    """
    import networkx as nx

    if not dag.is_directed() or not nx.is_directed_acyclic_graph(dag):
        raise ValueError("dag should be directed acyclic")
    ref = set(reference_targets)
    for regime, ts in [("reference", ref)] + [(k, set(v)) for k, v in targets.items()]:
        missing = [t for t in ts if t not in dag]
        if missing:
            raise ValueError(f"targets of regime {regime!r} are not nodes of dag: {missing!r}")
    out = nx.DiGraph()
    out.add_nodes_from(dag.nodes)
    out.add_edges_from(dag.edges)
    for regime, ts in targets.items():
        f = InterventionNode(str(regime))
        out.add_node(f)
        hit = set(ts) ^ ref
        # keep dag node order for the F-edges so that results are reproducible
        out.add_edges_from((f, x) for x in dag.nodes if x in hit)
    return out
