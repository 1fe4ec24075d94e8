"""Held-out validation: the oracle case, the store, the files, the command line."""

from __future__ import annotations

import json
import random

import networkx as nx
import numpy as np
import pandas as pd
import pytest
from dags import random_dag

import pipeline
from pipeline import cli
from pipeline.analyses.prediction import precision_recall
from pipeline.analyses.validate import (
    class_scores,
    holdout_design,
    holdout_fingerprint,
    holdout_moments,
    validate,
    validate_from_moments,
)
from pipeline.design import Design, Regime
from pipeline.errors import InputError
from pipeline.independence.gaussian import GaussianTester
from pipeline.independence.store import TestStore
from pipeline.learner.oracle import DSeparationTester
from pipeline.learner.pc import learn_graph
from pipeline.results.validate import FORMAT, Prediction, ValidationResult
from pipeline.simulation import LinearSEM, simulate
from pipeline.stats.fingerprint import fingerprint_inputs
from pipeline.stats.moments import Moments

NAMES = tuple("ABCDEFG")


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sim")
    simulate(nodes=8, regimes=4, samples=600, seed=3).save(folder)
    return folder / "data.csv", folder / "regimes.csv"


def _oracle_predictions(dag: nx.DiGraph, design: Design, threshold: float):
    """Per held-out regime: predicted movers (oracle learner) and true descendants."""
    for r in design.interventional:
        sub = holdout_design(design, [r.name])
        learned = learn_graph(sub, DSeparationTester(dag, sub))
        scored = [v for v in design.variables if v not in r.targets]
        scores, _, _ = class_scores(learned.graph, r.targets, scored,
                                    valid=not learned.problems)
        truth = set().union(*(nx.descendants(dag, t) for t in r.targets))
        yield scores >= threshold, np.array([v in truth for v in scored])


def test_oracle_predicted_movers_are_the_true_descendants():
    # one single-target regime per variable: with one held out, the other p - 1
    # identify the DAG (Eberhardt, Glymour & Scheines 2005), so the predicted movers are
    # exactly the descendants of the held-out target (networkx.descendants)
    rng = random.Random(7)
    predicted_any = 0
    for _ in range(6):
        dag = random_dag(NAMES, 0.4, rng)
        design = Design(NAMES, (Regime("ctrl", reference=True),
                                *(Regime(f"kd_{v}", (v,)) for v in NAMES)))
        for predicted, truth in _oracle_predictions(dag, design, threshold=0.5):
            n_pred, n_obs, tp, precision, recall = precision_recall(predicted, truth)
            assert precision in (None, 1.0) and recall in (None, 1.0)
            predicted_any += n_pred
    assert predicted_any > 0


def test_oracle_definite_descendants_are_true_even_when_not_identified():
    # two single-target regimes only: the class keeps undirected edges, and the true DAG
    # is one of its DAGs, so a variable that descends from the target in every DAG of
    # the class (score 1) is a true descendant
    rng = random.Random(11)
    for _ in range(6):
        dag = random_dag(NAMES, 0.45, rng)
        design = Design(NAMES, (Regime("ctrl", reference=True), Regime("kd_A", ("A",)),
                                Regime("kd_C", ("C",)), Regime("kd_E", ("E",))))
        for predicted, truth in _oracle_predictions(dag, design, threshold=1.0):
            assert precision_recall(predicted, truth)[3] in (None, 1.0)


def _chain_inputs(folder, samples=800, seed=0, failed=False):
    """A -> B -> C and a lone D; a control, a knockdown of A and one of C (a sink); with
    `failed`, a knockdown of B whose guide did nothing."""
    sem = LinearSEM.from_edges("ABCD", {("A", "B"): 1.0, ("B", "C"): 1.0})
    rng = np.random.default_rng(seed)
    blocks = []
    regimes = [("ctrl", {}), ("kd_A", {"A": ("knockdown", 1.0)}),
               ("kd_C", {"C": ("knockdown", 1.0)})] + ([("kd_B", {})] if failed else [])
    for name, acts in regimes:
        block = pd.DataFrame(sem.sample(samples, rng, acts), columns=list("ABCD"))
        block.insert(0, "regime", name)
        blocks.append(block)
    folder.mkdir(parents=True, exist_ok=True)
    pd.concat(blocks).to_csv(folder / "data.csv", index=False)
    (folder / "regimes.csv").write_text("regime,targets\nctrl,\nkd_A,A\nkd_C,C\n"
                                        + ("kd_B,B\n" if failed else ""))
    return folder / "data.csv", folder / "regimes.csv"


