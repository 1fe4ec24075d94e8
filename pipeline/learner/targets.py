"""Adjacencies of the intervention nodes: what each experiment acted on.

In the augmented graph [1]_, [2]_ the intervention node ``F_k`` of regime ``k`` points at
the targets of ``k`` and at nothing else. A variable ``Y`` that is not a target is
separated from ``F_k`` by its measured parents (with the other intervention nodes, which
the invariance test holds fixed by comparing regime ``k`` with the reference only), so a
separating set can be searched among the subsets of ``adj(Y)`` in the measured skeleton,
by sizes 0, 1, 2, ... as in the PC algorithm [3]_. The test of ``F_k _||_ Y | S`` is the
invariance test: is the law of ``Y`` given ``S`` the same in regime ``k`` and the
reference?

This step runs after the measured skeleton and uses its adjacencies. Two modes:

declared
    ``F_k`` is adjacent to exactly the declared targets (the symmetric difference with the
    reference's). Every other variable is still tested; one that no set separates from
    ``F_k`` is an *off-target* finding: reported with a warning, but kept non-adjacent,
    so the graph stays the one the declared design implies. Its pair has no separating
    set, so the orientation step treats its triples as undecided.
learn
    (``targets="learn"``, or a regime marked ``known=no``) ``F_k`` starts adjacent to
    every variable; a pair goes when an invariance test gives ``p > alpha``; what is left
    are the detected targets.

Intervention nodes are never adjacent to each other. Separating sets are recorded, for
the colliders ``F_k -> C <- Y`` of the orientation step.

References
----------
.. [1] Yang, K. D., Katcoff, A. & Uhler, C. (2018). Characterizing and learning
   equivalence classes of causal DAGs under interventions. *ICML*.
.. [2] Kocaoglu, M., Jaber, A., Shanmugam, K. & Bareinboim, E. (2019). Characterization
   and learning of causal graphs with latent variables from soft interventions. *NeurIPS*.
.. [3] Spirtes, P., Glymour, C. & Scheines, R. (2000). *Causation, Prediction, and
   Search*, 2nd ed. MIT Press.
"""

from __future__ import annotations

from dataclasses import field
from itertools import combinations

import numpy as np

from pipeline.design import Design
from pipeline.graphs.pdag import InterventionNode
from pipeline.independence.base import Tester
from pipeline.learner.evidence import TargetFinding
from pipeline.learner.skeleton import (
    Progress,
    Separation,
    best_rows,
    left_out_notes,
    run_batched,
)
from pipeline.records import record

__all__ = ["TargetSearch", "TargetVerdict", "learn_targets", "verify_declared_targets"]


@record(frozen=True)
class TargetVerdict:
    """Did regime `regime` act on its declared target `target`?

    Two invariance tests of ``F_regime`` against the target: with no conditioning set
    (`p_marginal`) and given the target's neighbours in the measured skeleton
    (`p_conditional`, `given`; None when it has none). In the augmented graph ``F_k`` is
    adjacent to each of its targets, so no set separates them: a worked intervention
    changes the conditional law even when it keeps the marginal mean and spread (a
    variance change, or a do() that matches mean and sd). `acted` is False only when
    neither test rejects: a failed intervention.
    """

    regime: str
    target: str
    p_marginal: float
    p_conditional: float | None
    given: tuple[str, ...]
    acted: bool


