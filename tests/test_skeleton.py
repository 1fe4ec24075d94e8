"""PC-stable skeleton: checked against networkx d-separation and for order independence.

Sources: Spirtes, Glymour & Scheines (2000) for the PC skeleton under an oracle;
Colombo & Maathuis (2014) for the order independence of PC-stable.
"""

from __future__ import annotations

import hashlib
import random

import networkx as nx
import numpy as np
import pytest

from pipeline.design import Design, Regime
from pipeline.graphs.augmented import augmented_graph
from pipeline.independence.base import TestResults
from pipeline.learner import DSeparationTester
from pipeline.learner.skeleton import learn_skeleton


def random_dag(rng: random.Random, n: int, degree: float) -> nx.DiGraph:
    names = [f"V{i}" for i in range(n)]
    order = names[:]
    rng.shuffle(order)
    dag = nx.DiGraph()
    dag.add_nodes_from(names)
    for i in range(n):
        for j in range(i + 1, n):
            if rng.random() < min(0.5, degree / (n - 1)):
                dag.add_edge(order[i], order[j])
    return dag


def random_design(rng: random.Random, names: list[str]) -> Design:
    regimes = [Regime("ctrl", reference=True)]
    for k in range(rng.randint(0, 3)):
        regimes.append(Regime(f"r{k}", tuple(rng.sample(names, rng.randint(1, 2)))))
    return Design(tuple(names), tuple(regimes))


class HashedTester:
    """Fixed pseudo-random p-values that depend on the variable NAMES only.

    Not faithful to any graph, so order-dependent algorithms give order-dependent
    answers; it counts calls and records every conditioning-set size asked.
    """

    def __init__(self, variables):
        self.variables = variables
        self.calls = 0
        self.sizes = set()

    def _p(self, *parts) -> float:
        h = hashlib.sha256("|".join(parts).encode()).digest()
        return (int.from_bytes(h[:8], "big") + 0.5) / 2.0**64

    def ci(self, x, y, cond):
        self.calls += 1
        self.sizes.add(cond.shape[1])
        v = self.variables
        p = [self._p("ci", *sorted((v[a], v[b])), *sorted(v[s] for s in row))
             for a, b, row in zip(x.tolist(), y.tolist(), cond.tolist(), strict=True)]
        return TestResults(np.zeros(len(p)), np.asarray(p))

    def invariance(self, regime, x, cond):
        self.calls += 1
        v = self.variables
        p = [self._p("inv", regime, v[a], *sorted(v[s] for s in row))
             for a, row in zip(x.tolist(), cond.tolist(), strict=True)]
        return TestResults(np.zeros(len(p)), np.asarray(p))


def test_oracle_skeleton_is_the_true_skeleton_and_sepsets_separate():
    # Spirtes, Glymour & Scheines (2000): PC with an oracle recovers the skeleton;
    # each recorded set d-separates (networkx), given all intervention nodes.
    rng = random.Random(11)
    for _ in range(40):
        n = rng.randint(4, 10)
        dag = random_dag(rng, n, rng.uniform(1.0, 3.0))
        design = random_design(rng, sorted(dag.nodes))
        tester = DSeparationTester(dag, design)
        sk = learn_skeleton(tester, design.variables, alpha=0.01)
        names = design.variables
        learned = {frozenset((names[i], names[j])) for i in range(n) for j in sk.neighbours(i)}
        assert learned == {frozenset(e) for e in dag.edges}
        aug = augmented_graph(dag, design.intervention_targets())
        f_nodes = set(design.intervention_nodes())
        for (i, j), sep in sk.separations.items():
            z = {names[c] for c in sep.cond} | f_nodes
            assert nx.is_d_separator(aug, {names[i]}, {names[j]}, z)
            assert sep.pvalue == 1.0
        for maxp, tests in sk.support.values():
            assert maxp == 0.0 and tests >= 1


def test_pc_stable_is_order_independent():
    # Colombo & Maathuis (2014), Theorem 4: the PC-stable skeleton does not depend on the
    # order of the variables; with largest-p separating sets neither do the sets.
    rng = random.Random(3)
    for trial in range(10):
        names = [f"V{i}" for i in range(9)]
        results = []
        for _ in range(3):
            order = names[:]
            rng.shuffle(order)
            tester = HashedTester(order)
            sk = learn_skeleton(tester, order, alpha=0.85 + 0.01 * trial)
            adj = {frozenset((order[i], order[j])) for i in range(9) for j in sk.neighbours(i)}
            seps = {frozenset((order[i], order[j])): frozenset(order[c] for c in s.cond)
                    for (i, j), s in sk.separations.items()}
            results.append((adj, seps))
        assert results[0] == results[1] == results[2]
        assert results[0][0] and results[0][1]  # some edges kept and some removed


def test_one_batched_call_per_level_and_size_limit():
    rng = random.Random(4)
    names = [f"V{i}" for i in range(10)]
    tester = HashedTester(names)
    sk = learn_skeleton(tester, names, alpha=0.05)
    assert tester.calls == len(sk.tests_per_level)
    assert tester.sizes == set(sk.tests_per_level)
    tester = HashedTester(names)
    sk = learn_skeleton(tester, names, alpha=0.05, max_condition_size=1)
    assert tester.sizes <= {0, 1} and max(sk.tests_per_level) <= 1
    dag = random_dag(rng, 8, 3.0)
    design = random_design(rng, sorted(dag.nodes))
    oracle = DSeparationTester(dag, design)
    sk = learn_skeleton(oracle, design.variables, alpha=0.01, max_condition_size=0)
    assert oracle.calls == 1 and list(sk.tests_per_level) == [0]


def test_largest_p_chooses_the_separating_set_and_kept_p_is_the_largest():
    # Three variables; A-C separated by {} (p=0.3) and {B} (p=0.9): the larger wins.
    table = {("A", "C", ()): 0.3, ("A", "C", ("B",)): 0.9}

    class Table:
        def ci(self, x, y, cond):
            v = ("A", "B", "C")
            p = [table.get((v[a], v[b], tuple(v[s] for s in row)), 0.001 * (1 + len(row)))
                 for a, b, row in zip(x.tolist(), y.tolist(), cond.tolist(), strict=True)]
            return TestResults(np.arange(len(p), dtype=float), np.asarray(p))

        def invariance(self, regime, x, cond):  # pragma: no cover - not asked
            raise AssertionError

    sk = learn_skeleton(Table(), ("A", "B", "C"), alpha=0.05)
    # level 0 removes A-C with {} (p=0.3) already; {B} is only tried at level 1
    assert sk.separations[(0, 2)].cond == () and sk.separations[(0, 2)].pvalue == 0.3
    assert sk.support[(0, 1)] == (pytest.approx(0.002), 2)
    table[("A", "C", ())] = 0.01
    sk = learn_skeleton(Table(), ("A", "B", "C"), alpha=0.05)
    assert sk.separations[(0, 2)].cond == (1,) and sk.separations[(0, 2)].pvalue == 0.9
    assert sk.separations[(0, 2)].level == 1


def test_left_out_regimes_become_notes():
    class LeftOut:
        def ci(self, x, y, cond):
            m = len(x)
            mask = np.zeros((m, 2), dtype=bool)
            mask[:, 1] = True
            return TestResults(np.zeros(m), np.full(m, 0.5), mask)

    sk = learn_skeleton(LeftOut(), ("A", "B"), alpha=0.05, regimes=("ctrl", "ko"))
    assert sk.separations[(0, 1)].notes == (
        "regimes left out (a variable constant within them): ko",)