def test_a_target_with_no_descendants_is_scored_without_error(tmp_path):
    data, regimes = _chain_inputs(tmp_path / "in")
    calls = []
    result = validate([data], regimes, holdout="kd_C", seed=1,
                      progress=lambda *a: calls.append(a))
    assert ("held-out regimes", 1, 1) in calls  # the progress display is told
    (held,) = result.regimes
    assert held.targets == ("C",) and held.variables == ("A", "B", "D")
    # C is a sink (networkx: no descendants) so nothing should move or be predicted
    assert not held.moved.any()
    assert held.scores["graph"].tolist() == [0.0, 0.0, 0.0]
    row = result.row("kd_C")
    assert (row.observed, row.predicted, row.recall, row.precision, row.auc) == \
        (0, 0, None, None, None)
    assert "undefined" in result.verdicts[0]
    # and the knockdown of A is predicted exactly: B and C move, D does not
    result = validate([data], regimes, holdout="kd_A", seed=1)
    (held,) = result.regimes
    assert held.names(held.moved) == ["B", "C"]
    assert held.names(held.predicted["graph"]) == ["B", "C"]
    assert result.overall("graph").auc == 1.0


def test_held_out_statistics_never_mix(files, tmp_path):
    data, regimes = files
    out = tmp_path / "run"
    pipeline.learn([data], regimes, out=out)
    held = pd.read_csv(regimes)["regime"].tolist()[1]  # a knockdown (row 0 is the control)
    validate([data], regimes, out=out, holdout=held, seed=0)
    fp = fingerprint_inputs([data], regimes)
    with TestStore(out / "tests.sqlite") as store:
        stored = store.get_inputs(fp)
        design, moments = stored.design, stored.moments
        sub = holdout_design(design, [held])
        key = holdout_fingerprint(fp, [r.name for r in sub.regimes])
        assert key != fp and store.count_tests(key) > 0
        sub_tester = GaussianTester(holdout_moments(moments, sub), sub)
        full_tester = GaussianTester(moments, design)
        for size in (0, 1):
            keys, stat, _, _ = store.load_arrays(store.fingerprint_id(key), "ci", "", size)
            assert len(keys)
            x, y, cond = keys[:, 0], keys[:, 1], keys[:, 2:]
            # the held-out run's stored values are those of the statistics without it ...
            np.testing.assert_allclose(stat, sub_tester.ci(x, y, cond).statistic)
            # ... and differ from the full run's (every CI test stratifies over the regimes)
            assert not np.allclose(stat, full_tester.ci(x, y, cond).statistic)
            keys0, stat0, _, _ = store.load_arrays(store.fingerprint_id(fp), "ci", "", size)
            np.testing.assert_allclose(
                stat0, full_tester.ci(keys0[:, 0], keys0[:, 1], keys0[:, 2:]).statistic)
        computed_first = [r["computed"] for r in store.runs()]
    # a second validation reuses every held-out test from the store
    validate([data], regimes, out=out, holdout=held, seed=0)
    with TestStore(out / "tests.sqlite") as store:
        again = [r["computed"] for r in store.runs()][len(computed_first):]
    assert again and all(c == 0 for c in again)


def test_held_out_regimes_get_distinct_keys():
    a = holdout_fingerprint("f", ["ctrl", "kd_1"])
    assert a == holdout_fingerprint("f", ["kd_1", "ctrl"])  # order does not matter
    assert a != holdout_fingerprint("f", ["ctrl", "kd_2"])
    assert a != holdout_fingerprint("g", ["ctrl", "kd_1"])


def test_files_report_section_and_round_trip(files, tmp_path):
    data, regimes = files
    out = tmp_path / "run"
    pipeline.learn([data], regimes, out=out)
    result = pipeline.validate([data], regimes, out=out, holdout_all=True, seed=4)
    assert result.run["report"]
    frame = pd.read_csv(out / "validation.csv")
    n = len(result.regimes)
    assert len(frame) == 3 * (n + 1) and frame["scope"].tolist()[-3:] == ["overall"] * 3
    assert set(frame["method"]) == {"graph", "observational", "correlation"}
    doc = json.loads((out / "validation.json").read_text())
    assert doc["format"] == FORMAT and doc["settings"]["seed"] == 4
    back = ValidationResult.read(out / "validation.json")
    assert back.to_dict() == result.to_dict()
    html = (out / "report.html").read_text()
    assert "Held-out validation" in html and result.verdicts[0].split(" (")[0] in html
    # a second run keeps the first files in history/
    pipeline.validate([data], regimes, out=out, holdout_all=True, seed=4)
    assert list(out.glob("history/*/validation.json"))
    assert "Held-out validation" in result.summary()


