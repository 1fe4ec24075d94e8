"""PC on the graph augmented with intervention nodes: the learner's entry point.

The interventional essential graph of a DAG under a family of intervention targets has
an edge directed iff every DAG interventionally Markov equivalent to it directs the edge
the same way. Two DAGs are equivalent iff their augmented graphs (one intervention node
``F_k`` per non-reference regime, pointing at its targets) have the same skeleton and
v-structures [3]_, [4]_. So the PC algorithm [1]_ run on the augmented graph learns the
class: the skeleton among measured variables by PC-stable [2]_ (`skeleton`), the
adjacencies of the intervention nodes by invariance tests (`targets`), the colliders
decided order-independently [2]_ (`orient`), then Meek's rules to closure [5]_ in the
graph core. With a perfect test (d-separation, `oracle`) the result is exactly the true
interventional essential graph.

Order of the steps: measured skeleton first (every test given the regime, i.e. given
all intervention nodes), then intervention-node adjacencies from subsets of the measured
adjacencies, then colliders, then Meek's rules. Every decision keeps its evidence.

>>> import networkx as nx
>>> from pipeline.design import Design, Regime
>>> from pipeline.learner.oracle import DSeparationTester
>>> d = Design(("A", "B"), (Regime("ctrl", reference=True), Regime("kd_A", ("A",))))
>>> learned = learn_graph(d, DSeparationTester(nx.DiGraph([("A", "B")]), d))
>>> list(learned.graph.directed_edges()), learned.essential.reasons[("A", "B")].rule
([('A', 'B')], 'intervention')

References
----------
.. [1] Spirtes, P., Glymour, C. & Scheines, R. (2000). *Causation, Prediction, and
   Search*, 2nd ed. MIT Press.
.. [2] Colombo, D. & Maathuis, M. H. (2014). Order-independent constraint-based causal
   structure learning. *Journal of Machine Learning Research* 15, 3741-3782.
.. [3] Yang, K. D., Katcoff, A. & Uhler, C. (2018). Characterizing and learning
   equivalence classes of causal DAGs under interventions. *ICML*.
.. [4] Kocaoglu, M., Jaber, A., Shanmugam, K. & Bareinboim, E. (2019). Characterization
   and learning of causal graphs with latent variables from soft interventions. *NeurIPS*.
.. [5] Meek, C. (1995). Causal inference and causal explanation with background
   knowledge. *UAI*, 403-410.
"""

from __future__ import annotations

import numbers

from pipeline.design import Design
from pipeline.graphs.essential import orient_pattern
from pipeline.graphs.pdag import InterventionNode
from pipeline.graphs.validity import essential_graph_problems
from pipeline.independence.base import Tester
from pipeline.learner.evidence import KeptPair, Learned, RemovedPair
from pipeline.learner.orient import COLLIDER_RULES, augmented_skeleton, find_colliders
from pipeline.learner.skeleton import Progress, learn_skeleton
from pipeline.learner.targets import TargetVerdict, learn_targets, verify_declared_targets
from pipeline.options import TARGET_MODES

__all__ = ["learn_graph", "TARGET_MODES"]



