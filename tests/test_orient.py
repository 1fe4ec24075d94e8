"""Collider decisions: conflicts settled by strength, the three rules, and the evidence behind
each collider.

Sources: Colombo & Maathuis (2014) for the conservative and majority rules and for
conflicting v-structures; Spirtes, Glymour & Scheines (2000) for the standard rule.
"""

from __future__ import annotations

import hashlib
import random

import networkx as nx
import numpy as np
import pytest

from pipeline.design import Design, Regime
from pipeline.independence.base import TestResults
from pipeline.learner import DSeparationTester, learn_graph
from pipeline.learner.orient import find_colliders
from pipeline.learner.skeleton import learn_skeleton
from pipeline.learner.targets import learn_targets


class RuleTester:
    """CI answers from a list of rules ``(x, y, p, required, forbidden)``.

    For the pair {x, y} the p-value is `p` when the conditioning set holds every variable
    of `required` and none of `forbidden`; otherwise 0 (dependent). Pairs without a rule
    are dependent. Counts calls.
    """

    def __init__(self, variables, rules):
        self.variables = variables
        self.rules = rules
        self.calls = 0

    def ci(self, x, y, cond):
        self.calls += 1
        v = self.variables
        out = []
        for a, b, row in zip(x.tolist(), y.tolist(), cond.tolist(), strict=True):
            s = {v[c] for c in row}
            p = 0.0
            for rx, ry, rp, need, avoid in self.rules:
                if {rx, ry} == {v[a], v[b]} and set(need) <= s and not set(avoid) & s:
                    p = rp
            out.append(p)
        return TestResults(np.zeros(len(out)), np.asarray(out))

    def invariance(self, regime, x, cond):  # pragma: no cover - no interventional regime
        raise AssertionError("no invariance test expected")


def control_only(names):
    return Design(tuple(names), (Regime("ctrl", reference=True),))


@pytest.mark.parametrize("rule", ["standard", "majority", "conservative"])
@pytest.mark.parametrize("weak", ["A-C", "B-D"])
def test_conflicting_colliders_are_settled_by_strength(rule, weak):
    # A - B - C - D with A _||_ C (B not in any separating set) and B _||_ D (C never in
    # one): colliders A -> B <- C and B -> C <- D direct B - C both ways, the conflict of
    # Colombo & Maathuis (2014, section 5). The collider whose dependence test (the ends
    # given the separating set plus the centre) rejects less strongly is set aside.
    names = ("A", "B", "C", "D")
    rules = [("A", "C", 0.5, (), ("B",)), ("B", "D", 0.4, (), ("C",)),
             ("A", "D", 0.6, (), ())]
    # the weak pair is dependent given its centre only at p = 0.03 (alpha 0.05)
    rules.append(("A", "C", 0.03, ("B",), ()) if weak == "A-C" else ("B", "D", 0.03, ("C",), ()))
    learned = learn_graph(control_only(names), RuleTester(names, rules), alpha=0.05,
                          collider_rule=rule)
    g = learned.graph
    if weak == "B-D":  # A -> B <- C kept; C - D is left to the class
        assert sorted(g.directed_edges()) == [("A", "B"), ("C", "B")]
        assert g.has_undirected("C", "D")
        kept, strong, free = "C -> B", ("A", "B", "C"), ("C", "D", "C - D")
        assert learned.p_orientation == {("A", "B"): 0.5, ("C", "B"): 0.5}
    else:  # B -> C <- D kept; A - B is left to the class
        assert sorted(g.directed_edges()) == [("B", "C"), ("D", "C")]
        assert g.has_undirected("A", "B")
        kept, strong, free = "B -> C", ("B", "C", "D"), ("A", "B", "A - B")
        assert learned.p_orientation == {("B", "C"): 0.4, ("D", "C"): 0.4}
    # the collider set aside stays recorded on both its edges
    conflicts = {(c.source, c.target): c for c in learned.conflicts}
    assert {(c.source, c.target, c.kept) for c in learned.conflicts} == {("B", "C", kept), free}
    c = conflicts[("B", "C")]
    assert set(c.colliders) == {("A", "B", "C"), ("B", "C", "D")}
    assert len(c.reasons) == 1 and "set aside" in c.reasons[0] and "stronger" in c.reasons[0]
    assert any("disagree" in w and kept in w for w in learned.warnings)
    ev = learned.colliders[strong]
    assert ev.p_dependence == 0.0 and ev.strength == 300.0
    # a valid essential graph: two DAGs (the free edge either way)
    assert learned.problems == [] and learned.valid
    assert learned.essential.class_size() == 2


