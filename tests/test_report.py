"""The report page: provenance on top, wide tables in their own scrolling box, escaping."""

from __future__ import annotations

from html.parser import HTMLParser

import networkx as nx

from pipeline.design import Design, Regime
from pipeline.learner.oracle import DSeparationTester
from pipeline.learner.pc import learn_graph
from pipeline.results.learn import LearnResult
from pipeline.results.report import render_report

EVIL = "<script>alert(1)</script>"


class _Tree(HTMLParser):
    """Start tags with their attributes and the text inside <td class="edge">."""

    def __init__(self):
        super().__init__()
        self.tags, self.stack, self.edge_text = [], [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))
        self.stack.append((tag, dict(attrs)))

    def handle_endtag(self, tag):
        while self.stack and self.stack.pop()[0] != tag:
            pass

    def handle_data(self, data):
        if any(t == "td" and a.get("class") == "edge" for t, a in self.stack):
            self.edge_text.append(data)


def _record(provenance):
    dag = nx.DiGraph([("A", "B"), (EVIL, "B")])
    design = Design(("A", "B", EVIL), (Regime("ctrl", (), True, True, 10),))
    learned = learn_graph(design, DSeparationTester(dag, design))
    result = LearnResult(learned, design, settings={"alpha": 0.01}, provenance=provenance)
    return result.record()


def test_provenance_table_on_top_and_escaped():
    page = render_report(_record({"tool": "orienteer", "version": "0.1.0",
                                  "command": f"learn {EVIL}",
                                  "inputs": [{"role": "data", "path": "a.csv", "bytes": 10}]}))
    assert page.index("<b>Provenance</b>") < page.index("<h2>Graph</h2>")
    assert EVIL not in page and "&lt;script&gt;" in page
    assert "<code>a.csv</code>, 10 bytes" in page
    assert "<b>Provenance</b>" not in render_report(_record({}))


def test_wide_tables_scroll_in_their_box_and_edge_names_do_not_wrap():
    page = render_report(_record({}))
    tree = _Tree()
    tree.feed(page)
    # the edges table sits in a scrolling box, and its first cells do not wrap
    assert ".scroll{overflow:auto" in page and "td.edge,th.edge{white-space:nowrap}" in page
    assert 'class="scroll tall"><table id="edges">' in page
    assert any(t == "table" and a.get("id") == "edges" for t, a in tree.tags)
    assert "".join(tree.edge_text).count("B") == 2
    assert not any(t == "script" for t, _ in tree.tags)  # the name stays text