def learn_graph(
    design: Design,
    tester: Tester,
    *,
    alpha: float = 0.01,
    max_condition_size: int | None = None,
    targets: str = "declared",
    collider_rule: str = "majority",
    progress: Progress | None = None,
) -> Learned:
    """Learn the interventional essential graph, with the evidence of every decision.

    Parameters
    ----------
    design : Design
        Variables, regimes and declared targets.
    tester : Tester
        Answers batched ``ci`` and ``invariance`` tests (positions in
        ``design.variables``); the learner never sees data.
    alpha : float, default 0.01
        Significance level: a pair is separated when a test gives ``p > alpha``.
    max_condition_size : int or None, default None
        Largest conditioning set tried; None for no limit.
    targets : {"declared", "learn"}, default "declared"
        Take the declared targets of ``known`` regimes as given, or learn every regime's
        targets. Regimes with ``known=False`` are always learned.
    collider_rule : {"majority", "conservative", "standard"}, default "majority"
        How unshielded triples are decided (see `pipeline.learner.orient`).
    progress : callable or None
        Called as ``progress(stage, done, total)``.

    Returns
    -------
    Learned

    Raises
    ------
    ValueError
        If an argument is out of range, or a declared target is not a variable.
    """
    _validate(design, tester, alpha, max_condition_size, targets, collider_rule, progress)
    names = design.variables
    regime_names = [r.name for r in design.regimes]

    # Step 1: the skeleton among measured variables (PC-stable, tests given the regime).
    sk = learn_skeleton(tester, names, alpha=alpha, max_condition_size=max_condition_size,
                        regimes=regime_names, progress=progress)
    # Step 2: the declared targets, checked given their neighbours: a regime whose target
    # moved neither marginally nor conditionally failed on it, and its intervention node
    # is not joined to that target (a false F -> X edge would orient X's other edges).
    verdicts = (verify_declared_targets(tester, design, sk.adjacency, alpha=alpha)
                if targets == "declared" else [])
    learner_design, dropped = _without_failed(design, verdicts)
    # Step 3: the adjacencies of the intervention nodes (invariance tests).
    ts = learn_targets(tester, learner_design, sk.adjacency, alpha=alpha,
                       max_condition_size=max_condition_size, mode=targets, progress=progress)
    # Step 4: colliders, decided order-independently; conflicts kept undirected.
    cs = find_colliders(tester, learner_design, sk, ts, alpha=alpha,
                        max_condition_size=max_condition_size, collider_rule=collider_rule,
                        progress=progress)
    # Step 5: orient colliders, close under Meek's rules, check the result.
    essential = orient_pattern(augmented_skeleton(learner_design, sk, ts), cs.colliders,
                               keep_undirected=cs.keep_undirected)
    problems = list(essential_graph_problems(essential.graph))

    # Step 6: the evidence, in variable order.
    learned = Learned(essential=essential)
    name = names.__getitem__
    learned.removed.extend(
        RemovedPair(names[i], names[j], tuple(map(name, s.cond)), s.pvalue, s.statistic,
                    len(s.cond), s.notes)
        for (i, j), s in sorted(sk.separations.items()))
    for (i, j), (mp, n) in sorted(sk.support.items()):
        learned.kept.append(KeptPair(names[i], names[j], mp, n))
    order = {r.name: n for n, r in enumerate(design.regimes)}
    fnode = {k: str(InterventionNode(k)) for k in order}
    learned.removed.extend(
        RemovedPair(fnode[k], names[i], tuple(map(name, s.cond)), s.pvalue, s.statistic,
                    len(s.cond), s.notes, regime=k)
        for (k, i), s in sorted(ts.separations.items(),
                                key=lambda kv: (order[kv[0][0]], kv[0][1])))
    for (k, i), (mp, n) in sorted(ts.support.items(), key=lambda kv: (order[kv[0][0]], kv[0][1])):
        learned.kept.append(KeptPair(str(InterventionNode(k)), names[i], mp, n, regime=k))
    learned.targets = {k: tuple(names[i] for i in adj) for k, adj in ts.adjacent.items()}
    learned.findings = list(ts.findings)
    learned.conflicts = list(cs.conflicts)
    learned.ambiguous = list(cs.ambiguous)
    learned.p_orientation = {e: pv for e, pv in cs.p_orientation.items()
                             if essential.graph.has_directed(*e)}
    levels: dict[int, int] = {}
    checked: dict[int, int] = {}
    for v in verdicts:
        checked[0] = checked.get(0, 0) + 1
        if v.p_conditional is not None:
            checked[len(v.given)] = checked.get(len(v.given), 0) + 1
    for counts in (sk.tests_per_level, checked, ts.tests_per_level, cs.tests_per_level):
        for lvl, n in counts.items():
            levels[lvl] = levels.get(lvl, 0) + n
    learned.tests_per_level = dict(sorted(levels.items()))
    learned.target_verdicts = verdicts
    learned.warnings = dropped + ts.warnings + cs.warnings
    if problems:
        learned.warnings.append("the learned graph is not a valid essential graph: "
                                + "; ".join(problems))
    learned.problems = problems
    learned.settings = {"alpha": alpha, "max_condition_size": max_condition_size,
                        "targets": targets, "collider_rule": collider_rule}
    return learned


def _without_failed(design: Design, verdicts: list[TargetVerdict]
                    ) -> tuple[Design, list[str]]:
    """`design` without the declared targets no test saw move, and a warning for each."""
    from dataclasses import replace

    failed: dict[str, set[str]] = {}
    for v in verdicts:
        if not v.acted:
            failed.setdefault(v.regime, set()).add(v.target)
    if not failed:
        return design, []
    notes = []
    for v in verdicts:
        if not v.acted:
            cond = (f" nor given {', '.join(v.given)} (p = {v.p_conditional:.2g})"
                    if v.p_conditional is not None else "")
            notes.append(f"regime {v.regime}: declared target {v.target} moved neither "
                         f"marginally (p = {v.p_marginal:.2g}){cond}: the intervention seems "
                         f"to have failed on it, so the learner does not use {v.regime} to "
                         f"orient edges at {v.target}; check the perturbation (a failed guide "
                         f"or dose?)")
    regimes = tuple(replace(r, targets=tuple(t for t in r.targets
                                             if t not in failed.get(r.name, ())))
                    for r in design.regimes)
    return replace(design, regimes=regimes), notes


def _validate(design, tester, alpha, max_condition_size, targets, collider_rule,
              progress) -> None:
    """Check the arguments of `learn_graph`; raise ValueError naming the culprit."""
    if not isinstance(design, Design):
        raise ValueError(f"design should be a pipeline.design.Design; "
                         f"got {type(design).__name__}")
    for method in ("ci", "invariance"):
        if not callable(getattr(tester, method, None)):
            raise ValueError(f"tester should have a {method}() method (the Tester protocol); "
                             f"got {type(tester).__name__}")
    if (isinstance(alpha, bool) or not isinstance(alpha, numbers.Real)
            or not 0.0 < float(alpha) < 1.0):
        raise ValueError(f"alpha should be a number strictly between 0 and 1; got {alpha!r}")
    if max_condition_size is not None and (
            isinstance(max_condition_size, bool)
            or not isinstance(max_condition_size, numbers.Integral) or max_condition_size < 0):
        raise ValueError(f"max_condition_size should be a non-negative integer or None; "
                         f"got {max_condition_size!r}")
    if targets not in TARGET_MODES:
        raise ValueError(f"targets should be 'declared' or 'learn'; got {targets!r}")
    if collider_rule not in COLLIDER_RULES:
        raise ValueError(f"collider_rule should be one of {', '.join(COLLIDER_RULES)}; "
                         f"got {collider_rule!r}")
    if progress is not None and not callable(progress):
        raise ValueError(f"progress should be a callable or None; got {type(progress).__name__}")
    if len(set(design.variables)) != len(design.variables):
        raise ValueError("design.variables should not repeat a name")
    known = set(design.variables)
    for k, tg in design.intervention_targets().items():
        missing = sorted(set(tg) - known)
        if missing:
            raise ValueError(f"regime {k}: targets {', '.join(missing)} are not variables of "
                             f"the design; name only measured variables as targets")
