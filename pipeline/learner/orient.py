"""Colliders of the augmented skeleton, decided order-independently.

An unshielded triple ``A - C - B`` has ``A`` and ``B`` non-adjacent; it is a *collider*
(v-structure ``A -> C <- B``) iff ``C`` is in no separating set of ``A`` and ``B``
[1]_. Here ``A`` and ``B`` are measured variables or intervention nodes and ``C`` is
measured; a triple with an intervention node ``F_k`` orients ``Y -> C`` for the target
``C`` of ``F_k`` [3]_, [4]_. Two intervention nodes are never adjacent and their
triples orient nothing new (edges out of intervention nodes are directed anyway).

The separating set found by the skeleton search depends on which sets were tried, so
three rules are offered (`collider_rule`):

standard
    ``C`` not in the separating set recorded for ``A, B`` [1]_.
majority (default)
    Test ``A _||_ B | S`` for every subset ``S`` of ``adj(A)`` and of ``adj(B)`` in the
    final skeleton (measured variables only, sizes up to `max_condition_size`); among the
    separating ones (``p > alpha``), ``C`` in fewer than half: collider; in more than half:
    not; exactly half: ambiguous [2]_.
conservative
    Same tests; collider iff ``C`` is in none, non-collider iff in all, else ambiguous
    [2]_.

When no tested subset separates the pair, the set recorded by the skeleton stands in.
A pair of declared mode with no separating set (an off-target finding) leaves its
triples undecided. Meek's rules are not allowed to orient an edge of an ambiguous or
undecided triple that no collider orients (ambiguous triples must not serve the
orientation rules [2]_; blocking their edges is the conservative way to say so).

Each collider keeps its evidence (`ColliderEvidence`): the separating set without ``C``
of largest p (the standard rule: the recorded set), the test of ``A _||_ B`` given that
set plus ``C`` (conditioning on a common effect makes its causes dependent [1]_, so this
p is small for a true collider) and the tests that kept ``A - C`` and ``B - C``. Its
*strength* is ``-log10`` of the largest p among those that must reject. Colliders that
contradict each other (an edge directed both ways, a cycle, a collider the tests rejected)
are settled by strength in `pipeline.graphs.resolve`, not here.

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
"""

from __future__ import annotations

from collections.abc import Hashable
from dataclasses import field
from itertools import combinations

import numpy as np

from pipeline.design import Design
from pipeline.graphs.pdag import PDAG, InterventionNode
from pipeline.independence.base import Tester
from pipeline.learner.evidence import ColliderEvidence
from pipeline.learner.skeleton import Progress, Skeleton, run_batched, subsets_up_to
from pipeline.learner.targets import TargetSearch
from pipeline.options import COLLIDER_RULES
from pipeline.records import record

__all__ = ["COLLIDER_RULES", "ColliderSearch", "augmented_skeleton", "find_colliders"]


Node = Hashable


@record
class ColliderSearch:
    """The decision on every unshielded triple, in graph-node terms.

    `colliders` are triples ``(a, c, b)`` of augmented-graph nodes (names, or
    `InterventionNode`) decided colliders, each with its `ColliderEvidence` in
    `evidence`; `non_colliders` the triples decided otherwise; `ambiguous` the undecided
    ones (as names), whose edges are in `keep_undirected` unless a collider directs them.
    The colliders may conflict: `pipeline.graphs.resolve` settles that.
    """

    colliders: list[tuple[Node, Node, Node]] = field(default_factory=list)
    evidence: dict[tuple[Node, Node, Node], ColliderEvidence] = field(default_factory=dict)
    non_colliders: list[tuple[Node, Node, Node]] = field(default_factory=list)
    keep_undirected: set[frozenset] = field(default_factory=set)
    ambiguous: list[tuple[str, str, str]] = field(default_factory=list)
    tests_per_level: dict[int, int] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)


def augmented_skeleton(design: Design, skeleton: Skeleton, targets: TargetSearch) -> PDAG:
    """The augmented skeleton: measured edges undirected, ``F_k -> target`` directed."""
    names = design.variables
    g = PDAG(list(names) + design.intervention_nodes())
    p = len(names)
    for i in range(p):
        for j in skeleton.neighbours(i):
            if i < j:
                g.add_undirected(names[i], names[j])
    for r in design.interventional:
        for i in targets.adjacent.get(r.name, ()):
            g.add_directed(InterventionNode(r.name), names[i])
    return g


