"""The learner driven by d-separation returns exactly the true interventional essential graph.

Check from outside the project: networkx d-separation answers the tests (METHODS.md
section 8); the expected graph is the essential graph of the true DAG under the targets.
Completeness of PC with Meek's rules: Spirtes, Glymour & Scheines (2000); Meek (1995);
augmented graph: Yang, Katcoff & Uhler (2018), Kocaoglu et al. (2019).
"""

from __future__ import annotations

import random

import networkx as nx
import numpy as np
import pytest

from pipeline.design import Design, Regime
from pipeline.graphs.essential import essential_graph
from pipeline.learner import DSeparationTester, learn_graph


def random_case(rng: random.Random, *, reference_targets: bool = False):
    """A random DAG on 5-12 nodes (expected degree 1-3) and a random target family.

    A control regime is always present; 0-4 interventional regimes act on 1-3 variables.
    """
    n = rng.randint(5, 12)
    names = [f"X{i}" for i in range(n)]
    order = names[:]
    rng.shuffle(order)
    prob = min(0.4, rng.uniform(1.0, 3.0) / (n - 1))
    dag = nx.DiGraph()
    dag.add_nodes_from(names)
    for i in range(n):
        for j in range(i + 1, n):
            if rng.random() < prob:
                dag.add_edge(order[i], order[j])
    ref = tuple(rng.sample(names, 1)) if reference_targets else ()
    regimes = [Regime("ctrl", ref, reference=True)]
    for k in range(rng.randint(0, 4)):
        regimes.append(Regime(f"r{k}", tuple(rng.sample(names, rng.randint(1, 3)))))
    return dag, Design(tuple(names), tuple(regimes))


def withheld(design: Design) -> Design:
    """The same design with every interventional regime's targets unknown."""
    return Design(design.variables, tuple(
        r if r.reference else Regime(r.name, (), known=False) for r in design.regimes))


@pytest.mark.slow
def test_oracle_learner_is_exact_on_random_dags():
    # Spirtes, Glymour & Scheines (2000); Meek (1995): exact under a perfect oracle
    rng = random.Random(20140101)
    multi = 0
    for _ in range(200):
        dag, design = random_case(rng)
        truth = essential_graph(dag, design.intervention_targets())
        learned = learn_graph(design, DSeparationTester(dag, design))
        assert learned.graph == truth.graph
        assert learned.problems == [] and learned.warnings == [] and learned.conflicts == []
        assert {k: set(v) for k, v in learned.targets.items()} == {
            k: set(v) for k, v in design.intervention_targets().items()}
        multi += any(len(r.targets) > 1 for r in design.interventional)
    assert multi > 50  # the family really has multi-target regimes


@pytest.mark.slow
def test_every_collider_rule_is_exact_under_the_oracle():
    # Colombo & Maathuis (2014): under an oracle all three rules give the PC output
    rng = random.Random(7)
    for _ in range(40):
        dag, design = random_case(rng)
        truth = essential_graph(dag, design.intervention_targets())
        tester = DSeparationTester(dag, design)  # one cache for the three runs
        for rule in ("standard", "conservative", "majority"):
            learned = learn_graph(design, tester, collider_rule=rule)
            assert learned.graph == truth.graph, rule
            assert learned.ambiguous == []


@pytest.mark.slow
def test_learn_mode_detects_the_true_targets():
    # In the augmented graph F_k is adjacent exactly to the targets of regime k
    # (Yang, Katcoff & Uhler 2018), so learned targets equal the true ones.
    rng = random.Random(99)
    for n in range(40):
        dag, design = random_case(rng)
        tester = DSeparationTester(dag, design)  # answers from the true targets
        hidden = withheld(design) if n % 2 else design
        learned = learn_graph(hidden, tester, targets="learn" if n % 2 == 0 else "declared")
        truth = essential_graph(dag, design.intervention_targets())
        assert learned.graph == truth.graph
        want = {k: set(v) for k, v in design.intervention_targets().items()}
        assert {k: set(v) for k, v in learned.targets.items()} == want
        detected = {(f.regime, f.variable) for f in learned.findings if f.status == "detected"}
        assert detected == {(k, v) for k, vs in want.items() for v in vs}


def test_reference_with_targets_uses_the_symmetric_difference():
    # METHODS.md section 1: F_k points at T_k symmetric-difference T_ref
    rng = random.Random(5)
    for _ in range(15):
        dag, design = random_case(rng, reference_targets=True)
        truth = essential_graph(dag, design.intervention_targets())
        learned = learn_graph(design, DSeparationTester(dag, design))
        assert learned.graph == truth.graph


