"""The result object of ``learn`` and its files (result.json, CSV, GraphML, HTML, history)."""

from __future__ import annotations

import json

import networkx as nx
import pandas as pd
import pytest

from pipeline.design import Design, Regime
from pipeline.learner.oracle import DSeparationTester
from pipeline.learner.pc import learn_graph
from pipeline.results.files import RESULT_FILES
from pipeline.results.learn import LearnResult
from pipeline.results.schema import ResultRecord

# A DAG with one collider: F -> A -> C <- B, C -> D. Without experiments its CPDAG keeps
# F - A undirected and directs A -> C <- B (the v-structure) and C -> D (Meek's rule 1):
# common practice (Meek 1995). The variable "x<y>&" checks HTML escaping.
WEIRD = "x<y>&"
DAG = nx.DiGraph([("F", "A"), ("A", "C"), ("B", "C"), ("C", "D"), ("D", WEIRD)])
VARIABLES = ("A", "B", "C", "D", "F", WEIRD)


def _result(regimes) -> LearnResult:
    design = Design(VARIABLES, tuple(regimes))
    learned = learn_graph(design, DSeparationTester(DAG, design))
    return LearnResult(learned, design, settings={"alpha": 0.01, "test": "gaussian"},
                       warnings=["a <b>warning</b>"])


@pytest.fixture(scope="module")
def observational() -> LearnResult:
    return _result([Regime("ctrl", (), True, True, 100)])


@pytest.fixture(scope="module")
def with_knockdown() -> LearnResult:
    return _result([Regime("ctrl", (), True, True, 100), Regime("kd_F", ("F",), True, False, 90)])


def test_edges_of_the_cpdag(observational):
    e = observational.edges
    directed = {(s, t) for s, t, o in zip(e.source, e.target, e.orientation, strict=True)
                if o == "directed"}
    undirected = [(s, t) for s, t, o in zip(e.source, e.target, e.orientation, strict=True)
                  if o == "undirected"]
    assert directed == {("A", "C"), ("B", "C"), ("C", "D"), ("D", WEIRD)}
    # an undirected edge is listed from the node that comes first in the variables: A, not F
    assert undirected == [("A", "F")]
    assert set(e.loc[e.orientation == "directed", "rule"]) <= {"collider", "meek-1"}
    assert e.loc[(e.source == "A") & (e.target == "C"), "rule"].item() == "collider"
    # the class holds 2 DAGs (F -> A or A -> F): the undirected part is a tree on 2 nodes,
    # and a tree on n nodes has n orientations (He, Jia & Yu 2015)
    assert observational.class_size == 2


def test_intervention_orients_and_names_its_regime(with_knockdown):
    e = with_knockdown.edges
    row = e[(e.source == "F") & (e.target == "A")]
    assert row.orientation.item() == "directed"
    assert row.rule.item() == "intervention" and row.via.item() == ["kd_F"]
    assert with_knockdown.class_size == 1
    rec = with_knockdown.record()
    kd = next(r for r in rec.regimes if r.name == "kd_F")
    assert kd.detected_targets == ["F"] and kd.samples == 90 and not kd.reference


def test_removed_table(observational):
    r = observational.removed
    assert list(r.columns[:7]) == ["x", "y", "separating_set", "pvalue", "statistic", "level",
                                   "regime"]
    # A and B are d-separated by the empty set (the collider C blocks the path)
    row = r[(r.x == "A") & (r.y == "B")]
    assert row.separating_set.item() == [] and row.level.item() == 0


def test_save_writes_files_and_keeps_history(tmp_path, observational, with_knockdown):
    out = tmp_path / "run"
    written = observational.save(out)
    assert set(written) <= set(RESULT_FILES)  # check.json only with a check
    assert sorted(p.name for p in out.iterdir()) == sorted(written)
    first = json.loads((out / "result.json").read_text())
    with_knockdown.save(out)
    history = list((out / "history").iterdir())
    assert len(history) == 1
    assert sorted(p.name for p in history[0].iterdir()) == sorted(written)
    # the old result moved whole, the new one replaced it
    assert json.loads((history[0] / "result.json").read_text()) == first
    assert ResultRecord.read(out / "result.json").class_size == 1
    with_knockdown.save(out)
    assert len(list((out / "history").iterdir())) == 2  # never overwritten


