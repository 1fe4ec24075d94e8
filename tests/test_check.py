"""Tests of pipeline.analyses.check and ``orienteer check``, on simulated experiments."""

from __future__ import annotations

import json
from pathlib import Path
from types import SimpleNamespace

import networkx as nx
import numpy as np
import pandas as pd
import pytest

from pipeline.analyses.check import MOVED, NOT_MOVED, check, check_intake
from pipeline.cli import main
from pipeline.design import Design, Regime
from pipeline.errors import InputError
from pipeline.simulation import simulate
from pipeline.stats.moments import Moments


def _intake(data: pd.DataFrame, regimes: pd.DataFrame):
    """An intake built straight from in-memory tables (the fields `check_intake` reads)."""
    variables = tuple(c for c in data.columns if c != "regime")
    groups = {name: g[list(variables)].to_numpy() for name, g in data.groupby("regime", sort=False)}
    design = Design(variables, tuple(
        Regime(row.regime, tuple(filter(None, row.targets.split(";"))), row.known == "yes",
               reference=not row.targets, samples=len(groups[row.regime]))
        for row in regimes.itertuples()))
    moments = Moments.from_samples({r.name: groups[r.name] for r in design.regimes}, variables)
    return SimpleNamespace(design=design, moments=moments, fingerprint="", dropped_rows=0,
                           warnings=[])


def _descendants(g: nx.DiGraph, targets: str) -> set[str]:
    out: set[str] = set()
    for t in filter(None, targets.split(";")):
        out |= {t} | nx.descendants(g, t)
    return out


@pytest.mark.parametrize("kind", ["knockdown", "perfect"])
def test_declared_targets_move(kind):
    sim = simulate(nodes=6, regimes=4, samples=1500, kind=kind, seed=21)
    res = check_intake(_intake(sim.data, sim.regimes))
    assert len(res.targets) == 4
    for t in res.targets:
        assert t.verdict == MOVED
        assert t.pvalue < 1e-6
    assert not res.failed_targets()


def test_target_that_was_not_hit_is_flagged():
    # a deliberately wrong regimes file: declare a variable the experiment did not touch
    # and that is not downstream of what it touched (networkx.descendants as the reference)
    sim = simulate(nodes=8, degree=1.5, regimes=3, samples=1500, seed=4)
    regimes = sim.regimes.copy()
    row = 1
    hit = regimes.loc[row, "targets"]
    untouched = sorted(set(sim.model.variables) - _descendants(sim.truth_dag, hit))
    regimes.loc[row, "targets"] = untouched[0]
    res = check_intake(_intake(sim.data, regimes))
    name = regimes.loc[row, "regime"]
    verdicts = {(t.regime, t.target): t.verdict for t in res.targets}
    assert verdicts[(name, untouched[0])] == NOT_MOVED
    assert res.failed_targets() == {name: [untouched[0]]}
    assert any(name in w and "may have failed" in w for w in res.warnings)


def test_response_matrix_reads_the_descendants():
    # under faithfulness X shifts under regime k iff X is a descendant of a target
    # (Eberhardt & Scheines 2007); networkx.descendants on the true DAG is the reference
    sim = simulate(nodes=7, degree=2.0, regimes=7, samples=5000, kind="shift", strength=2.0,
                   seed=8)
    res = check_intake(_intake(sim.data, sim.regimes))
    resp = res.response
    truth = dict(zip(sim.truth_regimes["regime"], sim.truth_regimes["targets"], strict=True))
    n_down = 0
    for i, name in enumerate(resp.regimes):
        down = _descendants(sim.truth_dag, truth[name])
        for j, v in enumerate(resp.variables):
            if v in down:
                assert resp.pvalue[i, j] < 1e-6, (name, v)
                n_down += 1
            else:
                assert resp.pvalue[i, j] > 1e-4, (name, v)
                assert abs(resp.shift[i, j]) < 0.15, (name, v)
    assert n_down > len(resp.regimes)  # some descendants beyond the targets themselves
    frame = res.response_frame()
    assert list(frame.columns) == ["regime", "variable", "shift", "sd_ratio", "pvalue", "adjusted"]
    assert len(frame) == len(resp.regimes) * len(resp.variables)