def test_declared_off_target_is_reported():
    # Chain A -> B -> C; the regime really acts on A and C but declares only A.
    dag = nx.DiGraph([("A", "B"), ("B", "C")])
    truth = Design(("A", "B", "C"), (Regime("ctrl", reference=True), Regime("drug", ("A", "C"))))
    declared = Design(truth.variables, (Regime("ctrl", reference=True), Regime("drug", ("A",))))
    learned = learn_graph(declared, DSeparationTester(dag, truth))
    off = [f for f in learned.findings if f.status == "off-target"]
    assert [(f.regime, f.variable) for f in off] == [("drug", "C")]
    assert learned.targets == {"drug": ("A",)}
    assert any("off-target" in w and "C" in w for w in learned.warnings)
    # learn mode finds both targets instead
    learned = learn_graph(declared, DSeparationTester(dag, truth), targets="learn")
    assert learned.targets == {"drug": ("A", "C")}
    assert sorted(learned.graph.directed_edges()) == [("A", "B"), ("B", "C")]


def test_evidence_of_an_oracle_run():
    # A -> C <- B (a collider), kd on A: every decision carries its evidence.
    dag = nx.DiGraph([("A", "C"), ("B", "C")])
    design = Design(("A", "B", "C"), (Regime("ctrl", reference=True), Regime("kd", ("A",))))
    tester = DSeparationTester(dag, design)
    learned = learn_graph(design, tester)
    removed = {(r.x, r.y): r for r in learned.removed}
    assert removed[("A", "B")].separating_set == () and removed[("A", "B")].pvalue == 1.0
    assert removed[("F[kd]", "B")].regime == "kd"
    kept = {(k.x, k.y): k for k in learned.kept}
    assert kept[("A", "C")].max_pvalue == 0.0 and kept[("A", "C")].tests >= 2
    assert kept[("F[kd]", "A")].max_pvalue is None and kept[("F[kd]", "A")].tests == 0
    assert learned.p_orientation == {("A", "C"): 1.0, ("B", "C"): 1.0}
    assert learned.essential.reasons[("A", "C")].rule == "collider"
    assert sum(learned.tests_per_level.values()) == tester.tests
    assert "A -> C" in learned.summary()


@pytest.mark.parametrize("kwargs, word", [
    ({"alpha": 0.0}, "alpha"), ({"alpha": 1.5}, "alpha"), ({"alpha": True}, "alpha"),
    ({"max_condition_size": -1}, "max_condition_size"),
    ({"max_condition_size": 1.5}, "max_condition_size"),
    ({"targets": "guess"}, "targets"), ({"collider_rule": "vote"}, "collider_rule"),
    ({"progress": 3}, "progress"),
])
def test_bad_arguments_are_refused_with_a_plain_sentence(kwargs, word):
    dag = nx.DiGraph([("A", "B")])
    design = Design(("A", "B"), (Regime("ctrl", reference=True),))
    with pytest.raises(ValueError, match=word):
        learn_graph(design, DSeparationTester(dag, design), **kwargs)


def test_progress_reports_every_stage():
    dag = nx.DiGraph([("A", "B"), ("B", "C")])
    design = Design(("A", "B", "C"), (Regime("ctrl", reference=True), Regime("kd", ("B",))))
    seen = []
    learn_graph(design, DSeparationTester(dag, design),
                progress=lambda label, done, total: seen.append((label, done, total)))
    labels = {s[0] for s in seen}
    assert {"level 0", "level 1", "targets, level 0"} <= labels
    assert all(0 < done <= total for _, done, total in seen)


def test_oracle_answers_as_the_data_would():
    # METHODS.md section 8: ci conditions on every F-node; invariance on the others
    dag = nx.DiGraph([("A", "B")])
    design = Design(("A", "B"), (Regime("ctrl", reference=True), Regime("kd", ("A",)),
                                 Regime("oe", ("B",))))
    t = DSeparationTester(dag, design)
    empty = np.zeros((1, 0), dtype=int)
    assert t.ci(np.array([0]), np.array([1]), empty).pvalue.tolist() == [0.0]
    # F[kd] -> A -> B: B is not invariant under kd marginally, but is given A
    assert t.invariance("kd", np.array([1]), empty).pvalue.tolist() == [0.0]
    assert t.invariance("kd", np.array([1]), np.array([[0]])).pvalue.tolist() == [1.0]
    assert t.invariance("oe", np.array([0]), empty).pvalue.tolist() == [1.0]
    assert t.calls == 4 and t.tests == 4
    with pytest.raises(ValueError, match="regime"):
        t.invariance("ctrl", np.array([0]), empty)
