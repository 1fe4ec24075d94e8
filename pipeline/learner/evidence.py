"""The evidence behind each decision of the learner, and the learner's result.

Every decision the PC-style learner takes keeps the numbers behind it: the test that
removed an adjacency (`RemovedPair`), the tests that failed to remove one (`KeptPair`),
what the intervention nodes were found to act on (`TargetFinding`), and the edges that
colliders direct both ways (`Conflict`). `Learned` gathers them with the learned
interventional essential graph.

An intervention node is named by the string of its `InterventionNode` (``F[regime]``);
the fields that may hold one carry the regime name beside it.

References
----------
.. [1] Spirtes, P., Glymour, C. & Scheines, R. (2000). *Causation, Prediction, and
   Search*, 2nd ed. MIT Press.
.. [2] Colombo, D. & Maathuis, M. H. (2014). Order-independent constraint-based causal
   structure learning. *Journal of Machine Learning Research* 15, 3741-3782.
"""

from __future__ import annotations

import math
from dataclasses import field
from typing import Any

from pipeline.graphs.essential import EssentialGraph
from pipeline.graphs.pdag import PDAG, InterventionNode
from pipeline.records import record

__all__ = ["RemovedPair", "KeptPair", "TargetFinding", "Conflict", "ColliderEvidence",
           "ChainEvidence", "Learned", "strength_of"]

#: The largest strength reported: -log10 of the smallest p a double holds, rounded.
MAX_STRENGTH = 300.0


def strength_of(p: float | None) -> float:
    """The strength ``-log10 p`` of a p-value that must be small, capped at 300.

    None (an adjacency declared, not tested) counts as p = 0.

    >>> strength_of(1e-5), strength_of(None), strength_of(1.0)
    (5.0, 300.0, 0.0)
    """
    if p is None or p <= 0.0:
        return MAX_STRENGTH
    if p != p:  # NaN: no evidence
        return 0.0
    return min(MAX_STRENGTH, max(0.0, -math.log10(min(1.0, float(p)))))


@record(frozen=True)
class RemovedPair:
    """A pair found non-adjacent, with the test that separated it.

    `x` may be an intervention node (``F[regime]``); then `regime` names its regime.
    `pvalue` and `statistic` are those of the test of ``x _||_ y | separating_set``;
    `level` is the size of the separating set; `notes` say, e.g., which regimes the
    test left out.
    """

    x: str
    y: str
    separating_set: tuple[str, ...]
    pvalue: float
    statistic: float
    level: int
    notes: tuple[str, ...] = ()
    regime: str | None = None


@record(frozen=True)
class KeptPair:
    """An adjacency that survived every test: `max_pvalue` is the largest p of them.

    `max_pvalue` is None when no test touched the pair (a declared intervention edge).
    """

    x: str
    y: str
    max_pvalue: float | None
    tests: int
    regime: str | None = None


@record(frozen=True)
class TargetFinding:
    """What the learner concluded about regime `regime` acting on `variable`.

    `status` is ``"declared"`` (taken from the regimes file), ``"detected"`` (an
    adjacency of the intervention node found by invariance tests) or ``"off-target"``
    (not declared, yet no conditioning set made it invariant). `pvalue` is the largest p
    of the invariance tests that kept the pair dependent (None for a declared target,
    which is not tested here); `separating_set` is empty for all three statuses and kept
    for symmetry with `RemovedPair`.
    """

    regime: str
    variable: str
    status: str
    pvalue: float | None
    separating_set: tuple[str, ...] = ()


@record(frozen=True)
class Conflict:
    """An edge on which decisions of the learner disagree, and how it was settled.

    `colliders` holds the unshielded triples ``(a, c, b)`` behind each direction: those
    orienting ``source -> target`` first, then those orienting ``target -> source``.
    `kept` is what the result shows (``"A -> B"``, ``"B -> A"`` or ``"A - B"``);
    `reasons` are plain sentences, one per decision set aside.
    """

    source: str
    target: str
    colliders: tuple[tuple[str, str, str], ...]
    kept: str = ""
    reasons: tuple[str, ...] = ()


@record(frozen=True)
class ColliderEvidence:
    """The tests behind a collider ``a -> c <- b`` (``b`` may be an intervention node).

    The collider holds when `a` and `b` are separated by a set without `c`
    (`p_separation` large, set `separating_set`), become dependent once `c` joins that
    set (`p_dependence` small), and `c` stays adjacent to both (`p_adjacency`: the
    largest p of the tests that kept ``a - c`` and ``b - c``; None for an experiment's
    declared target). `share` is the fraction of separating sets holding `c`. For an
    intervention node `b` of regime `regime`, the tests are invariance tests of `a`.
    """

    a: str
    c: str
    b: str
    separating_set: tuple[str, ...]
    p_separation: float
    p_dependence: float | None
    p_adjacency: tuple[float | None, float | None]
    share: float = 0.0
    regime: str | None = None

    @property
    def weakest_p(self) -> float:
        """The largest p among the tests that must reject (dependence and adjacencies)."""
        ps = [self.p_dependence, *self.p_adjacency]
        return max(0.0 if p is None else float(p) for p in ps)

    @property
    def strength(self) -> float:
        """``-log10`` of `weakest_p` (see `strength_of`)."""
        return strength_of(self.weakest_p)