def verify_declared_targets(tester: Tester, design: Design, adjacency: np.ndarray, *,
                            alpha: float) -> list[TargetVerdict]:
    """Test every declared target of a known regime, marginally and given its neighbours.

    Parameters
    ----------
    tester : Tester
        Answers ``tester.invariance(regime, x, cond)``.
    design : Design
        The declared targets (the symmetric difference with the reference's).
    adjacency : ndarray of bool, shape (p, p)
        The measured skeleton.
    alpha : float
        A target acted when either test gives ``p <= alpha``.

    Returns
    -------
    list of TargetVerdict
        In design order of regimes and targets.
    """
    pos = {v: i for i, v in enumerate(design.variables)}
    declared = design.intervention_targets()
    out: list[TargetVerdict] = []
    for r in design.interventional:
        if not r.known:
            continue
        idx = sorted(pos[v] for v in declared[r.name])
        if not idx:
            continue
        x = np.asarray(idx, dtype=np.intp)
        marginal = np.asarray(tester.invariance(r.name, x, np.zeros((len(idx), 0), np.intp))
                              .pvalue, dtype=float)
        # the conditional tests, batched by the size of the neighbourhood
        conditional: dict[int, tuple[float, tuple[int, ...]]] = {}
        by_size: dict[int, list[int]] = {}
        for i in idx:
            nb = np.flatnonzero(adjacency[i])
            if nb.size:
                by_size.setdefault(nb.size, []).append(i)
        for size, xs in by_size.items():
            cond = np.asarray([np.flatnonzero(adjacency[i]) for i in xs], dtype=np.intp)
            res = tester.invariance(r.name, np.asarray(xs, dtype=np.intp), cond.reshape(-1, size))
            for i, pv, c in zip(xs, np.asarray(res.pvalue, dtype=float).tolist(), cond.tolist(),
                                strict=True):
                conditional[i] = (pv, tuple(c))
        for i, pm in zip(idx, marginal.tolist(), strict=True):
            pc, given = conditional.get(i, (None, ()))
            acted = pm <= alpha or (pc is not None and pc <= alpha)
            out.append(TargetVerdict(r.name, design.variables[i], pm, pc,
                                     tuple(design.variables[j] for j in given), acted))
    return out


@record
class TargetSearch:
    """Adjacencies of every intervention node, with the evidence.

    Keys ``(regime, i)`` pair a regime with a measured variable position.
    `adjacent` maps a regime to the positions adjacent to its node; `learned` says
    which regimes were learned rather than declared; `separations` holds the pairs
    separated by a test; `support` the largest p and the number of tests of pairs left
    adjacent (``(None, 0)`` for a declared, untested adjacency); `unseparated` the
    declared-mode pairs that no set separated (off-target findings).
    """

    adjacent: dict[str, tuple[int, ...]] = field(default_factory=dict)
    learned: dict[str, bool] = field(default_factory=dict)
    separations: dict[tuple[str, int], Separation] = field(default_factory=dict)
    support: dict[tuple[str, int], tuple[float | None, int]] = field(default_factory=dict)
    unseparated: dict[tuple[str, int], tuple[float | None, int]] = field(default_factory=dict)
    findings: list[TargetFinding] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    tests_per_level: dict[int, int] = field(default_factory=dict)