def test_result_json_round_trip(tmp_path, observational):
    observational.save(tmp_path)
    rec = ResultRecord.read(tmp_path / "result.json")
    assert rec.graph() == observational.graph
    assert rec.nodes == list(VARIABLES)
    d = json.loads((tmp_path / "result.json").read_text())
    assert d["format"] == "orienteer.result/1" and d["class_size"] == 2
    assert d["log10_class_size"] == pytest.approx(0.30103, abs=1e-5)  # log10(2)


def test_csv_files_flatten_lists(tmp_path, with_knockdown):
    with_knockdown.save(tmp_path)
    edges = pd.read_csv(tmp_path / "edges.csv", keep_default_na=False)
    assert edges.loc[(edges.source == "F") & (edges.target == "A"), "via"].item() == "kd_F"
    removed = pd.read_csv(tmp_path / "removed.csv", keep_default_na=False)
    assert len(removed) == len(with_knockdown.removed)


def test_graphml_read_back_by_networkx(tmp_path, observational):
    observational.save(tmp_path)
    g = nx.read_graphml(tmp_path / "graph.graphml")  # networkx as the outside reader
    assert set(g.nodes) == set(VARIABLES)
    assert all(g.nodes[n]["kind"] == "variable" for n in g.nodes)
    assert g.number_of_edges() == 5  # the undirected edge is written once
    assert g.edges["A", "F"]["orientation"] == "undirected"
    assert g.edges["A", "C"]["rule"] == "collider"


def test_report_is_self_contained_and_escaped(tmp_path, observational):
    observational.save(tmp_path)
    page = (tmp_path / "report.html").read_text()
    assert WEIRD not in page and "x&lt;y&gt;&amp;" in page
    assert "<b>warning</b>" not in page
    assert "http://" not in page and "https://" not in page and "<script" not in page
    assert "faithfulness" in page and "clinical" in page


def test_to_networkx_and_summary(observational):
    d = observational.to_networkx()
    assert d.has_edge("A", "F") and d.has_edge("F", "A")  # undirected: both arcs
    assert d.edges["A", "C"]["orientation"] == "directed" and not d.has_edge("C", "A")
    text = observational.summary()
    assert "5 edges (4 directed, 1 undirected)" in text
    assert "DAGs in the class: 2" in text


def test_report_shows_strength_and_why(tmp_path, with_knockdown):
    with_knockdown.save(tmp_path)
    page = (tmp_path / "report.html").read_text()
    assert "<th>strength</th>" in page and "<th>why</th>" in page
    assert "p orientation" not in page  # the strength replaces it on the page
    rec = ResultRecord.read(tmp_path / "result.json")
    for e in rec.edges:
        assert e.explanation
        if e.orientation == "directed":
            assert e.strength is not None and e.chain
    # result.json keeps p_orientation for the contract
    assert all("p_orientation" in e for e in json.loads(
        (tmp_path / "result.json").read_text())["edges"])


def test_report_names_conflicts_in_a_banner():
    from pipeline.results.report import render_report
    from pipeline.results.schema import EdgeRecord, RegimeRecord

    rec = ResultRecord(nodes=["A", "B"], regimes=[RegimeRecord("ctrl", [], reference=True)],
                       edges=[EdgeRecord("A", "B", "directed", conflict=True, strength=1.2,
                                         notes=["X -> Y from the collider ... was set aside"])],
                       class_size=1)
    page = render_report(rec)
    assert "The tests disagree about 1 edge(s) (A -&gt; B)" in page
    assert "set aside" in page and "1.2" in page