def test_control_batches_that_agree():
    sim = simulate(nodes=6, regimes=2, samples=1000, controls=2, seed=13)
    res = check_intake(_intake(sim.data, sim.regimes))
    assert res.controls is not None
    assert res.controls.regimes == ("ctrl_1", "ctrl_2")
    assert res.controls.agree and res.controls.verdict == "agree"
    assert res.controls.differing == {"ctrl_1": [], "ctrl_2": []}
    assert not any("control batches differ" in w for w in res.warnings)


def test_control_batch_with_shifted_mean_is_flagged():
    sim = simulate(nodes=6, regimes=2, samples=1000, controls=2, seed=13)
    data = sim.data.copy()
    rows = data["regime"] == "ctrl_2"
    sd = data.loc[data["regime"] == "ctrl_1", "X3"].std()
    data.loc[rows, "X3"] += 0.5 * sd
    res = check_intake(_intake(data, sim.regimes))
    assert not res.controls.agree
    assert "X3" in res.controls.differing["ctrl_2"]
    assert all(v == "X3" for vs in res.controls.differing.values() for v in vs)
    assert any("control batches differ" in w for w in res.warnings)
    # one reference is kept (the larger batch, here the first of two equal ones); the other
    # is analysed apart: a regime of its own with no declared target
    assert res.reference == ["ctrl_1"] and res.demoted == ["ctrl_2"]
    apart = res.design.regime("ctrl_2")
    assert not apart.reference and apart.known and apart.targets == ()


def test_differing_control_batches_are_not_pooled_by_learn(tmp_path):
    # two control batches with an offset on every variable (tests/generator.py), five
    # single-target experiments: the learner keeps one reference, reports the other batch's
    # shifts as off-target findings, and orients as well as without that batch
    import sys

    sys.path.insert(0, str(Path(__file__).parent))
    from generator import generate

    import pipeline
    from pipeline.analyses.scoring import score
    from pipeline.graphs.essential import essential_graph

    g = generate(8, 2.0, n=1500, n_regimes=5, kinds=("do",), controls=2, batch_offset=0.5,
                 seed=2)
    paths = g.write(tmp_path)
    result = pipeline.learn([paths["data"]], paths["regimes"])
    assert result.check.demoted == ["control2"]
    assert [r.name for r in result.design.reference] == ["control1"]
    assert result.detected_targets["control2"] == ()  # it orients nothing
    assert any(f.regime == "control2" and f.status == "off-target"
               for f in result.learned.findings)  # the batch effect, found from the data
    truth = essential_graph(g.dag, g.interventional_targets()).graph
    g.data[g.data["regime"] != "control2"].to_csv(tmp_path / "without.csv", index=False)
    g.regimes[g.regimes["regime"] != "control2"].to_csv(tmp_path / "without_regimes.csv",
                                                        index=False)
    alone = pipeline.learn([tmp_path / "without.csv"], tmp_path / "without_regimes.csv")
    assert score(result.graph, truth).shd <= score(alone.graph, truth).shd


def test_constant_within_regime_is_a_warning_and_a_shift():
    sim = simulate(nodes=5, regimes=2, samples=300, kind="knockdown", strength=1 / 0.7, seed=3)
    res = check_intake(_intake(sim.data, sim.regimes))
    for t in res.targets:  # a complete knockout: the target is constant in its regime
        assert res.constant[t.regime] == [t.target]
        assert t.verdict == MOVED and t.pvalue == 0.0
    assert sum("constant within the regime" in w for w in res.warnings) == 2
    json.dumps(res.to_dict(), allow_nan=False)  # infinities become null


