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
adjacencies, then colliders, then conflicting colliders settled by strength, Meek's
rules and, if need be, a repair (`pipeline.graphs.resolve`), so that the result is always
a valid interventional essential graph (class size at least 1). Every decision keeps
its evidence; every decision set aside stays recorded on its edges (`Conflict`).

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

import numpy as np

from pipeline.design import Design
from pipeline.graphs.essential import EssentialGraph
from pipeline.graphs.pdag import InterventionNode
from pipeline.graphs.resolve import Resolution, resolve_orientations
from pipeline.graphs.validity import essential_graph_problems
from pipeline.independence.base import Tester
from pipeline.learner.evidence import (
    ChainEvidence,
    ColliderEvidence,
    Conflict,
    KeptPair,
    Learned,
    RemovedPair,
)
from pipeline.learner.orient import (
    COLLIDER_RULES,
    ColliderSearch,
    augmented_skeleton,
    find_colliders,
)
from pipeline.learner.skeleton import Progress, learn_skeleton, run_batched
from pipeline.learner.targets import (
    TargetSearch,
    TargetVerdict,
    learn_targets,
    verify_declared_targets,
)
from pipeline.options import TARGET_MODES

__all__ = ["learn_graph", "design_warnings", "TARGET_MODES"]



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
    # Step 4: colliders, decided order-independently, each with its evidence.
    cs = find_colliders(tester, learner_design, sk, ts, alpha=alpha,
                        max_condition_size=max_condition_size, collider_rule=collider_rule,
                        progress=progress)
    # Step 5: accept colliders strongest first (ties: the better separation, then names),
    #   close under Meek's rules, repair if need be: always a valid essential graph.
    ev = cs.evidence
    ordered = sorted(cs.colliders, key=lambda t: (-ev[t].strength, -ev[t].p_separation,
                                                  tuple(map(str, t))))
    resolution = resolve_orientations(
        augmented_skeleton(learner_design, sk, ts), ordered,
        weights=[ev[t].strength for t in ordered], non_colliders=cs.non_colliders,
        keep_undirected=cs.keep_undirected)
    essential = resolution.essential
    problems = list(essential_graph_problems(essential.augmented))

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
    learned.ambiguous = list(cs.ambiguous)
    learned.colliders = {_names(t): ev[t] for t in ordered}
    for t in resolution.accepted:
        a, c, b = t
        for u in (a, b):
            if not isinstance(u, InterventionNode) and essential.graph.has_directed(u, c):
                pv = ev[t].p_separation
                learned.p_orientation[(u, c)] = max(pv, learned.p_orientation.get((u, c), pv))
    learned.chains = _chain_evidence(tester, learner_design, essential, ts, progress=progress)
    learned.conflicts = _conflicts(learner_design, resolution, cs, ev)
    levels: dict[int, int] = {}
    checked: dict[int, int] = {}
    for v in verdicts:
        checked[0] = checked.get(0, 0) + 1
        if v.p_conditional is not None:
            checked[len(v.given)] = checked.get(len(v.given), 0) + 1
    for counts in (sk.tests_per_level, checked, ts.tests_per_level, cs.tests_per_level,
                   {0: len(learned.chains)} if learned.chains else {}):
        for lvl, n in counts.items():
            levels[lvl] = levels.get(lvl, 0) + n
    learned.tests_per_level = dict(sorted(levels.items()))
    learned.target_verdicts = verdicts
    forced = [t for t in resolution.added_colliders
              if _key(t) in {_key(u) for u in cs.non_colliders}]
    learned.resolution = {
        "stage": resolution.stage, "accepted": len(resolution.accepted),
        "set_aside": len(resolution.rejected),
        "changed": [(str(u), str(v)) for u, v in resolution.changed],
        "forced": [_names(t) for t in forced]}
    learned.warnings = dropped + ts.warnings + cs.warnings + _resolution_warnings(learned)
    learned.warnings += design_warnings(learner_design, learned)
    if problems:  # cannot happen: resolve_orientations checks its result
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


def _names(t: tuple) -> tuple[str, str, str]:
    return tuple(str(n) for n in t)  # type: ignore[return-value]


def _key(t: tuple) -> tuple:
    return t[1], frozenset((t[0], t[2]))


