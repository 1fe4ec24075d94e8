"""Provenance of a result: input sizes and hashes, version, date, command line.

Checks from outside the project: sizes from os.stat, SHA-256 from hashlib over the whole
file at once, the version from importlib.metadata, the date parsed by datetime.
"""

from __future__ import annotations

import hashlib
import json
import os
from datetime import datetime, timedelta
from importlib.metadata import version

import pytest

from pipeline import cli
from pipeline.errors import InputError
from pipeline.provenance import command_line, file_record, provenance, running_command
from pipeline.simulation import simulate
from pipeline.workflow import learn


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sim")
    simulate(nodes=5, degree=2.0, regimes=2, samples=200, seed=3).save(folder)
    return folder


def test_file_record_matches_hashlib_and_stat(files):
    path = files / "data.csv"
    rec = file_record(path, "data")
    assert rec["bytes"] == os.stat(path).st_size
    assert rec["sha256"] == hashlib.sha256(path.read_bytes()).hexdigest()
    assert rec["path"] == str(path) and rec["role"] == "data"
    with pytest.raises(InputError, match="cannot be read"):
        file_record(files / "missing.csv", "data")


def test_provenance_fields(files):
    p = provenance([files / "data.csv"], files / "regimes.csv")
    assert [i["role"] for i in p["inputs"]] == ["data", "regimes"]
    assert p["version"] == version("orienteer")
    when = datetime.fromisoformat(p["date"].replace("Z", "+00:00"))
    assert when.utcoffset() == timedelta(0)
    assert p["command"] == "python API" and p["python"] and p["numpy"]


def test_command_line_only_inside_a_command():
    with running_command(["learn", "a b.csv"]):
        assert command_line() == "orienteer learn 'a b.csv'"
    assert command_line() == "python API"


def test_result_json_and_report_carry_the_provenance(tmp_path, files):
    out = tmp_path / "cli"
    args = ["learn", str(files / "data.csv"), "--regimes", str(files / "regimes.csv"),
            "--out", str(out)]
    assert cli.main(args) == 0
    p = json.loads((out / "result.json").read_text())["provenance"]
    assert p["command"] == "orienteer " + " ".join(args)
    assert p["inputs"][0]["sha256"] == hashlib.sha256(
        (files / "data.csv").read_bytes()).hexdigest()
    page = (out / "report.html").read_text()
    assert "Provenance" in page and p["inputs"][0]["sha256"][:16] in page
    # through the Python API
    result = learn([files / "data.csv"], files / "regimes.csv", out=tmp_path / "api")
    assert result.provenance["command"] == "python API"
    assert result.record().provenance["inputs"][1]["role"] == "regimes"