@record(frozen=True)
class ChainEvidence:
    """The tests behind ``x -> y`` when an experiment on `x` reaches `y` through `x`.

    ``F -> x - y`` with ``F`` (regime `regime`) and `y` separated by a set holding `x`
    (`p_separation`, `separating_set`): `y` changed under the experiment
    (`p_dependence`, the invariance test of `y` alone) but not once `x` is accounted for.
    """

    x: str
    y: str
    regime: str
    separating_set: tuple[str, ...]
    p_separation: float | None
    p_dependence: float | None


@record
class Learned:
    """The learned interventional essential graph with the evidence of every decision.

    Attributes
    ----------
    essential : EssentialGraph
        The graph (``essential.graph``, measured variables only), the augmented graph and
        the reason of each directed edge.
    removed : list of RemovedPair
        Every non-adjacent pair with the test that separated it.
    kept : list of KeptPair
        Every adjacency with the largest p-value of the tests that kept it.
    targets : dict
        Regime name -> the measured variables adjacent to its intervention node.
    findings : list of TargetFinding
        Declared, detected and off-target actions of each regime.
    conflicts : list of Conflict
        Edges on which collider decisions disagree, with the direction kept.
    colliders : dict
        ``(a, c, b)`` -> `ColliderEvidence` of every collider the tests decided.
    chains : dict
        ``(x, y)`` -> `ChainEvidence` of every arrow an experiment on `x` directs.
    resolution : dict
        How conflicts were settled: ``stage`` (``closure``, ``unblocked`` or ``repair``),
        ``accepted`` and ``set_aside`` (collider counts), ``changed`` (edges the repair
        changed), ``forced`` (colliders the tests rejected that the result holds).
    ambiguous : list of tuple
        Unshielded triples ``(a, c, b)`` whose collider status the rule could not decide.
    p_orientation : dict
        ``(u, v)`` -> p-value of the separating test behind the collider that directed it.
    target_verdicts : list of TargetVerdict
        The check of each declared target, marginally and given its neighbours
        (`pipeline.learner.targets.verify_declared_targets`).
    tests_per_level : dict
        Conditioning-set size -> number of tests asked (all kinds).
    warnings, problems : list of str
        Things to tell the user; `problems` says why the result is not a valid essential
        graph (empty when it is).
    settings : dict
        The options the learner ran with.
    """

    essential: EssentialGraph
    removed: list[RemovedPair] = field(default_factory=list)
    kept: list[KeptPair] = field(default_factory=list)
    targets: dict[str, tuple[str, ...]] = field(default_factory=dict)
    findings: list[TargetFinding] = field(default_factory=list)
    conflicts: list[Conflict] = field(default_factory=list)
    colliders: dict[tuple[str, str, str], ColliderEvidence] = field(default_factory=dict)
    chains: dict[tuple[str, str], ChainEvidence] = field(default_factory=dict)
    resolution: dict[str, Any] = field(default_factory=dict)
    ambiguous: list[tuple[str, str, str]] = field(default_factory=list)
    p_orientation: dict[tuple[str, str], float] = field(default_factory=dict)
    tests_per_level: dict[int, int] = field(default_factory=dict)
    target_verdicts: list[Any] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    problems: list[str] = field(default_factory=list)
    settings: dict[str, Any] = field(default_factory=dict)

    @property
    def graph(self) -> PDAG:
        """The learned essential graph over the measured variables (a PDAG)."""
        return self.essential.graph

    @property
    def valid(self) -> bool:
        """True when the result is a valid essential graph."""
        return not self.problems

    def p_adjacency(self, u: str, v: str) -> float | None:
        """The largest p-value of the tests that kept ``u - v`` (None if none did)."""
        key = frozenset((u, v))
        for k in self.kept:
            if frozenset((k.x, k.y)) == key:
                return k.max_pvalue
        return None

    def summary(self) -> str:
        """A short plain-text account of the result."""
        g = self.graph
        directed = list(g.directed_edges())
        undirected = list(g.undirected_edges())
        lines = [
            "Learned interventional essential graph",
            f"  variables: {len(g)}   edges: {len(directed) + len(undirected)} "
            f"({len(directed)} directed, {len(undirected)} undirected)",
            f"  pairs removed: {len(self.removed)}   tests: {sum(self.tests_per_level.values())}",
            f"  settings: {self.settings}",
        ]
        for u, v in directed:
            r = self.essential.reasons.get((u, v))
            rule = r.rule if r is not None else "none"
            p = self.p_orientation.get((u, v))
            ptxt = f"  p_orientation={p:.3g}" if p is not None else ""
            lines.append(f"  {u} -> {v}  [{rule}]{ptxt}")
        for u, v in undirected:
            lines.append(f"  {u} - {v}")
        for regime, tg in self.targets.items():
            lines.append(f"  {InterventionNode(regime)} -> {', '.join(tg) or '(nothing)'}")
        lines.extend(f"  warning: {w}" for w in self.warnings)
        lines.extend(f"  problem: {p}" for p in self.problems)
        return "\n".join(lines)