def _arrows(t: tuple) -> str:
    return f"{t[0]} -> {t[1]} <- {t[2]}"


def _chain_evidence(tester: Tester, design: Design, essential: EssentialGraph,
                    ts: TargetSearch, *, progress: Progress | None) -> dict:
    """`ChainEvidence` of every arrow ``x -> y`` an experiment on `x` directs through `x`.

    One invariance test of `y` alone per arrow (batched per regime): did `y` change?
    """
    aug = essential.augmented
    pos = {v: i for i, v in enumerate(design.variables)}
    found: dict[str, list[tuple[str, str]]] = {}
    for (x, y), reason in essential.reasons.items():
        f = reason.via[0] if reason.via else None
        if reason.rule == "intervention" and isinstance(f, InterventionNode) \
                and aug.has_directed(f, x) and not aug.adjacent(f, y):
            found.setdefault(f.regime, []).append((x, y))
    out: dict[tuple[str, str], ChainEvidence] = {}
    for k, arrows in found.items():
        ys = np.asarray([pos[y] for _, y in arrows], dtype=np.intp)
        res = run_batched(lambda a, _b, c, k=k: tester.invariance(k, a, c), ys, ys,
                          np.zeros((len(ys), 0), dtype=np.intp), label="orientation, level 0",
                          progress=progress)
        for (x, y), pd in zip(arrows, np.asarray(res.pvalue, dtype=float).tolist(),
                              strict=True):
            sep = ts.separations.get((k, pos[y]))
            out[(x, y)] = ChainEvidence(
                x=x, y=y, regime=k,
                separating_set=tuple(design.variables[i] for i in sep.cond) if sep else (),
                p_separation=sep.pvalue if sep else None, p_dependence=None if pd != pd else pd)
    return out


def _conflicts(design: Design, resolution: Resolution, cs: ColliderSearch,
               ev: dict) -> list[Conflict]:
    """One `Conflict` per edge where a collider decision is not what the result shows."""
    g = resolution.essential.graph
    order = {v: i for i, v in enumerate(design.variables)}
    wants: dict[frozenset, list[tuple[tuple, tuple]]] = {}
    for t in resolution.accepted:
        for u in (t[0], t[2]):
            if not isinstance(u, InterventionNode):
                wants.setdefault(frozenset((u, t[1])), []).append((_names(t), (u, t[1])))
    reasons: dict[frozenset, list[str]] = {}
    for r in resolution.rejected:
        a, c, b = r.collider
        strength = ev[r.collider].strength
        why = {"contradiction": (_contradiction(ev[r.against], ev[r.collider])
                                 if r.against in ev
                                 else "an experiment's arrow points the other way"),
               "cycle": "it would close the loop " + " -> ".join(map(str, (*r.against,
                                                                           r.against[0]))),
               "rejected-collider": (f"it would also make {r.against[0]} and {r.against[2]} "
                                     f"meet at {r.against[1]}, which the tests ruled out")
               }[r.reason]
        for u in (a, b):
            if isinstance(u, InterventionNode):
                continue
            e = frozenset((u, c))
            wants.setdefault(e, []).append((_names(r.collider), (u, c)))
            if not g.has_directed(u, c):
                reasons.setdefault(e, []).append(
                    f"{u} -> {c} from the collider {_arrows(_names(r.collider))} (strength "
                    f"{strength:.1f}) was set aside: {why}")
    non = {_key(t) for t in cs.non_colliders}
    for t in resolution.added_colliders:
        if _key(t) not in non:
            continue
        for u in (t[0], t[2]):
            if not isinstance(u, InterventionNode):
                reasons.setdefault(frozenset((u, t[1])), []).append(
                    f"{u} -> {t[1]} makes {t[0]} and {t[2]} meet at {t[1]}, which the tests "
                    f"ruled out; no graph without it fits the other decisions")
    out = []
    for e, why in reasons.items():
        u, v = sorted(e, key=order.__getitem__)
        kept = (f"{u} -> {v}" if g.has_directed(u, v) else f"{v} -> {u}"
                if g.has_directed(v, u) else f"{u} - {v}")
        fwd = [t for t, arrow in wants.get(e, ()) if arrow == (u, v)]
        bwd = [t for t, arrow in wants.get(e, ()) if arrow == (v, u)]
        out.append(Conflict(str(u), str(v), tuple(dict.fromkeys(fwd + bwd)), kept=kept,
                            reasons=tuple(why)))
    out.sort(key=lambda c: (order[c.source], order[c.target]))
    return out