def test_few_samples_and_bad_alpha():
    sim = simulate(nodes=4, regimes=1, samples=20, seed=1)
    res = check_intake(_intake(sim.data, sim.regimes))
    assert sum("only 20 samples" in w for w in res.warnings) == 2
    with pytest.raises(InputError, match="alpha"):
        check_intake(_intake(sim.data, sim.regimes), alpha=1.5)


def test_summary_and_dict_carry_the_verdicts():
    sim = simulate(nodes=5, regimes=2, samples=400, seed=2)
    res = check_intake(_intake(sim.data, sim.regimes))
    text = res.summary()
    for name in sim.regimes["regime"]:
        assert name in text
    d = res.to_dict()
    assert d["format"] == "orienteer.check/1"
    assert [t["verdict"] for t in d["targets"]] == [t.verdict for t in res.targets]
    assert np.array(d["response"]["pvalue"]).shape == res.response.pvalue.shape


# -- reading files: the API entry and the command line -----------------------------------

DEMO = Path(__file__).resolve().parents[1] / "data" / "demo"


def test_cli_writes_check_json_and_response_csv(tmp_path, capsys):
    sim = simulate(nodes=5, regimes=2, samples=300, controls=2, seed=6)
    sim.save(tmp_path / "in")
    out = tmp_path / "out"
    code = main(["check", str(tmp_path / "in" / "data.csv"),
                 "--regimes", str(tmp_path / "in" / "regimes.csv"), "--out", str(out)])
    assert code == 0
    printed = capsys.readouterr().out
    assert "Response matrix" in printed and "Control batches" in printed
    d = json.loads((out / "check.json").read_text(encoding="utf-8"))
    assert d["format"] == "orienteer.check/1"
    assert d["reference"] == ["ctrl_1", "ctrl_2"]
    assert d["controls"]["verdict"] in ("agree", "differ")
    assert {t["regime"] for t in d["targets"]} == set(sim.regimes["regime"][2:])
    frame = pd.read_csv(out / "response.csv")
    assert list(frame.columns) == ["regime", "variable", "shift", "sd_ratio", "pvalue", "adjusted"]
    assert len(frame) == 2 * 5
    # the API entry reads the same files to the same numbers
    res = check(tmp_path / "in" / "data.csv", tmp_path / "in" / "regimes.csv")
    assert np.allclose(res.response.pvalue, np.array(d["response"]["pvalue"], dtype=float))


def test_cli_input_errors_exit_2(tmp_path, capsys):
    sim = simulate(nodes=4, regimes=1, samples=50, seed=6)
    sim.save(tmp_path)
    assert main(["check", str(tmp_path / "data.csv")]) == 2
    assert "error: --regimes" in capsys.readouterr().err
    assert main(["check", str(tmp_path / "data.csv"), "--regimes",
                 str(tmp_path / "regimes.csv"), "--alpha", "2"]) == 2
    assert "error: --alpha" in capsys.readouterr().err
    assert not (tmp_path / "check.json").exists()


def test_demo_data_shows_its_lessons():
    # data/demo/README.md: the failed guide, the complete knockout, agreeing controls,
    # and knockdowns that shift exactly the descendants of their targets
    res = check(DEMO / "measurements.csv", DEMO / "regimes.csv")
    assert res.failed_targets() == {"kd_qsn2": ["qsn2"]}
    assert res.constant == {"ko_qlw1": ["qlw1"]}
    assert res.controls.agree
    dag = nx.DiGraph(list(pd.read_csv(DEMO / "truth_dag.csv").itertuples(index=False)))
    truth = pd.read_csv(DEMO / "truth_regimes.csv", keep_default_na=False)
    moved = res.response.shifted(res.alpha)
    for i, name in enumerate(res.response.regimes):
        targets = truth.loc[truth["regime"] == name, "targets"].item()
        down = _descendants(dag, targets)
        assert {v for v, m in zip(res.response.variables, moved[i], strict=True) if m} == down


