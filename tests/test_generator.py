"""Checks of the outside-data generator (tests/generator.py) against references outside it."""

from __future__ import annotations

import math

import networkx as nx
import numpy as np
import pandas as pd
import pytest
import scipy.stats as st
from generator import (
    KINDS,
    NOISE_FAMILIES,
    SEM,
    Hit,
    generate,
    noise,
    random_dag,
    random_sem,
    sample_regime,
    sign_flip_case,
)


def _implied_cov(weights: np.ndarray, scale: np.ndarray) -> np.ndarray:
    """(I - B)^-1 Omega (I - B)^-T with B[j, i] the weight of i -> j (column convention),
    computed here with numpy from the SEM's numbers, not by the generator."""
    b = weights.T
    inv = np.linalg.solve(np.eye(len(scale)) - b, np.eye(len(scale)))
    return inv @ np.diag(scale**2) @ inv.T


def _cov_within_sampling_error(sample: np.ndarray, sigma: np.ndarray, n: int,
                               k: float = 5.0) -> bool:
    # Gaussian sample covariance: var(S_ij) = (s_ii s_jj + s_ij^2) / n (Wishart; common practice)
    sd = np.sqrt((np.outer(np.diag(sigma), np.diag(sigma)) + sigma**2) / n)
    return bool((np.abs(sample - sigma) <= k * sd).all())


def test_dag_is_acyclic_and_weights_in_range():
    for seed in range(20):
        sem = random_sem(10, 4.0, seed=seed)
        assert nx.is_directed_acyclic_graph(sem.dag())  # networkx
        w = sem.weights[sem.weights != 0]
        assert ((np.abs(w) >= 0.5) & (np.abs(w) <= 1.5)).all()
    signs = np.concatenate([np.sign(random_sem(10, 4.0, seed=s).weights.ravel())
                            for s in range(20)])
    assert (signs > 0).sum() > 100 and (signs < 0).sum() > 100  # both signs drawn


@pytest.mark.parametrize("degree", [2.0, 4.0, 6.0])
def test_expected_degree(degree):
    rng = np.random.default_rng(1)
    # mean degree 2|E|/p over 300 DAGs; the sd of one DAG's degree is below 1
    degrees = [2 * random_dag(10, degree, rng).number_of_edges() / 10 for _ in range(300)]
    assert abs(np.mean(degrees) - degree) < 0.25


def test_random_order_not_name_order():
    # over random orders, G10 is sometimes a parent of G01
    dags = [random_dag(10, 6.0, np.random.default_rng(s)) for s in range(30)]
    assert any(d.has_edge("G10", "G01") for d in dags)
    assert any(d.has_edge("G01", "G10") for d in dags)


@pytest.mark.parametrize("family", NOISE_FAMILIES)
def test_noise_has_mean_zero_variance_one(family):
    x = noise(family, 400_000, np.random.default_rng(2))
    assert abs(x.mean()) < 0.01
    assert abs(x.var() - 1.0) < (0.05 if family == "t3" else 0.01)


def test_noise_shapes():
    rng = np.random.default_rng(3)
    # exponential: skewness 2; uniform: excess kurtosis -1.2 (common practice, from memory)
    assert abs(st.skew(noise("exponential", 400_000, rng)) - 2.0) < 0.1
    assert abs(st.kurtosis(noise("uniform", 400_000, rng)) + 1.2) < 0.02
    # t3 scaled by 1/sqrt(3) has the law of a t3 draw over sqrt(3): scipy's cdf
    x = noise("t3", 20_000, rng)
    assert st.kstest(x * math.sqrt(3), st.t(3).cdf).pvalue > 0.001
    assert st.kstest(noise("gaussian", 20_000, rng), "norm").pvalue > 0.001


def test_control_covariance_matches_implied():
    sem = random_sem(10, 4.0, seed=4)
    n = 20_000
    x = sample_regime(sem, (), n, np.random.default_rng(5))
    sigma = _implied_cov(sem.weights, sem.scale)
    assert _cov_within_sampling_error(np.cov(x, rowvar=False), sigma, n)
    # the generator's own implied covariance agrees with the numpy formula above
    np.testing.assert_allclose(sem.mean_cov()[1], sigma, rtol=1e-10, atol=1e-10)