def test_without_a_learn_run_no_report(files, tmp_path):
    data, regimes = files
    result = validate([data], regimes, out=tmp_path / "v", seed=0)
    assert (tmp_path / "v" / "validation.json").is_file()
    assert not (tmp_path / "v" / "report.html").exists()
    assert result.run["report"] is None and "learn" in result.run["report_note"]


def test_known_no_regime_is_skipped(tmp_path):
    data, regimes = _chain_inputs(tmp_path / "in")
    regimes.write_text("regime,targets,known\nctrl,,yes\nkd_A,A,yes\nkd_C,C,no\n")
    result = validate([data], regimes, seed=0)
    assert [r.regime for r in result.regimes] == ["kd_A"]
    assert any("kd_C skipped" in n and "known=no" in n for n in result.notes)


def test_a_failed_perturbation_is_skipped(tmp_path):
    data, regimes = _chain_inputs(tmp_path / "in", failed=True)
    result = validate([data], regimes, seed=0)
    assert [r.regime for r in result.regimes] == ["kd_A", "kd_C"]
    assert any("kd_B skipped" in n and "did not move" in n for n in result.notes)


def _row(method, auc, scope="overall"):
    return Prediction(scope, "overall", method, 10, 3, 3, 2, 2 / 3, 2 / 3, auc)


def test_verdict_says_plainly_when_the_graph_is_no_better():
    r = ValidationResult(regimes=[], table=[_row("graph", 0.6), _row("observational", 0.55),
                                            _row("correlation", 0.7)])
    assert any("does no better than correlation with the target" in v for v in r.verdicts)
    assert any(v.startswith("It predicts the held-out movers better than the observational")
               for v in r.verdicts)
    r = ValidationResult(regimes=[], table=[_row("graph", 0.9), _row("observational", 0.55),
                                            _row("correlation", 0.7)])
    assert r.verdicts[0].startswith("The learned graph predicts the held-out movers better "
                                    "than the observational-only graph")
    assert "correlation with the target (0.70): ROC AUC 0.90" in r.verdicts[0]


def test_bad_arguments_raise_input_error():
    d = Design(("A", "B"), (Regime("ctrl", reference=True), Regime("kd_A", ("A",))))
    m = Moments.from_samples({"ctrl": np.random.default_rng(0).normal(size=(50, 2)),
                              "kd_A": np.random.default_rng(1).normal(size=(50, 2))}, ("A", "B"))
    with pytest.raises(InputError, match="--holdout kd_B: no such regime.*nearest: kd_A"):
        validate_from_moments(d, m, holdout="kd_B")
    with pytest.raises(InputError, match="reference"):
        validate_from_moments(d, m, holdout="ctrl")
    with pytest.raises(InputError, match="--min-shift"):
        validate_from_moments(d, m, min_shift=-0.1)
    with pytest.raises(InputError, match="threshold"):
        validate_from_moments(d, m, threshold=0)


@pytest.mark.parametrize("extra, culprit", [
    (["--holdout", "kd_X99"], "--holdout kd_X99: no such regime"),
    (["--holdout", "ctrl"], "part of the reference"),
    (["--min-shift", "-1"], "--min-shift -1"),
    (["--holdout", "kd_X1", "--holdout-all"], "give one of them"),
])
def test_cli_exit_2(files, tmp_path, capsys, extra, culprit):
    data, regimes = files
    out = tmp_path / "v"
    code = cli.main(["validate", str(data), "--regimes", str(regimes), "--out", str(out),
                     *extra])
    err = capsys.readouterr().err
    assert code == 2 and err.startswith("error:") and culprit in err
    assert not out.exists()  # no partial output


def test_cli_unknown_holdout_names_the_nearest(files, tmp_path, capsys):
    data, regimes = files
    names = pd.read_csv(regimes)["regime"].tolist()
    typo = names[1][:-1] + "9" if names[1][-1] != "9" else names[1][:-1] + "8"
    code = cli.main(["validate", str(data), "--regimes", str(regimes), "--out",
                     str(tmp_path / "v"), "--holdout", typo])
    assert code == 2 and "nearest:" in capsys.readouterr().err


def test_cli_runs_and_prints(files, tmp_path, capsys):
    data, regimes = files
    out = tmp_path / "v"
    assert cli.main(["learn", str(data), "--regimes", str(regimes), "--out", str(out)]) == 0
    code = cli.main(["validate", str(data), "--regimes", str(regimes), "--out", str(out),
                     "--holdout-all", "--seed", "1", "--min-shift", "0.3"])
    text = capsys.readouterr().out
    assert code == 0 and "Held-out validation" in text and "report:" in text
    assert json.loads((out / "validation.json").read_text())["settings"]["min_shift"] == 0.3
    assert cli.main(["validate", str(data), "--regimes", str(regimes)]) == 2
    assert "--out: missing" in capsys.readouterr().err