def find_colliders(
    tester: Tester,
    design: Design,
    skeleton: Skeleton,
    targets: TargetSearch,
    *,
    alpha: float,
    max_condition_size: int | None = None,
    collider_rule: str = "majority",
    progress: Progress | None = None,
) -> ColliderSearch:
    """Decide every unshielded triple of the augmented skeleton.

    Parameters
    ----------
    tester : Tester
        Asked again by the majority and conservative rules, and for the dependence
        test of each collider (one test per collider).
    design : Design
        Variables and regimes.
    skeleton : Skeleton
        The measured skeleton with its separating sets.
    targets : TargetSearch
        Adjacencies and separating sets of the intervention nodes.
    alpha : float
        A set separates when its test gives ``p > alpha``.
    max_condition_size : int or None
        Largest conditioning set tried by the majority and conservative rules.
    collider_rule : {"majority", "conservative", "standard"}
        How a triple is decided (see the module docstring).
    progress : callable or None
        Called as ``progress("orientation, level l", done, total)``.

    Returns
    -------
    ColliderSearch

    Raises
    ------
    ValueError
        If `collider_rule` is not one of `COLLIDER_RULES`.
    """
    if collider_rule not in COLLIDER_RULES:
        raise ValueError(f"collider_rule should be one of {', '.join(COLLIDER_RULES)}; "
                         f"got {collider_rule!r}")
    names = design.variables
    p = len(names)
    fregimes = [r.name for r in design.interventional]
    out = ColliderSearch()

    # Step 1: adjacencies over node ids (0..p-1 measured, p+r intervention nodes).
    adj: list[set[int]] = [set(skeleton.neighbours(i)) for i in range(p)]
    adj.extend(set() for _ in fregimes)
    for r, k in enumerate(fregimes):
        for i in targets.adjacent.get(k, ()):
            adj[p + r].add(i)
            adj[i].add(p + r)

    def node(n: int) -> Node:
        return names[n] if n < p else InterventionNode(fregimes[n - p])

    # Step 2: unshielded triples a - c - b (c measured, a < b, not both intervention nodes).
    triples: list[tuple[int, int, int]] = []
    for c in range(p):
        for a, b in combinations(sorted(adj[c]), 2):
            if b in adj[a] or a >= p:
                continue
            triples.append((a, c, b))
    pairs = sorted({(a, b) for a, _, b in triples})

    # Step 3: the separating sets to decide from, per pair: (set, p) with p > alpha.
    def recorded(a: int, b: int):
        if b < p:
            return skeleton.separations.get((a, b))
        return targets.separations.get((fregimes[b - p], a))

    pools: dict[tuple[int, int], list[tuple[tuple[int, ...], float]]] = {}
    if collider_rule == "standard":
        for a, b in pairs:
            s = recorded(a, b)
            pools[(a, b)] = [] if s is None else [(s.cond, s.pvalue)]
    else:
        pools = _separating_subsets(tester, pairs, adj, p, fregimes, alpha=alpha,
                                    max_condition_size=max_condition_size,
                                    progress=progress, counts=out.tests_per_level)
        for a, b in pairs:
            s = recorded(a, b)
            if not pools[(a, b)] and s is not None:
                pools[(a, b)] = [(s.cond, s.pvalue)]

    # Step 4: decide each triple; a collider keeps the best separating set without c.
    undecided: list[tuple[int, int, int]] = []
    chosen: list[tuple[tuple[int, int, int], tuple[int, ...], float, float]] = []
    for a, c, b in triples:
        pool = pools[(a, b)]
        if not pool:
            undecided.append((a, c, b))
            continue
        inside = sum(c in s for s, _ in pool)
        share = inside / len(pool)
        if collider_rule == "majority":
            verdict = "collider" if share < 0.5 else "non" if share > 0.5 else "ambiguous"
        else:  # standard (one set) and conservative
            verdict = "collider" if inside == 0 else "non" if inside == len(pool) else "ambiguous"
        if verdict == "ambiguous":
            undecided.append((a, c, b))
        elif verdict == "non":
            out.non_colliders.append((node(a), node(c), node(b)))
        else:
            s_best, p_best = max(((s, pv) for s, pv in pool if c not in s),
                                 key=lambda sp: sp[1])
            chosen.append(((a, c, b), s_best, p_best, share))

    # Step 5: the dependence each collider needs: a and b given the set plus c.
    p_dep = _dependence_tests(tester, [(a, b, tuple(sorted((*s, c)))) for (a, c, b), s, _, _
                                       in chosen], p, fregimes, progress=progress,
                              counts=out.tests_per_level)

    def adjacency_p(end: int, c: int) -> float | None:
        if end < p:
            return skeleton.support.get((min(end, c), max(end, c)), (None, 0))[0]
        return targets.support.get((fregimes[end - p], c), (None, 0))[0]

    for ((a, c, b), s, pv, share), pd in zip(chosen, p_dep, strict=True):
        t = (node(a), node(c), node(b))
        out.colliders.append(t)
        out.evidence[t] = ColliderEvidence(
            a=names[a], c=names[c], b=str(node(b)),
            separating_set=tuple(names[i] for i in s), p_separation=pv, p_dependence=pd,
            p_adjacency=(adjacency_p(a, c), adjacency_p(b, c)), share=share,
            regime=fregimes[b - p] if b >= p else None)

    # Step 6: the edges of undecided triples stay out of Meek's rules if they can.
    def label(t: tuple[int, int, int]) -> tuple[str, str, str]:
        return tuple(str(node(n)) for n in t)  # type: ignore[return-value]

    directed = {(end, c) for (a, c, b), *_ in chosen for end in (a, b) if end < p}
    for t in undecided:
        a, c, b = t
        out.ambiguous.append(label(t))
        for end in (a, b):
            if end < p and (end, c) not in directed and (c, end) not in directed:
                out.keep_undirected.add(frozenset((names[end], names[c])))
    if undecided:
        shown = ", ".join(" - ".join(label(t)) for t in undecided[:5])
        more = f" and {len(undecided) - 5} more" if len(undecided) > 5 else ""
        out.warnings.append(
            f"{len(undecided)} unshielded triple(s) could not be decided as collider or not "
            f"({shown}{more}); their edges are directed only where a consistent graph "
            f"requires it")
    return out


