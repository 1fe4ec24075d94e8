"""``orienteer sweep`` and ``learn --bootstrap`` on the command line."""

from __future__ import annotations

import json

import pandas as pd
import pytest

from pipeline import cli
from pipeline.simulation import simulate


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sim")
    simulate(nodes=6, degree=2.0, regimes=3, samples=200, kind="knockdown", seed=2).save(folder)
    out = folder / "out"
    assert cli.main(["learn", str(folder / "data.csv"), "--regimes",
                     str(folder / "regimes.csv"), "--out", str(out), "--bootstrap", "4",
                     "--seed", "1"]) == 0
    return out


def test_sweep_space_and_comma_forms(run, capsys):
    capsys.readouterr()
    assert cli.main(["sweep", str(run), "--alpha", "0.001,0.005", "0.01", "0.05"]) == 0
    printed = capsys.readouterr().out
    assert "stable across the range" in printed and "sweep.csv" in printed
    frame = pd.read_csv(run / "sweep.csv")
    assert sorted(frame.alpha.unique()) == [0.001, 0.005, 0.01, 0.05]
    assert len(frame) == 4 * 15  # 6 variables: 15 pairs at each of 4 levels
    report = (run / "report.html").read_text()
    assert "Stability across significance levels" in report
    assert "Bootstrap: edge stability" in report  # the bootstrap section stays
    # the sweep's files go to history/ with the next learn run's predecessors
    assert json.loads((run / "sweep.json").read_text())["format"] == "orienteer.sweep/1"


def test_sweep_from_config(run, tmp_path):
    config = tmp_path / "c.toml"
    config.write_text("alpha = 0.02\n[sweep]\nalpha = [0.002, 0.02]\n")
    assert cli.main(["sweep", str(run), "--config", str(config)]) == 0
    assert sorted(pd.read_csv(run / "sweep.csv").alpha.unique()) == [0.002, 0.02]


def test_learn_bootstrap_fills_the_edges(run):
    edges = json.loads((run / "result.json").read_text())["edges"]
    assert edges and all(0 <= e["bootstrap_adjacency"] <= 1 for e in edges)
    assert all(0 <= e["bootstrap_orientation"] <= 1 for e in edges)
    assert json.loads((run / "result.json").read_text())["settings"]["seed"] == 1


@pytest.mark.parametrize("args, culprit", [
    (["--alpha", "0"], "--alpha"),
    (["--alpha", "0.01,1.5"], "--alpha"),
    (["--alpha", "abc"], "--alpha"),
])
def test_sweep_bad_alphas_exit_2(run, capsys, args, culprit):
    before = (run / "sweep.csv").read_bytes() if (run / "sweep.csv").exists() else None
    assert cli.main(["sweep", str(run)] + args) == 2
    err = capsys.readouterr().err
    assert err.startswith("error:") and culprit in err and "Traceback" not in err
    after = (run / "sweep.csv").read_bytes() if (run / "sweep.csv").exists() else None
    assert before == after  # nothing written


def test_sweep_without_a_learn_run_exit_2(tmp_path, capsys):
    assert cli.main(["sweep", str(tmp_path)]) == 2
    assert "result.json" in capsys.readouterr().err
    assert cli.main(["sweep"]) == 2
    assert capsys.readouterr().err.startswith("error: DIR")
    assert not (tmp_path / "sweep.csv").exists()