def test_numbers_read_from_the_store_give_the_same_check(tmp_path):
    # control batches that differ and a regime whose targets are hints (known=no): every
    # kind of number the check keeps (control agreement, the settled reference, response
    # matrix, neighbour p-values, conditional target tests); a second check reads them all
    from pipeline.independence.numbers import StoredNumbers
    from pipeline.independence.store import TestStore

    sim = simulate(nodes=6, regimes=3, samples=1000, controls=2, seed=13)
    data = sim.data.copy()
    data.loc[data["regime"] == "ctrl_2", "X3"] += 0.5 * data["X3"].std()
    regimes = sim.regimes.copy()
    regimes.loc[regimes.index[-1], "known"] = "no"
    intake = _intake(data, regimes)
    fresh = check_intake(intake, alpha=0.05)
    assert fresh.demoted == ["ctrl_2"] and any(t.conditional_pvalue is not None and not t.known
                                               for t in fresh.targets)
    with TestStore(tmp_path / "tests.sqlite") as store:
        first = check_intake(intake, alpha=0.05, numbers=StoredNumbers(store, "fp"))
        numbers = StoredNumbers(store, "fp")
        again = check_intake(intake, alpha=0.05, numbers=numbers)
    assert numbers.computed == 0 and numbers.reused >= 5
    assert json.dumps(first.to_dict()) == json.dumps(fresh.to_dict())
    assert json.dumps(again.to_dict()) == json.dumps(fresh.to_dict())


def test_learn_leaves_known_targets_to_the_learner():
    # do() matched to the observational mean and sd: the targets keep their marginal law
    # and only the conditional test sees them (tests/generator.py). Leaving that test to
    # the learner changes nothing: learn's check is the full check with its verdicts.
    import sys

    sys.path.insert(0, str(Path(__file__).parent))
    from generator import generate

    from pipeline.analyses.check import with_learner_verdicts
    from pipeline.intake.record import Intake
    from pipeline.workflow import learn_from_moments

    g = generate(7, 2.0, n=800, n_regimes=4, kinds=("do-matched",), seed=3)
    variables = tuple(c for c in g.data.columns if c != "regime")
    regimes = g.regimes.assign(targets=g.regimes["targets"].fillna(""),
                               known=g.regimes.get("known", "yes"))
    intake = _intake(g.data[["regime", *variables]], regimes)
    result = learn_from_moments(intake.design, intake.moments, alpha=0.01, check=True)
    assert any(t.verdict != MOVED for t in result.check.targets)
    full = check_intake(Intake(intake.design, intake.moments, "", 0, []), alpha=0.01)
    full = with_learner_verdicts(full, result.learned.target_verdicts)
    assert json.dumps(result.check.to_dict()) == json.dumps(full.to_dict())


def test_control_like_regime_warned_unless_its_target_moved():
    # a regime copied from the control (no effect at all) looks like a control; a regime
    # whose only effect is a variance change of its target, small enough to escape the
    # matrix's Benjamini-Hochberg adjustment but seen by the target's own test, does not
    rng = np.random.default_rng(2)
    n = 400
    base = rng.normal(size=(3 * n, 4))
    data = pd.DataFrame(base, columns=["A", "B", "C", "D"])
    data["C"] = data["A"] + 0.5 * rng.normal(size=3 * n)
    data.loc[2 * n:, "D"] *= 1.15  # variance change only, in regime "spread"
    data.insert(0, "regime", ["ctrl"] * n + ["copy"] * n + ["spread"] * n)
    regimes = pd.DataFrame({"regime": ["ctrl", "copy", "spread"], "targets": ["", "B", "D"],
                            "known": ["yes"] * 3})
    res = check_intake(_intake(data, regimes), alpha=0.01)
    # the case this is about: D's own p passes, its Benjamini-Hochberg adjustment does not
    assert res.response.pvalue[1, 3] <= 0.01 < res.response.adjusted[1, 3]
    verdicts = {t.regime: t.verdict for t in res.targets}
    assert verdicts == {"copy": NOT_MOVED, "spread": MOVED}
    assert any("regime copy: no variable moved" in w for w in res.warnings)
    assert not any("regime spread: no variable moved" in w for w in res.warnings)
