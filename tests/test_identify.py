"""``identify`` (API and command line) and the dag.csv reader."""

from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import networkx as nx
import pytest
from dags import random_dag

from pipeline.analyses.identify import identify
from pipeline.design import Design, Regime
from pipeline.errors import InputError
from pipeline.results.schema import ResultRecord

ROOT = Path(__file__).resolve().parents[1]


def run_cli(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "pipeline", "identify", *args], cwd=cwd,
                          capture_output=True, text=True, env=None, timeout=120)


def write(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8")
    return path


def design(variables, regimes) -> Design:
    return Design(variables=tuple(variables), regimes=tuple(regimes))


# -- the Python API ----------------------------------------------------------------------
def test_identify_chain_with_one_knockdown():
    dag = nx.DiGraph([("X1", "X2"), ("X2", "X3")])
    d = design(["X1", "X2", "X3"], [Regime("ctrl", reference=True), Regime("kd", ("X1",))])
    res = identify(dag, d)
    assert res.class_size == 1
    assert res.oriented == {"kd": 1}  # X1 -> X2 straight from the intervention node
    assert res.lost_without == {"kd": 2}  # without it the chain is undirected
    rec = res.record()
    assert [(e.source, e.target, e.rule, e.via) for e in rec.edges] == [
        ("X1", "X2", "intervention", ["kd"]),
        ("X2", "X3", "meek-1", ["X1"])]
    assert all(e.p_adjacency is None and e.p_orientation is None for e in rec.edges)
    assert "DAGs in the class: 1" in res.summary()


def test_identify_observational_counts_class():
    # a chain of 3 is in a class of 3 DAGs (common practice)
    dag = nx.DiGraph([("A", "B"), ("B", "C")])
    res = identify(dag, design("ABC", [Regime("ctrl", reference=True)]))
    assert res.class_size == 3
    assert res.undirected_edges == [("A", "B"), ("B", "C")]
    rec = res.record()
    assert [e.orientation for e in rec.edges] == ["undirected", "undirected"]
    assert rec.to_dict()["log10_class_size"] == round(math.log10(3), 6)


def test_identify_rejects_unknown_target():
    dag = nx.DiGraph([("A", "B")])
    d = design("AB", [Regime("ctrl", reference=True), Regime("kd", ("AA",))])
    with pytest.raises(InputError, match="target 'AA'"):
        identify(dag, d)


def test_identify_warns_known_no():
    dag = nx.DiGraph([("A", "B")])
    d = design("AB", [Regime("ctrl", reference=True), Regime("drug", ("A",), known=False)])
    assert any("known=no" in w for w in identify(dag, d).warnings)


# -- the dag.csv reader -------------------------------------------------------------------
def test_cli_writes_contract_json(tmp_path):
    write(tmp_path / "dag.csv", "source,target\nX1,X2\nX2,X3\nX2,X4\n")
    write(tmp_path / "regimes.csv", "regime,targets\nctrl,\nkd2,X2\nkd5,X5\n")
    r = run_cli("--dag", "dag.csv", "--regimes", "regimes.csv", "--out", "res.json",
                cwd=tmp_path)
    assert r.returncode == 0, r.stderr
    assert "DAGs in the class" in r.stdout
    d = json.loads((tmp_path / "res.json").read_text())
    assert d["format"] == "orienteer.result/1"
    assert d["nodes"] == ["X1", "X2", "X3", "X4", "X5"]  # X5: a target, not in dag.csv
    assert [r["name"] for r in d["regimes"]] == ["ctrl", "kd2", "kd5"]
    assert d["regimes"][0]["reference"] is True
    edges = {(e["source"], e["target"]): e for e in d["edges"]}
    assert edges[("X1", "X2")]["rule"] == "intervention"
    assert edges[("X1", "X2")]["via"] == ["kd2"]
    assert edges[("X2", "X3")]["orientation"] == "directed"
    assert d["class_size"] == 1 and d["log10_class_size"] == 0.0
    assert ResultRecord.read(tmp_path / "res.json").graph().number_of_edges() == 3


@pytest.mark.parametrize("dag, match", [
    ("source,target\nA,B\nB,A\n", "directed cycle"),
    (None, "no such file"),
])
def test_cli_input_errors_exit_2(tmp_path, dag, match):
    if dag is not None:
        write(tmp_path / "dag.csv", dag)
    write(tmp_path / "regimes.csv", "regime,targets\nctrl,\n")
    r = run_cli("--dag", "dag.csv", "--regimes", "regimes.csv", "--out", "o.json", cwd=tmp_path)
    assert r.returncode == 2
    assert r.stderr.startswith("error:") and match in r.stderr
    assert "Traceback" not in r.stderr
    assert not (tmp_path / "o.json").exists()


@pytest.mark.parametrize("regimes, args, match", [
    ("regime,targets\nkd,A\n", (), "no control regime"),
    ("regime,targets\nctrl,\n", ("--reference", "zz"), "--reference zz"),
    ("regime,targets\nctrl,\n", ("--dag", ""), "--dag: missing"),
])
def test_cli_more_input_errors_in_process(tmp_path, capsys, monkeypatch, regimes, args, match):
    from pipeline.cli import main

    monkeypatch.chdir(tmp_path)
    write(tmp_path / "dag.csv", "source,target\nA,B\n")
    write(tmp_path / "regimes.csv", regimes)
    code = main(["identify", "--dag", "dag.csv", "--regimes", "regimes.csv", "--out", "o.json",
                 *args])
    err = capsys.readouterr().err
    assert code == 2 and err.startswith("error:") and match in err
    assert not (tmp_path / "o.json").exists()


def test_cli_undirected_source_is_first_in_nodes(tmp_path, capsys, monkeypatch):
    from pipeline.cli import main

    monkeypatch.chdir(tmp_path)
    write(tmp_path / "dag.csv", "source,target\nB,A\n")
    write(tmp_path / "regimes.csv", "regime,targets\nctrl,\n")
    assert main(["identify", "--dag", "dag.csv", "--regimes", "regimes.csv",
                 "--out", "o.json"]) == 0
    d = json.loads((tmp_path / "o.json").read_text())
    assert d["nodes"] == ["B", "A"]
    assert [(e["source"], e["target"], e["orientation"]) for e in d["edges"]] == [
        ("B", "A", "undirected")]
    assert d["class_size"] == 2
    assert "DAGs in the class: 2" in capsys.readouterr().out


def test_lost_without_matches_recomputing():
    # the shortcut for regimes no reason cites agrees with recomputing without them
    import random

    from pipeline.graphs import essential_graph

    rng = random.Random(4)
    for _ in range(25):
        n = rng.randint(3, 8)
        names = [f"V{i}" for i in range(n)]
        dag = random_dag(names, 0.4, rng)
        regs = [Regime("ctrl", reference=True)] + [
            Regime(f"r{k}", tuple(rng.sample(names, rng.randint(1, 2)))) for k in range(3)]
        res = identify(dag, design(names, regs))
        full = set(res.directed_edges)
        for r in regs[1:]:
            rest = {x.name: x.targets for x in regs[1:] if x.name != r.name}
            kept = set(essential_graph(dag, rest).graph.directed_edges())
            assert res.lost_without[r.name] == len(full - kept)


def test_cli_warns_about_a_target_outside_the_dag(tmp_path, capsys, monkeypatch):
    from pipeline.cli import main

    monkeypatch.chdir(tmp_path)
    write(tmp_path / "dag.csv", "source,target\nAlpha,Beta\n")
    write(tmp_path / "regimes.csv", "regime,targets\nctrl,\nkd,Alpah\n")
    assert main(["identify", "--dag", "dag.csv", "--regimes", "regimes.csv", "--out",
                 "o.json"]) == 0
    out = capsys.readouterr().out
    assert "Alpah" in out and "nearest: Alpha" in out
    record = json.loads((tmp_path / "o.json").read_text())
    assert any("Alpah" in w for w in record["warnings"])