def _contradiction(kept: ColliderEvidence, lost: ColliderEvidence) -> str:
    """Why `kept` went before `lost`, in words."""
    arrows = f"{kept.a} -> {kept.c} <- {kept.b}"
    if round(kept.strength, 1) > round(lost.strength, 1):
        return f"the stronger collider {arrows} (strength {kept.strength:.1f}) points the other way"
    return (f"the collider {arrows}, as strong but with the clearer separation "
            f"(p = {kept.p_separation:.2g} against {lost.p_separation:.2g}), points the other way")


def _resolution_warnings(learned: Learned) -> list[str]:
    out = []
    if learned.conflicts:
        shown = ", ".join(c.kept for c in learned.conflicts[:6])
        more = f" and {len(learned.conflicts) - 6} more" if len(learned.conflicts) > 6 else ""
        out.append(f"the tests disagree about the direction of {len(learned.conflicts)} "
                   f"edge(s) ({shown}{more}): the result keeps the direction with the "
                   f"stronger evidence and marks these edges as conflicts, with the evidence "
                   f"set aside in their notes")
    forced = learned.resolution.get("forced", [])
    if learned.resolution.get("stage") == "repair":
        out.append("no causal graph fits every test decision: the learner chose the graph "
                   "that keeps the strongest evidence"
                   + (f" and had to add {len(forced)} meeting point(s) the tests had ruled out "
                      f"({', '.join(_arrows(t) for t in forced[:4])})" if forced else "")
                   + "; treat the edges marked as conflicts as open questions")
    return out


def design_warnings(design: Design, learned: Learned) -> list[str]:
    """Plain-word warnings when the experiments could not serve to orient edges.

    Two cases: an experiment that seems to act on most measured variables (its
    intervention node is adjacent to more than half of them, at least 4), and a run
    where no arrow of the result agrees with a decided triple ``F - x - y`` of an
    intervention node, although such triples exist (an experiment could have told the
    direction of ``x - y``).
    """
    out: list[str] = []
    p = len(design.variables)
    off = {}
    for f in learned.findings:
        if f.status == "off-target":
            off.setdefault(f.regime, []).append(f.variable)
    for r in design.interventional:
        hit = set(learned.targets.get(r.name, ())) | set(off.get(r.name, ()))
        if len(hit) >= 4 and 2 * len(hit) > p:
            out.append(
                f"experiment {r.name} seems to have acted on most measured variables "
                f"({len(hit)} of {p}): hardly any variable stayed put, so the learner could "
                f"not use this experiment to orient edges. Check that the reference (control) "
                f"regime was measured like the experiments (same batch, same conditions)")
    # an experiment on x bears on x - y when its node is adjacent to x and not to y
    g, aug = learned.graph, learned.essential.augmented
    undecided = {_key(t) for t in learned.ambiguous}
    colliders = {_key(t) for t in learned.colliders}
    bearing, supported = [], 0
    for f in (n for n in aug.nodes if isinstance(n, InterventionNode)):
        for x in sorted(aug.children(f), key=aug.index):
            for y in sorted(aug.adjacencies(x) - {f}, key=aug.index):
                if isinstance(y, InterventionNode) or aug.adjacent(f, y):
                    continue
                bearing.append((x, y))
                key = (x, frozenset((str(f), y)))
                if key in undecided:
                    continue
                supported += g.has_directed(*((y, x) if key in colliders else (x, y)))
    if bearing and not supported:
        shown = ", ".join(f"{x} - {y}" for x, y in list(dict.fromkeys(bearing))[:4])
        out.append(
            f"no arrow comes from an experiment: the experiments could have told the direction "
            f"of edges next to their targets ({shown}), but none of the directions shown rests "
            f"on them, so every arrow comes from patterns among the measured variables alone. "
            f"The experiments may not have moved their targets, or the reference may differ "
            f"from them in more than the targets")
    return out


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
