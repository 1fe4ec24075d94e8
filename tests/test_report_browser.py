"""The report in a real browser (headless Chromium): drawing, tables, escaping, layout.

The page is rendered by Debian's chromium (installed by ``.ci/run`` when absent) and its DOM
is read back after the browser ran it. Checks: the graph drawing has one edge mark per
edge and the edge table one row per edge; the console reports no script error; a variable
and a regime named like markup stay text (no element comes from them); and at a narrow
window the page itself does not scroll sideways (wide tables scroll in their own box).
"""

from __future__ import annotations

import json
from html.parser import HTMLParser
from pathlib import Path

import pytest
from browser import chromium, dump_dom, screenshot

from pipeline.analyses.sweep import sweep
from pipeline.results.files import refresh_report
from pipeline.simulation import simulate
from pipeline.workflow import learn

pytestmark = [
    pytest.mark.slow,
    pytest.mark.skipif(chromium() is None, reason="chromium is not installed (Debian package "
                       "'chromium'; .ci/run installs it)"),
]

EVIL = "<script>alert(1)</script>"
EVIL_REGIME = "<img src=x onerror=alert(2)>"
DEMO = Path(__file__).resolve().parents[1] / "data" / "demo"


class _Dom(HTMLParser):
    """Counts of the elements the checks need, from the serialized DOM."""

    def __init__(self):
        super().__init__()
        self.stack: list[tuple[str, dict]] = []
        self.edge_marks = self.edge_rows = 0
        self.tags: list[tuple[str, dict]] = []
        self.texts: list[str] = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append((tag, a))
        inside = [(t, x) for t, x in self.stack]
        if tag == "path" and "og-edge" in (a.get("class") or "").split() and \
                any(t == "svg" and "og-graph" in (x.get("class") or "") for t, x in inside):
            self.edge_marks += 1
        if tag == "tr" and any(t == "tbody" for t, _ in inside) and \
                any(t == "table" and x.get("id") == "edges" for t, x in inside):
            self.edge_rows += 1
        if tag not in ("br", "img", "meta", "input", "hr", "link"):
            self.stack.append((tag, a))

    def handle_startendtag(self, tag, attrs):
        self.handle_starttag(tag, attrs)
        if self.stack and self.stack[-1][0] == tag:
            self.stack.pop()

    def handle_endtag(self, tag):
        for k in range(len(self.stack) - 1, -1, -1):
            if self.stack[k][0] == tag:
                del self.stack[k:]
                break

    def handle_data(self, data):
        self.texts.append(data)


def _check_page(folder: Path) -> _Dom:
    dom_text, errors = dump_dom(folder / "report.html")
    assert errors == []
    dom = _Dom()
    dom.feed(dom_text)
    n_edges = len(json.loads((folder / "result.json").read_text())["edges"])
    assert n_edges > 0
    assert dom.edge_marks == n_edges
    assert dom.edge_rows == n_edges
    # no element of the page comes from a name: no script, no img, no handler attribute
    assert not any(t in ("script", "img", "iframe") for t, _ in dom.tags)
    assert not any(k.startswith("on") for _, a in dom.tags for k in a)
    return dom


@pytest.fixture(scope="module")
def demo(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("demo") / "out"
    learn([DEMO / "measurements.csv"], DEMO / "regimes.csv", out=out)
    return out


@pytest.fixture(scope="module")
def noisy(tmp_path_factory) -> Path:
    """40 variables, little data (many weak and undirected edges), markup for names."""
    folder = tmp_path_factory.mktemp("noisy")
    sim = simulate(nodes=40, degree=3.0, regimes=8, samples=80, strength=0.5, seed=3)
    first = sim.regimes["regime"].iloc[1]
    target = sim.regimes["targets"].iloc[1]
    sim.data = sim.data.rename(columns={target: EVIL})
    sim.data["regime"] = sim.data["regime"].replace({first: EVIL_REGIME})
    sim.regimes.loc[1, ["regime", "targets"]] = [EVIL_REGIME, EVIL]
    sim.save(folder)
    out = folder / "out"
    learn(folder / "data.csv", folder / "regimes.csv", out=out, alpha=0.05, bootstrap=3, seed=1)
    result = sweep(out, [0.01, 0.05])
    (out / "sweep.json").write_text(result.to_json())
    refresh_report(out)
    return out


def test_demo_report_in_the_browser(demo):
    _check_page(demo)


def test_noisy_report_with_markup_names(noisy):
    page = (noisy / "report.html").read_text()
    assert EVIL not in page and EVIL_REGIME not in page  # escaped in the file ...
    dom = _check_page(noisy)
    text = "".join(dom.texts)
    assert EVIL in text and EVIL_REGIME in text  # ... and shown as text by the browser
    assert "Stability across significance levels" in text and "bootstrap adjacency" in text


def test_page_does_not_scroll_sideways(noisy, tmp_path):
    # a wrapper page measures the report in a narrow frame (the report itself has no script)
    wrapper = tmp_path / "measure.html"
    wrapper.write_text(
        "<!DOCTYPE html><html><body><iframe id=\"f\" width=\"700\" height=\"600\" src=\""
        + (noisy / "report.html").resolve().as_uri() + "\"></iframe><script>"
        "document.getElementById('f').addEventListener('load', function () {"
        "var d = this.contentDocument.documentElement;"
        "document.body.setAttribute('data-scroll', d.scrollWidth);"
        "document.body.setAttribute('data-client', d.clientWidth);});</script></body></html>")
    dom_text, errors = dump_dom(wrapper, "--allow-file-access-from-files")
    assert errors == []
    dom = _Dom()
    dom.feed(dom_text)
    body = next(a for t, a in dom.tags if t == "body")
    assert int(body["data-scroll"]) <= int(body["data-client"]) + 1


def test_the_error_detector_sees_errors(tmp_path):
    # a page with a failing script: the check above would have caught it
    bad = tmp_path / "bad.html"
    bad.write_text("<html><body><script>notDefinedAnywhere();</script></body></html>")
    _, errors = dump_dom(bad)
    assert errors and "notDefinedAnywhere" in errors[0]


def test_screenshot(demo, tmp_path):
    png = screenshot(demo / "report.html", tmp_path / "report.png", 1000, 800)
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