def test_majority_and_conservative_rules_differ_on_a_split_vote():
    # A - B - C - D; A and C are separated by {}, {D} and {B, D} but not by {B}: B is in
    # 1 of 3 separating sets. Majority: collider; conservative: ambiguous; standard uses
    # the set recorded by the skeleton ({}): collider (Colombo & Maathuis 2014).
    names = ("A", "B", "C", "D")
    rules = [("A", "C", 0.5, (), ("B",)), ("A", "C", 0.7, ("B", "D"), ()),
             ("B", "D", 0.5, ("C",), ()), ("A", "D", 0.6, (), ())]
    design = control_only(names)
    learned = {r: learn_graph(design, RuleTester(names, rules), alpha=0.05, collider_rule=r)
               for r in ("standard", "majority", "conservative")}
    for r in ("standard", "majority"):
        g = learned[r].graph
        assert g.has_directed("A", "B") and g.has_directed("C", "B"), r
        assert g.has_undirected("C", "D"), r
        assert learned[r].ambiguous == []
    # majority: largest p among the sets without B ({B, D} has B): {} and {D} give 0.5
    assert learned["majority"].p_orientation[("A", "B")] == 0.5
    g = learned["conservative"].graph
    assert g.number_of_edges() == 3 and not list(g.directed_edges())
    assert learned["conservative"].ambiguous == [("A", "B", "C")]
    assert any("could not be decided" in w for w in learned["conservative"].warnings)


def test_majority_asks_each_size_in_one_call():
    names = ("A", "B", "C", "D")
    rules = [("A", "C", 0.5, (), ("B",)), ("B", "D", 0.5, ("C",), ()), ("A", "D", 0.6, (), ())]
    tester = RuleTester(names, rules)
    design = control_only(names)
    sk = learn_skeleton(tester, names, alpha=0.05)
    ts = learn_targets(tester, design, sk.adjacency, alpha=0.05)
    before = tester.calls
    cs = find_colliders(tester, design, sk, ts, alpha=0.05, collider_rule="majority")
    # pairs A-C and B-D: sets of sizes 0, 1, 2 -> one call per size; then the collider
    # A -> B <- C asks A _||_ C | {B}: one more call
    assert len(cs.tests_per_level) == 3
    assert tester.calls - before == 4
    assert cs.colliders == [("A", "B", "C")] and cs.non_colliders == [("B", "C", "D")]
    with pytest.raises(ValueError, match="collider_rule"):
        find_colliders(tester, design, sk, ts, alpha=0.05, collider_rule="vote")


def test_intervention_collider_records_its_p_value():
    # C -> A with a knockdown of A: F -> A <- C orients C -> A (Yang, Katcoff & Uhler
    # 2018); the separating test of F and C is the marginal invariance test (p = 1).
    dag = nx.DiGraph([("C", "A")])
    design = Design(("A", "C"), (Regime("ctrl", reference=True), Regime("kd", ("A",))))
    learned = learn_graph(design, DSeparationTester(dag, design))
    assert list(learned.graph.directed_edges()) == [("C", "A")]
    assert learned.essential.reasons[("C", "A")].rule == "intervention"
    assert learned.p_orientation == {("C", "A"): 1.0}
    removed = {(r.x, r.y): r for r in learned.removed}
    assert removed[("F[kd]", "C")].separating_set == ()


class HashedTester:
    """Fixed pseudo-random p-values that depend on the variable and regime NAMES only."""

    def __init__(self, variables):
        self.variables = variables

    @staticmethod
    def _p(*parts) -> float:
        h = hashlib.sha256("|".join(parts).encode()).digest()
        return (int.from_bytes(h[:8], "big") + 0.5) / 2.0**64

    def ci(self, x, y, cond):
        v = self.variables
        p = [self._p("ci", *sorted((v[a], v[b])), *sorted(v[s] for s in row))
             for a, b, row in zip(x.tolist(), y.tolist(), cond.tolist(), strict=True)]
        return TestResults(np.zeros(len(p)), np.asarray(p))

    def invariance(self, regime, x, cond):
        v = self.variables
        p = [self._p("inv", regime, v[a], *sorted(v[s] for s in row))
             for a, row in zip(x.tolist(), cond.tolist(), strict=True)]
        return TestResults(np.zeros(len(p)), np.asarray(p))


@pytest.mark.parametrize("rule", ["majority", "conservative"])
def test_collider_decisions_do_not_depend_on_variable_order(rule):
    # Colombo & Maathuis (2014), Theorem 5: with PC-stable and the majority or
    # conservative rule the v-structure decisions are order-independent.
    rng = random.Random(8)
    names = [f"V{i}" for i in range(8)]
    oriented = 0
    for trial in range(6):
        seen = []
        for _ in range(3):
            order = names[:]
            rng.shuffle(order)
            design = Design(tuple(order), (Regime("ctrl", reference=True),
                                           Regime("kd", ("V0", "V3")), Regime("oe", ("V5",))))
            learned = learn_graph(design, HashedTester(order), alpha=0.9 + 0.01 * trial,
                                  collider_rule=rule)
            adj = learned.graph.skeleton()
            seen.append(({frozenset(e) for e in adj.edges},
                         {frozenset((c.source, c.target)) for c in learned.conflicts},
                         {(t[1], frozenset((t[0], t[2]))) for t in learned.ambiguous},
                         dict(learned.p_orientation)))
        assert seen[0] == seen[1] == seen[2]
        oriented += len(seen[0][3])
    assert oriented > 0  # some colliders were found
