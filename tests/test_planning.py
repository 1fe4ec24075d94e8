"""Experiment planning (graph core), checked by brute force over the DAGs of each class.

The brute force never uses the planning code: for every DAG D of a class it computes the
essential graph of D under the current targets plus the new experiment (the definition,
`essential_graph` on the whole graph), and counts the new class by grouping the class's
DAGs by that essential graph.
"""

from __future__ import annotations

import itertools
import math
import random

import networkx as nx
import pytest
from dags import all_dags, random_dag

from pipeline.graphs.counting import AMOCounter
from pipeline.graphs.essential import essential_graph
from pipeline.graphs.meek import meek_closure
from pipeline.graphs.outcomes import meek_arcs
from pipeline.graphs.pdag import PDAG
from pipeline.graphs.planning import Planner, candidate_experiments, plan_experiments
from pipeline.graphs.sampling import enumerate_dags


def brute_score(members, family, new, directed_now):
    """Expected/worst newly oriented, expected/worst DAGs left, P(identified), by brute force."""
    fam = {**family, **{f"new{i}": list(t) for i, t in enumerate(new)}}
    outs = [essential_graph(d, fam).graph for d in members]
    keys = [o.edge_set() for o in outs]
    sizes = [keys.count(k) for k in keys]
    gained = [sum(1 for _ in o.directed_edges()) - directed_now for o in outs]
    n = len(members)
    return (sum(gained) / n, sum(sizes) / n, max(sizes), min(gained),
            sum(s == 1 for s in sizes) / n)


def classes(nodes: int, family: dict):
    """Every interventional class on `nodes` nodes: (essential graph, its DAGs)."""
    out: dict = {}
    for d in all_dags(nodes):
        e = essential_graph(d, family).graph
        out.setdefault(e.edge_set(), (e, []))[1].append(d)
    return list(out.values())


def close(score, want) -> bool:
    got = (score.expected_oriented, score.expected_class_size, score.worst_class_size,
           score.worst_oriented, score.p_identified)
    return all(math.isclose(a, b, rel_tol=1e-9, abs_tol=1e-9)
               for a, b in zip(got, want, strict=True))


def test_scores_equal_brute_force_on_every_class_of_four_nodes():
    # every labelled DAG on 4 nodes (543, OEIS A003024) grouped into classes under three
    # target families; every experiment of one or two targets on every class
    checked = 0
    for family in ({}, {"r": [0]}, {"r": [0, 1]}):
        for g, members in classes(4, family):
            if not any(True for _ in g.undirected_edges()):
                continue
            planner = Planner(g)
            now = sum(1 for _ in g.directed_edges())
            for t in candidate_experiments(g, list(g.nodes), 2):
                assert close(planner.score(t), brute_score(members, family, [t], now)), (
                    family, list(g.undirected_edges()), t)
                checked += 1
    assert checked > 1000


def test_scores_and_plans_equal_brute_force_on_random_classes():
    rng = random.Random(1)
    checked = 0
    for trial in range(25):
        d = random_dag(6, rng.uniform(0.3, 0.8), rng)
        family = {} if trial % 2 else {"r": [rng.randrange(6)]}
        g = essential_graph(d, family).graph
        if not any(True for _ in g.undirected_edges()):
            continue
        members = list(enumerate_dags(g))
        planner = Planner(g)
        now = sum(1 for _ in g.directed_edges())
        exps = candidate_experiments(g, list(g.nodes), 2)
        brute = {t: brute_score(members, family, [t], now) for t in exps}
        for t in exps:
            assert close(planner.score(t), brute[t])
            checked += 1
        # the top suggestion is optimal: no experiment orients more in expectation
        top = planner.rank(exps)[0]
        assert math.isclose(top.expected_oriented, max(b[0] for b in brute.values()))
        # two experiments in a row: the second scored given the first, by brute force
        for t1, t2 in rng.sample(list(itertools.combinations(exps, 2)), 5):
            after = planner.apply(planner.initial(), t1)
            both = brute_score(members, family, [t1, t2], now)
            first = brute_score(members, family, [t1], now)
            s = planner.score(t2, after)
            assert math.isclose(s.expected_oriented, both[0] - first[0], abs_tol=1e-9)
            assert math.isclose(s.expected_class_size, both[1])
            assert s.worst_class_size == both[2]
            assert math.isclose(planner.oriented(planner.apply(after, t2)), both[0])
    assert checked > 200


def test_exact_plan_is_the_best_pair_of_experiments():
    rng = random.Random(7)
    for _ in range(6):
        d = random_dag(5, 0.6, rng)
        g = essential_graph(d).graph
        if sum(1 for _ in g.undirected_edges()) < 3:
            continue
        members = list(enumerate_dags(g))
        now = sum(1 for _ in g.directed_edges())
        exps = candidate_experiments(g, list(g.nodes), 1)
        best = max(brute_score(members, {}, list(pair), now)[0]
                   for pair in itertools.combinations(exps, 2))
        p = plan_experiments(g, experiments=2)
        assert p.method == "exact"
        assert math.isclose(sum(s.score.expected_oriented for s in p.steps), best)


