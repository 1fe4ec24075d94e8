"""What a planned set of experiments identifies if the causal graph were known.

Given a DAG over the measured variables and the regimes' targets, the interventional
essential graph (`pipeline.graphs.essential`) shows which edges every DAG compatible with
the experiments directs the same way, and `class_size` how many DAGs remain. Per regime
two figures say what it contributes:

* ``oriented``: directed edges whose recorded reason is that regime's intervention node
  (a collider with it, or Meek's rule 1 straight from it);
* ``lost_without``: directed edges that become undirected when that regime alone is
  left out (its unique contribution; 0 when other regimes make up for it). It costs one
  more essential graph per regime that ``oriented`` credits with an edge.

References
----------
1. A. Hauser, P. Buhlmann (2012). Characterization and greedy learning of interventional
   Markov equivalence classes of directed acyclic graphs. JMLR 13, 2409-2464.
"""

from __future__ import annotations

import networkx as nx

from pipeline.design import Design
from pipeline.errors import InputError, nearest_names
from pipeline.graphs.essential import essential_graph
from pipeline.graphs.pdag import InterventionNode
from pipeline.results.identify import IdentifyResult

__all__ = ["IdentifyResult", "identify"]



def _check_inputs(dag: nx.DiGraph, design: Design) -> None:
    if not isinstance(dag, nx.DiGraph) or not nx.is_directed_acyclic_graph(dag):
        raise InputError("dag: should be a directed acyclic graph (networkx DiGraph)")
    if set(map(str, dag.nodes)) != set(design.variables):
        extra = sorted(set(design.variables) - set(map(str, dag.nodes)))
        missing = sorted(set(map(str, dag.nodes)) - set(design.variables))
        raise InputError(f"design: variables should be the nodes of the DAG (not in the DAG: "
                         f"{extra or 'none'}; not in the design: {missing or 'none'})")
    nodes = [str(n) for n in dag.nodes]
    for r in design.regimes:
        for t in r.targets:
            if t not in dag:
                raise InputError(f"regime '{r.name}': target '{t}' is not a node of the DAG"
                                 f"{nearest_names(t, nodes)}")
    if not design.reference:
        raise InputError("design: no reference regime; name one with --reference REGIME")


def identify(dag: nx.DiGraph, design: Design, *, leave_one_out: bool = True) -> IdentifyResult:
    """The interventional essential graph of `dag` under the targets of `design`.

    Parameters
    ----------
    dag : nx.DiGraph
        The known DAG over ``design.variables``.
    design : Design
        Regimes and targets (``samples`` may be 0). Targets of regimes marked
        ``known=False`` are taken as given, with a warning.
    leave_one_out : bool
        Compute ``lost_without`` (one more essential graph per regime).

    Returns
    -------
    IdentifyResult

    Raises
    ------
    InputError
        If `dag` has a cycle, the design's variables are not the DAG's nodes, a target is
        not a node, or there is no reference regime.
    """
    _check_inputs(dag, design)
    targets = design.intervention_targets()  # symmetric differences with the reference
    warnings = list(design.warnings) + list(dag.graph.get("warnings", []))
    for r in design.interventional:
        if not r.known:
            warnings.append(f"regime '{r.name}' is marked known=no; its listed targets are "
                            "taken as the true ones here")
        if not targets[r.name]:
            warnings.append(f"regime '{r.name}' acts on the same targets as the reference; "
                            "it identifies nothing")
    # Step 1: the essential graph of the whole design
    ess = essential_graph(dag, targets)
    oriented = dict.fromkeys(targets, 0)
    for reason in ess.reasons.values():
        if reason.rule == "intervention":
            for f in reason.via:
                if isinstance(f, InterventionNode):
                    oriented[f.regime] += 1
    # Step 2: what each regime alone contributes
    lost: dict[str, int] = {}
    if leave_one_out:
        full = set(ess.graph.directed_edges())
        for name in targets:
            if not oriented[name]:
                # no recorded reason uses F_name (only colliders and R1 can), so the same
                # orientations are derived without it
                lost[name] = 0
                continue
            rest = {k: v for k, v in targets.items() if k != name}
            lost[name] = len(full - set(essential_graph(dag, rest).graph.directed_edges()))
    return IdentifyResult(design=design, essential=ess, class_size=ess.class_size(),
                          oriented=oriented, lost_without=lost, warnings=warnings)
