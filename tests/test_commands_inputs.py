"""The shared measurement options on the command line: reading options reach the intake
through ``check`` and ``learn``, from the command line or a ``--config`` file, and the
store of ``learn`` never serves statistics read another way."""

from __future__ import annotations

import json

import pandas as pd
import pytest

from pipeline import cli
from pipeline.simulation import simulate


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sim")
    simulate(nodes=5, degree=2.0, regimes=2, samples=200, kind="knockdown", seed=3).save(folder)
    return folder


def test_learn_from_two_sheets_never_shares_statistics(tmp_path, files, capsys):
    frame = pd.read_csv(files / "data.csv")
    book = tmp_path / "plates.xlsx"
    with pd.ExcelWriter(book) as writer:  # pandas (openpyxl) writes the workbook
        frame.to_excel(writer, sheet_name="all", index=False)
        frame.groupby("regime").head(120).to_excel(writer, sheet_name="first", index=False)
    out = tmp_path / "out"
    base = ["learn", str(book), "--regimes", str(files / "regimes.csv"), "--out", str(out)]
    assert cli.main(base + ["--sheet", "all"]) == 0
    first = json.loads((out / "result.json").read_text())
    assert cli.main(base + ["--sheet", "first"]) == 0
    second = json.loads((out / "result.json").read_text())
    capsys.readouterr()
    assert first["settings"]["sheet"] == "all" and second["settings"]["sheet"] == "first"
    assert first["settings"]["fingerprint"] != second["settings"]["fingerprint"]
    counts = frame["regime"].value_counts()
    assert {r["name"]: r["samples"] for r in first["regimes"]} == counts.to_dict()
    assert {r["samples"] for r in second["regimes"]} == {120}


def test_reading_options_from_a_config_file(tmp_path, files, capsys):
    frame = pd.read_csv(files / "data.csv")
    frame.to_csv(tmp_path / "eu.csv", sep=";", decimal=",", index=False)
    names = [c for c in frame.columns if c != "regime"][::-1]
    (tmp_path / "genes.txt").write_text("\n".join(names) + "\n", encoding="utf-8")
    config = tmp_path / "c.toml"
    config.write_text(f'decimal = ","\ngenes = "{tmp_path / "genes.txt"}"\n', encoding="utf-8")
    regimes = files / "regimes.csv"
    code = cli.main(["check", str(tmp_path / "eu.csv"), "--regimes", str(regimes),
                     "--config", str(config)])
    out = capsys.readouterr().out
    assert code == 0 and f"{len(names)} variables" in out
    code = cli.main(["check", str(tmp_path / "eu.csv"), "--regimes", str(regimes)])
    assert code == 2 and "--decimal ," in capsys.readouterr().err


@pytest.mark.parametrize("extra, culprit", [
    (["--decimal", ";"], "--decimal ';'"),
    (["--regime-from", "filenames"], "--regime-from 'filenames'"),
    (["--genes", "nowhere.txt"], "--genes nowhere.txt: no such file"),
])
def test_bad_reading_options_exit_2(tmp_path, files, capsys, monkeypatch, extra, culprit):
    monkeypatch.chdir(tmp_path)
    code = cli.main(["check", str(files / "data.csv"), "--regimes", str(files / "regimes.csv"),
                     *extra])
    err = capsys.readouterr().err
    assert code == 2 and err.startswith("error:") and culprit in err, err


def test_validate_reads_with_the_same_options(tmp_path, files, capsys):
    # the options reach every command that reads measurements, validate included: the
    # workbook's second sheet gives the results of the CSV file it was written from
    frame = pd.read_csv(files / "data.csv")
    book = tmp_path / "plates.xlsx"
    with pd.ExcelWriter(book) as writer:
        frame.iloc[:10].to_excel(writer, sheet_name="notes", index=False)
        frame.to_excel(writer, sheet_name="cells", index=False)
    reg = str(files / "regimes.csv")
    assert cli.main(["validate", str(book), "--regimes", reg, "--sheet", "cells",
                     "--out", str(tmp_path / "a"), "--holdout-all"]) == 0
    assert cli.main(["validate", str(files / "data.csv"), "--regimes", reg,
                     "--out", str(tmp_path / "b"), "--holdout-all"]) == 0
    capsys.readouterr()
    a = json.loads((tmp_path / "a" / "validation.json").read_text())
    b = json.loads((tmp_path / "b" / "validation.json").read_text())
    a.pop("settings", None), b.pop("settings", None)
    assert a == b