@pytest.mark.parametrize("n", [4, 5, 6, 7, 9])
def test_middle_of_a_path_is_the_minimax_single_target(n):
    # Derived by hand: on an undirected path X1 - ... - Xn the class holds n DAGs, one per
    # source. Acting on Xv orients everything when the source is Xv; when the source lies
    # left of Xv, the edges right of Xv and Xv's left edge are oriented and the v-1 nodes
    # left of Xv stay an undirected path (v-1 DAGs); symmetrically n-v on the right.
    names = [f"X{i}" for i in range(1, n + 1)]
    g = PDAG.from_networkx(nx.path_graph(names))
    planner = Planner(g)
    worst = {}
    for v in range(1, n + 1):
        s = planner.score((f"X{v}",))
        left, right = v - 1, n - v
        assert s.worst_class_size == max(left, right, 1)
        assert math.isclose(s.expected_class_size, (1 + left ** 2 + right ** 2) / n)
        gained = (n - 1) + left * (right + 1) + right * (left + 1)
        assert math.isclose(s.expected_oriented, gained / n)
        worst[v] = s.worst_class_size
    middle = {(n + 1) // 2, (n + 2) // 2}
    assert {v for v in worst if worst[v] == min(worst.values())} == middle


def test_p_minus_one_single_targets_identify_every_dag():
    # Eberhardt, Glymour & Scheines (2005): p - 1 single-target experiments suffice
    # (common practice as a check value); one experiment on p - 1 targets does not orient
    # the edges among its targets (METHODS.md section 6)
    rng = random.Random(3)
    for _ in range(20):
        d = random_dag(8, 0.5, rng)
        skip = rng.randrange(8)
        family = {f"kd{v}": [v] for v in range(8) if v != skip}
        assert essential_graph(d, family).graph.is_dag()
    k3 = nx.DiGraph([(0, 1), (0, 2), (1, 2)])
    left = essential_graph(k3, {"both": [0, 1]}).graph
    assert left.has_undirected(0, 1)


def test_lower_bounds_on_complete_components():
    # a complete component on w nodes: w - 1 single-target experiments, ceil(log2 w) with
    # any number of targets (Eberhardt, Glymour & Scheines 2005)
    for w in (2, 3, 4, 5, 6):
        g = PDAG.from_networkx(nx.complete_graph(w))
        b = Planner(g).bounds(max_targets=w)
        assert (b.largest_clique, b.single_target, b.multi_target) == (
            w, w - 1, math.ceil(math.log2(w)))
    # w = 4: no two single targets identify every DAG, three do (brute force over the 24)
    k4 = PDAG.from_networkx(nx.complete_graph(4))
    members = list(enumerate_dags(k4))
    for pair in itertools.combinations(range(4), 2):
        assert brute_score(members, {}, [(v,) for v in pair], 0)[2] > 1
    assert brute_score(members, {}, [(0,), (1,), (2,)], 0)[2] == 1
    # two components: single targets need the sum, multi-target ones the largest
    g = PDAG.from_networkx(nx.disjoint_union(nx.complete_graph(3), nx.complete_graph(4)))
    b = Planner(g).bounds(max_targets=2)
    assert (b.single_target, b.multi_target, b.with_max_targets) == (5, 2, 3)


def test_local_closure_equals_meek_closure():
    rng = random.Random(11)
    for _ in range(60):
        n = rng.randint(4, 9)
        und = nx.gnp_random_graph(n, rng.uniform(0.3, 0.8), seed=rng.randrange(10**6))
        if not (nx.is_connected(und) and nx.is_chordal(und)):
            continue
        g = PDAG.from_networkx(und)
        dag = next(iter(enumerate_dags(g)))
        acted = set(rng.sample(range(n), rng.randint(1, 2)))
        seeds = [(u, v) for u, v in dag.edges if (u in acted) != (v in acted)]
        ref = g.copy()
        for u, v in seeds:
            ref.orient(u, v)
        meek_closure(ref)
        counter = AMOCounter.of_component(g, list(g.nodes))
        idx = {lab: i for i, lab in enumerate(counter.labels)}
        got = meek_arcs(counter.adj, frozenset(range(n)), [(idx[u], idx[v]) for u, v in seeds])
        assert {(counter.labels[u], counter.labels[v]) for u, v in got} == set(
            ref.directed_edges())


def test_sampled_scores_agree_with_exact_ones():
    rng = random.Random(4)
    und = nx.Graph()
    while not (und.number_of_nodes() and nx.is_connected(und) and nx.is_chordal(und)):
        und = nx.gnp_random_graph(8, 0.5, seed=rng.randrange(10**6))
    g = PDAG.from_networkx(und)
    exact = Planner(g)
    drawn = Planner(g, budget=0, samples=3000, seed=5)  # no exact tree: draws only
    for t in candidate_experiments(g, list(g.nodes), 2)[:12]:
        a, b = exact.score(t), drawn.score(t)
        assert a.exact and not b.exact and b.se_oriented > 0 or a.expected_oriented == 0
        assert abs(a.expected_oriented - b.expected_oriented) <= 4 * b.se_oriented + 1e-9
        assert abs(a.p_identified - b.p_identified) <= 4 * b.se_identified + 1e-9
    again = Planner(g, budget=0, samples=3000, seed=5).score((0,))
    assert again == drawn.score((0,))  # the same seed draws the same DAGs


def test_planning_refuses_invalid_graphs_and_bad_options():
    g = PDAG("ABC")
    g.add_directed("A", "B")
    g.add_undirected("B", "C")
    with pytest.raises(ValueError, match="not a valid essential graph"):
        Planner(g)
    ok = PDAG.from_networkx(nx.path_graph(["A", "B", "C"]))
    with pytest.raises(ValueError, match="max_targets"):
        plan_experiments(ok, max_targets=0)
    with pytest.raises(ValueError, match="experiments"):
        plan_experiments(ok, experiments=0)
    with pytest.raises(ValueError, match="not nodes"):
        plan_experiments(ok, candidates=["Z"])