def learn_targets(
    tester: Tester,
    design: Design,
    adjacency: np.ndarray,
    *,
    alpha: float,
    max_condition_size: int | None = None,
    mode: str = "declared",
    progress: Progress | None = None,
) -> TargetSearch:
    """Find the adjacencies of every intervention node by invariance tests.

    Parameters
    ----------
    tester : Tester
        Answers batched ``F_regime _||_ X | S`` through ``tester.invariance``.
    design : Design
        Variables, regimes and declared targets (validated by the caller).
    adjacency : ndarray of bool, shape (p, p)
        The measured skeleton.
    alpha : float
        A pair is separated when a test gives ``p > alpha``.
    max_condition_size : int or None
        Largest conditioning set tried.
    mode : {"declared", "learn"}
        How regimes with ``known=True`` are treated; ``known=False`` is always learned.
    progress : callable or None
        Called as ``progress("targets, level l", done, total)``.

    Returns
    -------
    TargetSearch
    """
    pos = {v: i for i, v in enumerate(design.variables)}
    p = len(design.variables)
    nbrs = [np.flatnonzero(adjacency[i]).tolist() for i in range(p)]
    declared = design.intervention_targets()
    out = TargetSearch()
    regimes = [r.name for r in design.regimes]

    # Step 1: the pairs to test, per regime.
    pending: dict[tuple[str, int], None] = {}
    for r in design.interventional:
        learn = mode == "learn" or not r.known
        out.learned[r.name] = learn
        dec = sorted(pos[v] for v in declared[r.name])
        for i in range(p):
            if learn or i not in dec:
                pending[(r.name, i)] = None
    tested: dict[tuple[str, int], tuple[float, int]] = {}

    # Step 2: level by level, sets from adj(Y); one batched call per regime and level.
    level = 0
    while pending and (max_condition_size is None or level <= max_condition_size):
        rows: dict[str, tuple[list[tuple[str, int]], list[tuple[int, ...]]]] = {}
        for key in pending:
            k, i = key
            if len(nbrs[i]) < level:
                continue
            keys, conds = rows.setdefault(k, ([], []))
            for s in combinations(nbrs[i], level):
                keys.append(key)
                conds.append(s)
        if not rows:
            break
        for k, (keys, conds) in rows.items():
            uniq = list(dict.fromkeys(keys))
            index = {key: n for n, key in enumerate(uniq)}
            pid = np.asarray([index[key] for key in keys], dtype=np.intp)
            x = np.asarray([key[1] for key in keys], dtype=np.intp)
            cond = np.asarray(conds, dtype=np.intp).reshape(len(conds), level)
            res = run_batched(lambda a, _b, c, k=k: tester.invariance(k, a, c), x, x, cond,
                              label=f"targets, level {level}", progress=progress)
            out.tests_per_level[level] = out.tests_per_level.get(level, 0) + len(pid)
            pv = np.asarray(res.pvalue, dtype=float)
            chosen = best_rows(pid, pv, pv > alpha, len(uniq))
            counts = np.bincount(pid, minlength=len(uniq))
            maxp = np.full(len(uniq), -np.inf)
            np.maximum.at(maxp, pid, np.where(np.isnan(pv), -np.inf, pv))
            # (python lists: indexing numpy scalars one by one costs more than the loop)
            pv_l = pv.tolist()
            st_l = np.asarray(res.statistic, dtype=float).tolist()
            for key, r, mp, n in zip(uniq, chosen.tolist(), maxp.tolist(), counts.tolist(),
                                     strict=True):
                if r >= 0:
                    out.separations[key] = Separation(conds[r], pv_l[r], st_l[r],
                                                      left_out_notes(res, r, regimes))
                    pending.pop(key, None)
                    tested.pop(key, None)
                else:
                    old_p, old_n = tested.get(key, (-np.inf, 0))
                    tested[key] = (max(old_p, mp), old_n + n)
        level += 1

    # Step 3: what is left adjacent, per regime, and the findings.
    def _support(key: tuple[str, int]) -> tuple[float | None, int]:
        mp, n = tested.get(key, (-np.inf, 0))
        return (None if n == 0 or mp == -np.inf else mp, n)

    left: dict[str, list[int]] = {}
    for kk, i in pending:
        left.setdefault(kk, []).append(i)
    for r in design.interventional:
        k = r.name
        if out.learned[k]:
            adj = sorted(left.get(k, ()))
            for i in adj:
                out.support[(k, i)] = _support((k, i))
                out.findings.append(TargetFinding(k, design.variables[i], "detected",
                                                  out.support[(k, i)][0]))
        else:
            adj = sorted(pos[v] for v in declared[k])
            for i in adj:
                out.support[(k, i)] = (None, 0)
                out.findings.append(TargetFinding(k, design.variables[i], "declared", None))
            for i in sorted(left.get(k, ())):
                sup = _support((k, i))
                out.unseparated[(k, i)] = sup
                out.findings.append(TargetFinding(k, design.variables[i], "off-target", sup[0]))
                ptxt = "no test run" if sup[0] is None else f"largest p = {sup[0]:.3g}"
                out.warnings.append(
                    f"regime {k}: {design.variables[i]} is not a declared target, yet no set of "
                    f"its neighbours makes it invariant ({ptxt}); possibly an off-target effect. "
                    f"It stays unlinked to {InterventionNode(k)}; use --targets learn (or "
                    f"known=no for the regime) to let the learner find the targets")
        out.adjacent[k] = tuple(adj)
    return out