def test_control_data_covariance_in_generated_frame():
    g = generate(p=8, degree=4.0, n=20_000, n_regimes=2, seed=6)
    ctrl = g.data.loc[g.data["regime"] == "control", g.variables].to_numpy()
    sigma = _implied_cov(g.sem.weights, g.sem.scale)
    assert _cov_within_sampling_error(np.cov(ctrl, rowvar=False), sigma, 20_000)


def _dense_sem_with_parents(seed: int) -> tuple[SEM, str, list[str]]:
    sem = random_sem(10, 5.0, seed=seed)
    dag = sem.dag()
    target = max(dag.nodes, key=lambda v: dag.in_degree(v))
    return sem, target, sorted(dag.predecessors(target))


def test_do_cuts_the_parents():
    sem, target, parents = _dense_sem_with_parents(7)
    assert len(parents) >= 2
    n = 5000
    rng = np.random.default_rng(8)
    obs = pd.DataFrame(sample_regime(sem, (), n, rng), columns=sem.variables)
    do = pd.DataFrame(sample_regime(sem, [Hit(target, "do")], n, rng), columns=sem.variables)
    for parent in parents:
        assert st.pearsonr(do[target], do[parent]).pvalue > 1e-4  # scipy

    def r2(frame):  # least-squares R^2 of the target on its parents (numpy lstsq)
        design = np.column_stack([np.ones(n), frame[parents].to_numpy()])
        coef = np.linalg.lstsq(design, frame[target].to_numpy(), rcond=None)[0]
        return 1 - (frame[target] - design @ coef).var() / frame[target].var()

    # the parents explain much of the target in the control, nothing under do()
    assert r2(obs) > 0.3
    assert r2(do) < 0.01
    # and the target's mean moved by one observational sd
    assert do[target].mean() - obs[target].mean() > 0.8 * obs[target].std()


def test_do_matched_keeps_marginal_mean_and_sd():
    sem, target, _ = _dense_sem_with_parents(9)
    n = 20_000
    rng = np.random.default_rng(10)
    obs = sample_regime(sem, (), n, rng)[:, sem.variables.index(target)]
    dom = sample_regime(sem, [Hit(target, "do-matched")], n, rng)[:, sem.variables.index(target)]
    se = obs.std() * math.sqrt(2 / n)
    assert abs(dom.mean() - obs.mean()) < 5 * se
    assert abs(dom.std() / obs.std() - 1) < 0.03
    # Gaussian data: the two marginal laws agree (scipy two-sample KS)
    assert st.ks_2samp(obs, dom).pvalue > 1e-3


def test_shift_variance_knockdown_change_what_they_say():
    sem, target, _ = _dense_sem_with_parents(11)
    j = sem.variables.index(target)
    n = 20_000
    rng = np.random.default_rng(12)
    obs = sample_regime(sem, (), n, rng)[:, j]
    sd = obs.std()
    shift = sample_regime(sem, [Hit(target, "shift", 1.0)], n, rng)[:, j]
    assert abs(shift.mean() - obs.mean() - sd) < 0.05 * sd
    assert abs(shift.std() / sd - 1) < 0.03
    var = sample_regime(sem, [Hit(target, "variance", 3.0)], n, rng)[:, j]
    noise_var = sem.scale[j] ** 2
    # the variance grows by 3 times the noise variance; the mean stays
    assert abs(var.var() - obs.var() - 3 * noise_var) < 0.1 * (obs.var() + 3 * noise_var)
    assert abs(var.mean() - obs.mean()) < 5 * var.std() / math.sqrt(n)
    kd = sample_regime(sem, [Hit(target, "knockdown", 1.0)], n, rng)[:, j]
    parents_only = sem.intervened([]).sample(n, rng)[:, j]  # the same equation, unscaled
    assert abs(kd.mean() - parents_only.mean() / 2) < 0.05 * sd
    assert abs(kd.std() - parents_only.std() / 2) < 0.05 * sd


