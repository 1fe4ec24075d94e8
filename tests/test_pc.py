"""The learner on noisy data: always a valid essential graph, and warnings in plain words.

Checks from outside the project: validity of an essential graph by the characterization
of Andersson, Madigan & Perlman (1997) and Hauser & Buhlmann (2012) (chain graph, chordal
chain components, no induced a -> b - c), class sizes >= 1 by clique-picking (Wienobst,
Bannach & Liskiewicz 2021) against a brute-force count on small components; d-separation
in networkx for the designed scenarios.
"""

from __future__ import annotations

import itertools

import networkx as nx
import pytest
from simulated import in_memory

from pipeline.design import Design, Regime
from pipeline.graphs.validity import essential_graph_problems
from pipeline.independence.gaussian import GaussianTester
from pipeline.learner import DSeparationTester, learn_graph
from pipeline.simulation import simulate


def _brute_force_size(g) -> int:
    """Orientations of the undirected edges that are acyclic and add no v-structure."""
    lines = list(g.undirected_edges())
    skel = g.skeleton()

    def vs(d):
        return {(c, frozenset(p)) for c in d for p in itertools.combinations(d.predecessors(c), 2)
                if not skel.has_edge(*p)}

    base, n = vs(g.directed_graph()), 0
    for bits in itertools.product((0, 1), repeat=len(lines)):
        d = g.directed_graph()
        d.add_edges_from((u, v) if b else (v, u) for (u, v), b in zip(lines, bits, strict=True))
        n += nx.is_directed_acyclic_graph(d) and vs(d) == base
    return n


@pytest.mark.parametrize("rule", ["majority", "conservative", "standard"])
def test_noisy_runs_always_give_a_valid_class(rule):
    # 50 rows per regime, 10-15 variables, expected degree 3: many collider conflicts.
    # Every result must be a valid essential graph with at least one DAG in its class.
    stages, conflicts = set(), 0
    for seed in range(8):
        for nodes in (10, 15):
            sim = simulate(nodes=nodes, degree=3.0, regimes=4, samples=50, seed=seed)
            design, m = in_memory(sim)
            learned = learn_graph(design, GaussianTester(m, design), alpha=0.01,
                                  collider_rule=rule)
            assert learned.problems == []
            assert essential_graph_problems(learned.essential.augmented) == []
            size = learned.essential.class_size()
            assert size >= 1
            if len(list(learned.graph.undirected_edges())) <= 12:
                assert size == _brute_force_size(learned.graph)
            stages.add(learned.resolution["stage"])
            conflicts += len(learned.conflicts)
    assert conflicts > 0  # the data did disagree
    assert "closure" in stages


def test_every_conflict_names_the_decision_set_aside():
    sim = simulate(nodes=12, degree=3.0, regimes=4, samples=50, seed=4)
    design, m = in_memory(sim)
    learned = learn_graph(design, GaussianTester(m, design))
    assert learned.conflicts
    g = learned.graph
    for c in learned.conflicts:
        assert c.reasons
        assert g.adjacent(c.source, c.target)
        assert c.kept in (f"{c.source} -> {c.target}", f"{c.target} -> {c.source}",
                          f"{c.source} - {c.target}")
    assert any("disagree" in w for w in learned.warnings)


def test_no_arrow_from_an_experiment_is_said_in_plain_words():
    # X -> Y -> Z. The regime declares X only but really moves every variable (as when the
    # reference differs from the experiments): nothing stays put, so F - X - Y decides
    # nothing and no arrow rests on the experiment. A valid graph still needs X - Y
    # directed (F -> X - Y with F, Y apart): it is, and the edge is listed as changed.
    dag = nx.DiGraph([("X", "Y"), ("Y", "Z")])
    truth = Design(("X", "Y", "Z"), (Regime("ctrl", reference=True),
                                     Regime("kd_X", ("X", "Y", "Z"))))
    declared = Design(truth.variables, (Regime("ctrl", reference=True), Regime("kd_X", ("X",))))
    learned = learn_graph(declared, DSeparationTester(dag, truth))
    assert learned.resolution["stage"] == "unblocked"
    assert ("X", "Y") in learned.resolution["changed"]
    assert learned.chains[("X", "Y")].p_separation is None  # nothing separated F and Y
    said = [w for w in learned.warnings if w.startswith("no arrow comes from an experiment")]
    assert len(said) == 1 and "X - Y" in said[0]
    assert "collider" not in said[0] and "essential" not in said[0]
    # with the true targets the experiment orients X -> Y -> Z and nothing is said
    learned = learn_graph(truth, DSeparationTester(dag, truth))
    assert not any("no arrow" in w for w in learned.warnings)


def test_experiment_on_most_variables_is_said_in_plain_words():
    # A chain of six; the regime's targets are learned and it moves five of them.
    names = tuple(f"V{i}" for i in range(6))
    dag = nx.DiGraph(list(zip(names, names[1:], strict=False)))
    truth = Design(names, (Regime("ctrl", reference=True), Regime("drug", names[:5])))
    hidden = Design(names, (Regime("ctrl", reference=True), Regime("drug", (), known=False)))
    learned = learn_graph(hidden, DSeparationTester(dag, truth))
    assert learned.targets["drug"] == names[:5]
    said = [w for w in learned.warnings if "most measured variables" in w]
    assert len(said) == 1 and "5 of 6" in said[0] and "reference" in said[0]
