"""``orienteer learn``, ``compare`` and ``demo`` on the command line."""

from __future__ import annotations

import json

import pytest

from pipeline import cli
from pipeline.results.files import RESULT_FILES
from pipeline.simulation import simulate


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sim")
    simulate(nodes=6, degree=2.0, regimes=3, samples=300, kind="knockdown", seed=11).save(folder)
    return folder


def test_learn_writes_six_files_then_keeps_history(tmp_path, files, capsys):
    out = tmp_path / "out"
    args = ["learn", str(files / "data.csv"), "--regimes", str(files / "regimes.csv"),
            "--out", str(out)]
    assert cli.main(args) == 0
    assert sorted(p.name for p in out.iterdir()) == sorted(RESULT_FILES + ("tests.sqlite",))
    printed = capsys.readouterr().out
    assert "report.html" in printed and "Edges" in printed
    assert cli.main(args + ["--alpha", "0.001"]) == 0
    (entry,) = (out / "history").iterdir()
    assert sorted(p.name for p in entry.iterdir()) == sorted(RESULT_FILES)
    assert json.loads((out / "result.json").read_text())["settings"]["alpha"] == 0.001
    assert json.loads((entry / "result.json").read_text())["settings"]["alpha"] == 0.01
    printed = capsys.readouterr().out
    assert "reused from the store" in printed and "inputs differ" not in printed


def test_a_changed_input_under_the_same_out_is_said(tmp_path, files, capsys):
    import shutil

    data = tmp_path / "data.csv"
    shutil.copy(files / "data.csv", data)
    out = tmp_path / "out"
    args = ["learn", str(data), "--regimes", str(files / "regimes.csv"), "--out", str(out)]
    assert cli.main(args) == 0
    capsys.readouterr()
    lines = data.read_text().splitlines()
    data.write_text("\n".join(lines[:-5]) + "\n")  # five rows fewer
    assert cli.main(args) == 0
    notes = [ln for ln in capsys.readouterr().out.splitlines() if "inputs differ" in ln]
    assert len(notes) == 1 and "read again" in notes[0]


@pytest.mark.parametrize("extra, culprit", [
    (["--alpha", "2"], "--alpha"),
    (["--bootstrap", "-1"], "--bootstrap"),
    (["--bootstrap", "3", "--jobs", "0"], "--jobs"),
    (["--bootstrap", "3", "--seed", "-2"], "--seed"),
    (["--engine", "dask"], "--engine dask"),
    (["--targets", "guess"], "--targets"),
    (["--collider-rule", "vote"], "--collider-rule"),
])
def test_learn_bad_options_exit_2(tmp_path, files, capsys, extra, culprit):
    out = tmp_path / "out"
    code = cli.main(["learn", str(files / "data.csv"), "--regimes", str(files / "regimes.csv"),
                     "--out", str(out)] + extra)
    err = capsys.readouterr().err
    assert code == 2
    assert err.startswith("error:") and culprit in err and "Traceback" not in err
    assert not out.exists()  # no partial output


def test_learn_missing_inputs_exit_2(tmp_path, files, capsys):
    assert cli.main(["learn", str(files / "data.csv"), "--out", str(tmp_path / "o")]) == 2
    assert "--regimes" in capsys.readouterr().err
    assert cli.main(["learn", str(tmp_path / "none.csv"), "--regimes",
                     str(files / "regimes.csv"), "--out", str(tmp_path / "o")]) == 2
    assert "none.csv" in capsys.readouterr().err
    assert cli.main(["learn", "--regimes", str(files / "regimes.csv")]) == 2
    assert capsys.readouterr().err.startswith("error: DATA")
    assert not (tmp_path / "o").exists()


def _write_result(path, edges):
    """A hand-made result.json over A, B, C with regime kd_A acting on A."""
    rec = {"format": "orienteer.result/1", "nodes": ["A", "B", "C"],
           "regimes": [{"name": "ctrl", "targets": [], "known": True, "samples": 10,
                        "reference": True, "detected_targets": []},
                       {"name": "kd_A", "targets": ["A"], "known": True, "samples": 10,
                        "reference": False, "detected_targets": ["A"]}],
           "edges": edges, "class_size": 1, "settings": {}, "warnings": []}
    path.write_text(json.dumps(rec))


def test_compare_hand_computed(tmp_path, capsys):
    # truth A -> B -> C; under kd_A the essential graph is A -> B (intervention) and
    # B -> C (Meek's rule 1), i.e. fully directed (Hauser & Buhlmann 2012).
    (tmp_path / "dag.csv").write_text("source,target\nA,B\nB,C\n")
    # learned: A - B undirected (1 mark error), C -> B reversed (1 mark error): SHD 2
    # (Tsamardinos, Brown & Aliferis 2006)
    _write_result(tmp_path / "result.json",
                  [{"source": "A", "target": "B", "orientation": "undirected"},
                   {"source": "C", "target": "B", "orientation": "directed"}])
    assert cli.main(["compare", str(tmp_path / "result.json"), "--truth-dag",
                     str(tmp_path / "dag.csv"), "--json"]) == 0
    scores = json.loads(capsys.readouterr().out)
    assert scores["shd"] == 2
    assert scores["adjacency_precision"] == 1.0 and scores["adjacency_recall"] == 1.0
    assert scores["orientation_precision"] == 0.0 and scores["orientation_recall"] == 0.0
    assert cli.main(["compare", str(tmp_path), "--truth-dag", str(tmp_path / "dag.csv")]) == 0
    assert "structural Hamming distance" in capsys.readouterr().out


def test_compare_unknown_truth_node_exit_2(tmp_path, capsys):
    (tmp_path / "dag.csv").write_text("source,target\nA,Z\n")
    _write_result(tmp_path / "result.json", [])
    assert cli.main(["compare", str(tmp_path / "result.json"), "--truth-dag",
                     str(tmp_path / "dag.csv")]) == 2
    assert "Z" in capsys.readouterr().err


def test_demo_runs_check_and_learn(tmp_path, capsys):
    out = tmp_path / "demo"
    assert cli.main(["demo", "--out", str(out)]) == 0
    printed = capsys.readouterr().out
    assert "Input check" in printed and str(out / "report.html") in printed.replace("\n", "")
    assert (out / "report.html").is_file() and (out / "result.json").is_file()


def test_compare_with_true_regimes(tmp_path, capsys):
    # Fork A -> B, A -> C; regime kd_A really acted on B (worked by hand: under {B} only
    # A -> B is identified; Hauser & Buhlmann 2012). The learned result orients both.
    (tmp_path / "dag.csv").write_text("source,target\nA,B\nA,C\n")
    (tmp_path / "truth_regimes.csv").write_text("regime,targets\nctrl,\nkd_A,B\n")
    _write_result(tmp_path / "result.json",
                  [{"source": "A", "target": "B", "orientation": "directed"},
                   {"source": "A", "target": "C", "orientation": "directed"}])
    args = ["compare", str(tmp_path), "--truth-dag", str(tmp_path / "dag.csv"),
            "--truth-regimes", str(tmp_path / "truth_regimes.csv")]
    assert cli.main([*args, "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["shd"] == 0  # the old field: against the result's own targets
    assert out["against_true_design"]["shd"] == 1
    assert out["against_dag"]["orientation_recall"] == 1.0
    assert cli.main(args) == 0
    assert "true targets" in capsys.readouterr().out
    (tmp_path / "truth_regimes.csv").write_text("regime,targets\nctrl,\n")
    assert cli.main(args) == 2
    assert "kd_A" in capsys.readouterr().err
