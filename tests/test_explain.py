"""The chain of evidence behind every arrow, its strength and its sentence.

Checks from outside the project: the p-values in the chains of an oracle run are
networkx's d-separation statements (1 for separated, 0 for connected), e.g. for the
collider A -> C <- B: A and B d-separated given nothing, d-connected given C
(Spirtes, Glymour & Scheines 2000); arrows from experiments as in Yang, Katcoff &
Uhler (2018); propagated arrows by Meek's rules (Meek 1995).
"""

from __future__ import annotations

import random

import networkx as nx

from pipeline.design import Design, Regime
from pipeline.learner import DSeparationTester, learn_graph
from pipeline.learner.evidence import strength_of
from pipeline.results.explain import explain_edges
from pipeline.results.tables import edge_records

_d_separated = getattr(nx, "is_d_separator", None) or nx.d_separated


def _tests(step, role):
    return [t for t in step["tests"] if t["role"] == role]


def test_collider_chain_holds_the_separating_and_the_dependence_test():
    dag = nx.DiGraph([("A", "C"), ("B", "C")])
    design = Design(("A", "B", "C"), (Regime("ctrl", reference=True),))
    learned = learn_graph(design, DSeparationTester(dag, design))
    why = explain_edges(learned)
    step = why[("A", "C")].chain[-1]
    assert step["rule"] == "collider" and step["via"] == ["B"]
    (sep,) = _tests(step, "separation")
    (dep,) = _tests(step, "dependence")
    # networkx: A and B separated by the empty set, connected once C is given
    assert _d_separated(dag, {"A"}, {"B"}, set()) and sep["p"] == 1.0 and sep["given"] == []
    assert not _d_separated(dag, {"A"}, {"B"}, {"C"}) and dep["p"] == 0.0
    assert dep["given"] == ["C"]
    assert why[("A", "C")].strength == 300.0
    assert why[("A", "C")].sentence.startswith("A -> C: A and B are unrelated (p = 1)")
    assert "both act on C" in why[("A", "C")].sentence


def test_experiment_arrows_both_ways():
    # B -> A -> C with a knockdown of A: B -> A because the experiment left B unchanged
    # (F -> A <- B), A -> C because it changed C but not given A (F -> A - C, Meek 1).
    dag = nx.DiGraph([("B", "A"), ("A", "C")])
    design = Design(("A", "B", "C"), (Regime("ctrl", reference=True), Regime("kd_A", ("A",))))
    learned = learn_graph(design, DSeparationTester(dag, design))
    why = explain_edges(learned)
    into = why[("B", "A")]
    assert into.chain[-1]["rule"] == "intervention" and into.chain[-1]["via"] == ["kd_A"]
    assert "experiment kd_A, which acts on A, left B unchanged" in into.sentence
    out = why[("A", "C")]
    step = out.chain[-1]
    assert step["rule"] == "intervention"
    (dep,) = _tests(step, "dependence")
    (sep,) = _tests(step, "separation")
    assert dep["p"] == 0.0 and dep["regime"] == "kd_A"  # C changed under kd_A
    assert sep["p"] == 1.0 and "A" in sep["given"]        # ... but not given A
    assert "changed C" in out.sentence and "not once A" in out.sentence
    assert learned.chains[("A", "C")].p_dependence == 0.0


def test_meek_arrows_carry_the_chain_they_follow_from():
    # A -> C <- B, C -> D: C -> D by Meek's rule 1 from A -> C (A, D non-adjacent).
    dag = nx.DiGraph([("A", "C"), ("B", "C"), ("C", "D")])
    design = Design(("A", "B", "C", "D"), (Regime("ctrl", reference=True),))
    learned = learn_graph(design, DSeparationTester(dag, design))
    why = explain_edges(learned)
    e = why[("C", "D")]
    assert e.chain[-1]["rule"] == "meek-1"
    assert e.chain[-1]["from"] in (["A -> C"], ["B -> C"])
    assert e.chain[0]["rule"] == "collider"  # the chain starts at the tests
    assert e.strength == min(why[("A", "C")].strength, why[("B", "C")].strength)
    assert "it follows from" in e.sentence


def test_every_directed_edge_of_random_oracle_runs_is_explained():
    rng = random.Random(12)
    for _ in range(25):
        n = rng.randint(4, 9)
        names = tuple(f"X{i}" for i in range(n))
        dag = nx.DiGraph()
        dag.add_nodes_from(names)
        dag.add_edges_from((names[i], names[j]) for i in range(n) for j in range(i + 1, n)
                           if rng.random() < 0.35)
        regimes = [Regime("ctrl", reference=True)]
        regimes += [Regime(f"r{k}", (rng.choice(names),)) for k in range(rng.randint(0, 2))]
        design = Design(names, tuple(regimes))
        learned = learn_graph(design, DSeparationTester(dag, design))
        records = edge_records(learned, design)
        for r in records:
            assert r.explanation.startswith(f"{r.source} ")
            if r.orientation == "directed":
                assert r.chain and r.chain[-1]["edge"] == f"{r.source} -> {r.target}"
                assert r.strength == 300.0  # a perfect oracle: every p is 0 or 1
                assert r.chain[-1]["rule"] == r.rule
            else:
                assert r.strength is None and r.chain == []


def test_strength_is_minus_log10_of_the_weakest_rejection():
    # common practice: -log10 p, as on a volcano plot
    assert strength_of(0.01) == 2.0
    assert strength_of(0.5) < 1.0 and strength_of(float("nan")) == 0.0
