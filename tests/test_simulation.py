"""Tests of pipeline.simulation and ``orienteer simulate``."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from pipeline.cli import main
from pipeline.errors import InputError
from pipeline.simulation import LinearSEM, random_sem, simulate

FILES = ("data.csv", "regimes.csv", "truth_dag.csv", "truth_regimes.csv")


def _read(path):
    return pd.read_csv(path, keep_default_na=False)


def test_same_seed_same_bytes(tmp_path):
    a = simulate(nodes=6, regimes=3, samples=200, off_target=0.5, seed=11)
    b = simulate(nodes=6, regimes=3, samples=200, off_target=0.5, seed=11)
    c = simulate(nodes=6, regimes=3, samples=200, off_target=0.5, seed=12)
    a.save(tmp_path / "a")
    b.save(tmp_path / "b")
    c.save(tmp_path / "c")
    for name in FILES:
        assert (tmp_path / "a" / name).read_bytes() == (tmp_path / "b" / name).read_bytes()
    assert (tmp_path / "a" / "data.csv").read_bytes() != (tmp_path / "c" / "data.csv").read_bytes()


def test_observational_covariance_matches_sem_algebra():
    # common practice: a linear SEM X = BX + E has Cov X = (I - B)^-1 Omega (I - B)^-T
    sim = simulate(nodes=6, degree=3.0, regimes=0, samples=100_000, seed=3)
    b = sim.model.weights
    omega = np.diag(sim.model.noise_variance)
    a = np.linalg.inv(np.eye(6) - b)
    sigma = a @ omega @ a.T
    x = sim.data[list(sim.model.variables)].to_numpy()
    s = np.cov(x, rowvar=False)
    # sampling sd of a Gaussian sample covariance (common practice): sqrt((s_ii s_jj + s_ij^2)/n)
    se = np.sqrt((np.outer(np.diag(sigma), np.diag(sigma)) + sigma**2) / x.shape[0])
    assert np.all(np.abs(s - sigma) < 5 * se)
    assert np.allclose(x.mean(axis=0), 0.0, atol=5 * np.sqrt(np.diag(sigma) / x.shape[0]))


def test_perfect_intervention_cuts_the_parents():
    # every variable is targeted once (8 single-target regimes on 8 nodes)
    sim = simulate(nodes=8, degree=3.0, regimes=8, samples=4000, kind="perfect", seed=5)
    g = sim.truth_dag
    checked = 0
    for row in sim.regimes.itertuples():
        if not row.targets:
            continue
        target = row.targets
        parents = sorted(g.predecessors(target))
        if not parents:
            continue
        for regime, cut in ((row.regime, True), ("ctrl", False)):
            part = sim.data[sim.data["regime"] == regime]
            fit = sm.OLS(part[target], sm.add_constant(part[parents])).fit()
            if cut:  # no dependence left: slopes indistinguishable from 0
                assert fit.f_pvalue > 1e-4
                assert np.all(np.abs(fit.params[parents]) < 5 * fit.bse[parents])
            else:  # the observational slopes are the model's weights
                weights = [g.edges[p, target]["weight"] for p in parents]
                assert np.allclose(fit.params[parents], weights, atol=0.1)
        checked += 1
    assert checked >= 3


def test_scale_intervention_multiplies_noise_variance():
    sem = LinearSEM.from_edges(["A", "B"], {("A", "B"): 1.0}, noise_variance={"A": 1, "B": 0.5})
    x = sem.sample(50_000, np.random.default_rng(0), {"B": ("scale", 1.0)})
    fit = sm.OLS(x[:, 1], sm.add_constant(x[:, 0])).fit()
    assert fit.params[1] == pytest.approx(1.0, abs=0.02)
    assert fit.scale == pytest.approx(0.5 * (1 + 1.0) ** 2, rel=0.03)


def test_strong_knockdown_is_a_constant():
    sem = LinearSEM.from_edges(["A", "B"], {("A", "B"): 1.0})
    x = sem.sample(100, np.random.default_rng(0), {"B": ("knockdown", 1 / 0.7)})
    assert np.ptp(x[:, 1]) == 0.0
    assert np.ptp(x[:, 0]) > 0.0


def test_truth_files_consistent_with_declared(tmp_path):
    sim = simulate(nodes=8, regimes=6, targets_per_regime=2, samples=50, off_target=1.0, seed=2)
    sim.save(tmp_path)
    declared = _read(tmp_path / "regimes.csv")
    truth = _read(tmp_path / "truth_regimes.csv")
    data = _read(tmp_path / "data.csv")
    assert list(declared["regime"]) == list(truth["regime"])
    assert set(data["regime"]) == set(declared["regime"])
    assert set(declared["known"]) == {"yes"}
    variables = set(data.columns) - {"regime"}
    for d, t in zip(declared["targets"], truth["targets"], strict=True):
        d, t = set(filter(None, d.split(";"))), set(filter(None, t.split(";")))
        assert d <= t <= variables
        assert len(t - d) == (1 if d else 0)  # off_target=1: one extra per experiment
    dag = _read(tmp_path / "truth_dag.csv")
    assert set(dag["source"]) | set(dag["target"]) <= variables
    clean = simulate(nodes=8, regimes=6, samples=50, off_target=0.0, seed=2)
    assert clean.regimes["targets"].tolist() == clean.truth_regimes["targets"].tolist()


def test_random_dags_are_acyclic_with_the_expected_density():
    rng = np.random.default_rng(7)
    counts = []
    for _ in range(200):
        g = random_sem(20, 3.0, rng).graph()
        assert nx.is_directed_acyclic_graph(g)
        counts.append(g.number_of_edges())
    # each of the 190 pairs is an edge with probability 3/19: mean 30, sd of the mean ~0.34
    assert np.mean(counts) == pytest.approx(30.0, abs=1.5)


def test_invalid_arguments_name_the_argument():
    with pytest.raises(InputError, match="kind"):
        simulate(kind="inhibit")
    with pytest.raises(InputError, match="off_target"):
        simulate(off_target=1.5)
    with pytest.raises(InputError, match="targets_per_regime"):
        simulate(nodes=3, targets_per_regime=4)


def test_cli_writes_the_four_files(tmp_path, capsys):
    out = tmp_path / "sim"
    code = main(["simulate", "--out", str(out), "--nodes", "5", "--regimes", "2",
                 "--samples", "40", "--kind", "shift", "--controls", "2", "--seed", "1"])
    assert code == 0
    for name in FILES:
        assert (out / name).is_file()
    data = _read(out / "data.csv")
    assert len(data) == 4 * 40
    assert list(_read(out / "regimes.csv")["regime"][:2]) == ["ctrl_1", "ctrl_2"]
    assert main(["simulate", "--nodes", "5"]) == 2  # --out missing
    assert "error: --out" in capsys.readouterr().err
