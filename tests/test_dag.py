"""Reading dag.csv (CONTRACT.md: a known graph)."""

from __future__ import annotations

from pathlib import Path

import pytest

from pipeline.errors import InputError
from pipeline.intake.dag import read_dag_csv


def write(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8")
    return path


def test_read_dag_nodes_and_duplicates(tmp_path):
    p = write(tmp_path / "dag.csv", "source,target,weight\nA,B,1\n B ,C,2\nA,B,3\n")
    g = read_dag_csv(p, extra_nodes=["D", "A"])
    assert list(g.nodes) == ["A", "B", "C", "D"]
    assert set(g.edges) == {("A", "B"), ("B", "C")}
    assert len(g.graph["warnings"]) == 1 and "line 4" in g.graph["warnings"][0]


@pytest.mark.parametrize("text, match", [
    ("from,to\nA,B\n", "no 'source' column"),
    ("source,target\nA,A\n", "self-loop"),
    ("source,target\nA,B\nB,C\nC,A\n", "directed cycle A -> B -> C -> A"),
    ("source,target\nA,\n", "target is empty"),
    ("", "is empty"),
])
def test_read_dag_errors(tmp_path, text, match):
    p = write(tmp_path / "dag.csv", text)
    with pytest.raises(InputError, match=match):
        read_dag_csv(p)


def test_read_dag_missing_file(tmp_path):
    with pytest.raises(InputError, match="no such file"):
        read_dag_csv(tmp_path / "nope.csv")


# -- the command line ---------------------------------------------------------------------
