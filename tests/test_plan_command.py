"""``orienteer plan`` on the command line and ``pipeline.plan``: files, tables, exit codes."""

from __future__ import annotations

import json
import math

import pytest

import pipeline
from pipeline import cli
from pipeline.results.plan import PlanResult
from pipeline.results.schema import EdgeRecord, RegimeRecord, ResultRecord
from pipeline.simulation import simulate


def identify_result(folder, edges="A,B\nB,C\nC,D\nB,E\n"):
    (folder / "dag.csv").write_text("source,target\n" + edges, encoding="utf-8")
    (folder / "regimes.csv").write_text("regime,targets\nctrl,\n", encoding="utf-8")
    out = folder / "ident.json"
    assert cli.main(["identify", "--dag", str(folder / "dag.csv"), "--regimes",
                     str(folder / "regimes.csv"), "--out", str(out)]) == 0
    return out


def write_record(path, edges, nodes=("A", "B", "C")):
    rec = ResultRecord(nodes=list(nodes), regimes=[RegimeRecord("ctrl", [], reference=True)],
                       edges=edges, class_size=0, settings={"alpha": 0.01})
    path.write_text(rec.to_json(), encoding="utf-8")
    return path


def test_plan_on_an_identify_result(tmp_path, capsys):
    # the tree A - B - C - D, B - E: its class holds 5 DAGs, one per source (He, Jia & Yu
    # 2015; common practice); acting on B and D together orients all 4 edges in every one
    result = identify_result(tmp_path)
    capsys.readouterr()
    assert cli.main(["plan", str(result), "--max-targets", "2", "--experiments", "2",
                     "--seed", "3"]) == 0
    out = capsys.readouterr().out
    assert "DAGs in the class: 5" in out and "B, D" in out
    data = json.loads((tmp_path / "plan.json").read_text(encoding="utf-8"))
    assert data["format"] == "orienteer.plan/1" and data["result"] == str(result)
    top = data["ranking"][0]
    assert top["targets"] == ["B", "D"]
    assert (top["expected_oriented"], top["expected_class_size"], top["worst_class_size"],
            top["p_identified"]) == (4.0, 1.0, 1, 1.0)
    assert data["plan"][0]["step"] == 1 and data["plan"][0]["targets"] == ["B", "D"]
    assert data["settings"]["max_targets"] == 2 and data["settings"]["experiments"] == 2
    assert data["lower_bound_experiments"] == 1 and data["method"] == "exact"
    # acting on B alone, by hand: with source A, B or E every edge is oriented; with
    # source C or D the edge C - D stays open (2 DAGs): 3.6 edges, 1.4 DAGs expected
    single = [r for r in data["ranking"] if r["targets"] == ["B"]][0]
    assert math.isclose(single["expected_oriented"], 3.6)
    assert math.isclose(single["expected_class_size"], 1.4) and single["worst_class_size"] == 2
    assert PlanResult.read(tmp_path / "plan.json").to_dict() == data  # round trip


def test_plan_out_file_folder_and_candidates_file(tmp_path, capsys):
    result = identify_result(tmp_path)
    names = tmp_path / "guides.txt"
    names.write_text("# working guides\nA\n\nD\n", encoding="utf-8")
    assert cli.main(["plan", str(result), "--candidates", str(names), "--out",
                     str(tmp_path / "mine.json")]) == 0
    data = json.loads((tmp_path / "mine.json").read_text(encoding="utf-8"))
    assert sorted(tuple(r["targets"]) for r in data["ranking"]) == [("A",), ("D",)]
    assert cli.main(["plan", str(result), "--candidates", "C,E", "--out",
                     str(tmp_path / "plans")]) == 0
    data = json.loads((tmp_path / "plans" / "plan.json").read_text(encoding="utf-8"))
    assert data["ranking"][0]["targets"] == ["C"]


def test_plan_on_a_learn_result_adds_a_report_section(tmp_path, capsys):
    sim = tmp_path / "sim"
    simulate(nodes=6, degree=2.0, regimes=1, samples=400, kind="knockdown", seed=5).save(sim)
    run = tmp_path / "run"
    assert cli.main(["learn", str(sim / "data.csv"), "--regimes", str(sim / "regimes.csv"),
                     "--out", str(run)]) == 0
    capsys.readouterr()
    assert cli.main(["plan", str(run), "--experiments", "2", "--seed", "1"]) == 0
    data = json.loads((run / "plan.json").read_text(encoding="utf-8"))
    record = ResultRecord.read(run / "result.json")
    undirected = sum(e.orientation == "undirected" for e in record.edges)
    assert data["open_edges"] == undirected and data["class_size"] == record.class_size
    for r in data["ranking"]:
        assert 0 <= r["expected_oriented"] <= undirected
    assert "Which experiment next" in (run / "report.html").read_text(encoding="utf-8")
    res = pipeline.plan(run / "result.json", seed=1, experiments=2)
    assert res.to_dict()["ranking"] == data["ranking"]  # the same seed, the same plan


def test_conflict_edges_count_as_open(tmp_path):
    # A -> B flagged as a conflict: planned on as A - B - C (3 DAGs)
    path = write_record(tmp_path / "result.json", [
        EdgeRecord("A", "B", "directed", "collider", conflict=True),
        EdgeRecord("B", "C", "undirected")])
    res = pipeline.plan(path, seed=0)
    assert res.conflicts_opened == [("A", "B")] and res.class_size == 3
    assert res.ranking[0].targets == ("B",) and res.ranking[0].p_identified == 1.0
    assert any("conflict" in n for n in res.notes)


def test_html_section_escapes_names(tmp_path):
    path = write_record(tmp_path / "result.json", [EdgeRecord("<b>", "B", "undirected")],
                        nodes=("<b>", "B"))
    section = pipeline.plan(path, seed=0).html_section()
    assert "&lt;b&gt;" in section and "<b>," not in section and "<td><b>" not in section


@pytest.mark.parametrize("extra, culprit", [
    (["--candidates", "A,Bx"], "'Bx' is not a variable of the result (nearest: B"),
    (["--candidates", "AA"], "nearest: A"),
    (["--max-targets", "0"], "max_targets: got 0"),
    (["--experiments", "0"], "experiments: got 0"),
    (["--samples", "1"], "samples: got 1"),
])
def test_plan_bad_options_exit_2(tmp_path, capsys, extra, culprit):
    result = identify_result(tmp_path)
    capsys.readouterr()
    assert cli.main(["plan", str(result), *extra]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error:") and culprit in err
    assert not (tmp_path / "plan.json").exists()


def test_plan_refuses_what_is_not_a_result(tmp_path, capsys):
    other = tmp_path / "other.json"
    other.write_text('{"format": "something/1"}', encoding="utf-8")
    assert cli.main(["plan", str(other)]) == 2
    assert "not an Orienteer result" in capsys.readouterr().err
    assert cli.main(["plan"]) == 2
    assert "RESULT: missing" in capsys.readouterr().err
    assert cli.main(["plan", str(tmp_path / "nothing.json")]) == 2
    assert "no such file" in capsys.readouterr().err


def test_plan_refuses_an_invalid_graph(tmp_path, capsys):
    # A -> B - C with A, C non-adjacent is no essential graph (Andersson, Madigan &
    # Perlman 1997): no class to plan on
    path = write_record(tmp_path / "result.json", [
        EdgeRecord("A", "B", "directed", "collider"), EdgeRecord("B", "C", "undirected")])
    assert cli.main(["plan", str(path)]) == 2
    err = capsys.readouterr().err
    assert "not a valid essential graph" in err and "A -> B - C" in err