def test_intervened_regime_covariance_matches_numpy():
    sem, target, _ = _dense_sem_with_parents(13)
    j = sem.variables.index(target)
    n = 20_000
    x = sample_regime(sem, [Hit(target, "do")], n, np.random.default_rng(14))
    w = sem.weights.copy()
    w[:, j] = 0.0
    scale = sem.scale.copy()
    scale[j] = math.sqrt(_implied_cov(sem.weights, sem.scale)[j, j])
    assert _cov_within_sampling_error(np.cov(x, rowvar=False), _implied_cov(w, scale), n)


def test_regimes_table_and_truth():
    g = generate(p=10, degree=4.0, n=50, n_regimes=6, kinds=("do", "shift", "variance"),
                 off_target=1.0, seed=15)
    assert list(g.regimes.columns) == ["regime", "targets", "known"]
    assert g.regimes.loc[0, "targets"] == ""  # the control
    declared = [t for t in g.regimes["targets"][1:]]
    assert len(set(declared)) == 6  # six distinct single targets
    off = g.off_targets()
    assert len(off) == 6 and all(len(v) == 1 for v in off.values())
    for s in g.specs[1:]:
        assert set(s.declared_targets) < set(g.targets[s.name])
    kinds = [s.hits[0].kind for s in g.specs[1:]]
    assert kinds == ["do", "shift", "variance"] * 2
    assert set(KINDS) >= set(kinds)


def test_control_batches_with_offset():
    g = generate(p=5, degree=2.0, n=5000, n_regimes=1, controls=3, batch_offset=0.5, seed=16)
    names = [s.name for s in g.specs if not s.hits]
    assert names == ["control1", "control2", "control3"]
    # the batch means differ far beyond sampling error (one-way ANOVA, scipy)
    for v in g.variables:
        groups = [g.data.loc[g.data["regime"] == c, v] for c in names]
        assert st.f_oneway(*groups).pvalue < 1e-6
    # without an offset the batches agree
    h = generate(p=5, degree=2.0, n=5000, n_regimes=1, controls=3, seed=16)
    pv = [st.f_oneway(*[h.data.loc[h.data["regime"] == c, v] for c in names]).pvalue
          for v in h.variables]
    assert min(pv) > 1e-3


def test_write(tmp_path):
    g = generate(p=6, degree=2.0, n=20, n_regimes=2, off_target=1.0, seed=17)
    paths = g.write(tmp_path)
    assert sorted(p.name for p in paths.values()) == [
        "data.csv", "regimes.csv", "truth_dag.csv", "truth_targets.csv"]
    data = pd.read_csv(paths["data"])
    assert list(data.columns) == ["regime", *g.variables] and len(data) == 60
    dag = pd.read_csv(paths["truth_dag"])
    assert nx.utils.edges_equal(sorted(map(tuple, dag.to_numpy())), sorted(g.dag.edges))
    truth = pd.read_csv(paths["truth_targets"], keep_default_na=False)
    assert truth.set_index("regime")["targets"].str.split(";").to_dict()["r1"] == g.targets["r1"]
    # the project's own reader accepts the regimes file as CONTRACT.md defines it
    from pipeline.intake.regimes import read_regimes
    read = read_regimes(paths["regimes"], variables=g.variables)
    assert [(r.name, list(r.targets), r.reference) for r in read] == [
        (s.name, s.declared_targets, not s.hits) for s in g.specs]


def test_sign_flip_case():
    g = sign_flip_case(1000, seed=0)
    assert sorted(g.dag.edges) == [("A", "B"), ("A", "C"), ("B", "C")]
    assert g.targets == {"control": [], "do_B": ["B"]}
    z = {}
    for name, d in g.data.groupby("regime"):
        r = st.pearsonr(d["A"], d["C"]).statistic  # scipy
        z[name] = math.atanh(r) * math.sqrt(len(d) - 3)  # Fisher z (common practice)
    assert z["control"] <= -5 and z["do_B"] >= 5
    # the signed sum over the two regimes is small next to either regime alone
    assert abs(z["control"] + z["do_B"]) / math.sqrt(2) < 3