def _dependence_tests(tester: Tester, rows: list[tuple[int, int, tuple[int, ...]]], p: int,
                      fregimes: list[str], *, progress: Progress | None,
                      counts: dict[int, int]) -> list[float | None]:
    """p of ``a _||_ b | S u {c}`` for each row ``(a, b, S u {c})``, batched by kind and size.

    `b` may be an intervention node (position ``p + r``): then the test is the invariance
    test of `a` in that regime.
    """
    out: list[float | None] = [None] * len(rows)
    groups: dict[tuple[str, int], list[int]] = {}
    for n, (_a, b, cond) in enumerate(rows):
        kind = "ci" if b < p else fregimes[b - p]
        groups.setdefault((kind, len(cond)), []).append(n)
    for (kind, size), idx in sorted(groups.items(), key=lambda kv: (kv[0][1], kv[0][0])):
        x = np.asarray([rows[n][0] for n in idx], dtype=np.intp)
        y = np.asarray([rows[n][1] for n in idx], dtype=np.intp)
        cond = np.asarray([rows[n][2] for n in idx], dtype=np.intp).reshape(len(idx), size)
        if kind == "ci":
            res = run_batched(lambda a, b, c: tester.ci(a, b, c), x, y, cond,
                              label=f"orientation, level {size}", progress=progress)
        else:
            res = run_batched(lambda a, _b, c, k=kind: tester.invariance(k, a, c), x, x, cond,
                              label=f"orientation, level {size}", progress=progress)
        counts[size] = counts.get(size, 0) + len(idx)
        for n, pv in zip(idx, np.asarray(res.pvalue, dtype=float).tolist(), strict=True):
            out[n] = None if pv != pv else pv
    return out


def _separating_subsets(tester: Tester, pairs: list[tuple[int, int]], adj: list[set[int]],
                        p: int, fregimes: list[str], *, alpha: float,
                        max_condition_size: int | None, progress: Progress | None,
                        counts: dict[int, int]) -> dict[tuple[int, int], list]:
    """Test each pair given every subset of either end's measured adjacencies.

    Returns, per pair, the ``(set, p)`` of the subsets with ``p > alpha``. Tests are
    batched by kind (CI or invariance of one regime) and conditioning-set size.
    """
    # rows[(kind, size)] = (pair list, set list); kind is "ci" or a regime name
    rows: dict[tuple[str, int], tuple[list[tuple[int, int]], list[tuple[int, ...]]]] = {}
    for a, b in pairs:
        sets = dict.fromkeys(subsets_up_to([v for v in adj[a] if v < p and v != b],
                                           max_condition_size))
        sets.update(dict.fromkeys(subsets_up_to([v for v in adj[b] if v < p and v != a],
                                                max_condition_size)))
        kind = "ci" if b < p else fregimes[b - p]
        for s in sets:
            ps, ss = rows.setdefault((kind, len(s)), ([], []))
            ps.append((a, b))
            ss.append(s)
    found: dict[tuple[int, int], list] = {pr: [] for pr in pairs}
    for (kind, size), (ps, ss) in sorted(rows.items(), key=lambda kv: (kv[0][1], kv[0][0])):
        arr = np.asarray(ps, dtype=np.intp)
        cond = np.asarray(ss, dtype=np.intp).reshape(len(ss), size)
        if kind == "ci":
            res = run_batched(lambda x, y, c: tester.ci(x, y, c), arr[:, 0], arr[:, 1], cond,
                              label=f"orientation, level {size}", progress=progress)
        else:
            res = run_batched(lambda x, _y, c, k=kind: tester.invariance(k, x, c),
                              arr[:, 0], arr[:, 0], cond,
                              label=f"orientation, level {size}", progress=progress)
        counts[size] = counts.get(size, 0) + len(ps)
        pv = np.asarray(res.pvalue, dtype=float)
        for r in np.flatnonzero(pv > alpha):
            found[ps[r]].append((ss[r], float(pv[r])))
    return found
