"""The report of a ``learn`` run: one self-contained HTML page.

The page is a view of the run's folder: it is rendered from what ``result.json`` and
``check.json`` hold, plus the sections that later commands add (``sweep``, ``plan``,
``validate``), so any of them can render it again (`pipeline.results.files.refresh_report`).
It has no external resource (styles inline, no scripts, no fonts or images fetched) so it
can be mailed or archived as one file. Every string that comes from the user's inputs
(variable and regime names, warnings) is escaped.
"""

from __future__ import annotations

import html
import math
from collections.abc import Sequence
from typing import Any

from pipeline.results.check import CheckResult
from pipeline.results.drawing import MAX_DRAWN, graph_section
from pipeline.results.formatting import format_count
from pipeline.results.schema import ResultRecord

__all__ = ["render_report", "CAUTIONS"]

CAUTIONS = (
    "The graph is learned under causal sufficiency (no unmeasured common cause of two "
    "measured variables) and faithfulness (every independence in the data comes from the "
    "graph). A hidden confounder or cancelling pathways can add, remove or turn edges.",
    "The tests assume linear relations within each regime; they allow for heavy-tailed or "
    "skewed noise (the invariance test corrects for the tails) and, with --test rank, for any "
    "increasing transform of each variable. Strongly non-linear relations may be missed.",
    "Each edge is a hypothesis with the evidence shown beside it. The results guide the "
    "next experiments; they do not replace experimental validation.",
    "Not for clinical use or any decision about a patient.",
)

_CSS = """
body{font-family:system-ui,-apple-system,Segoe UI,sans-serif;margin:2em auto;max-width:70em;
color:#1b1b1b;line-height:1.45;padding:0 1em}
h1{font-size:1.6em}h2{font-size:1.25em;margin-top:1.8em;border-bottom:1px solid #ccc}
table{border-collapse:collapse;margin:.6em 0;font-size:.92em}
th,td{border:1px solid #d0d0d0;padding:.25em .6em;text-align:left;vertical-align:top}
th{background:#f2f2f2}td.num{text-align:right;font-variant-numeric:tabular-nums}
td.edge,th.edge{white-space:nowrap}td.state{text-align:center}td.unstable{color:#9a4a00}
.scroll{overflow:auto;max-width:100%;margin:.6em 0}.scroll>table{margin:0}
.scroll.tall{max-height:34em}
.scroll.tall thead th{position:sticky;top:0;z-index:1}
table.matrix td:first-child,table.matrix th:first-child{position:sticky;left:0;
background:#f7f7f7;white-space:nowrap;z-index:2}
table.matrix td{white-space:nowrap}
.warn{background:#fff6e0;border-left:4px solid #e0a000;padding:.4em .8em;margin:.3em 0}
.bad{background:#fde8e8;border-left:4px solid #c03030;padding:.4em .8em}
.caution{background:#eef3fb;border-left:4px solid #3b6bb0;padding:.4em .8em;margin:.3em 0}
.small{color:#555;font-size:.88em}
code{font-size:.92em}
"""


def _e(v: Any) -> str:
    return html.escape(str(v), quote=True)


def _p(v: float | None) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "&ndash;"
    return "&lt; 1e-300" if v == 0 else f"{v:.2g}"


def _table(header: list[str], rows: list[list[str]], numeric: set[int] = frozenset(), *,
           classes: dict[int, str] | None = None, table_id: str = "", table_class: str = "",
           scroll: str = "") -> str:
    """An HTML table of already escaped cells; `scroll` wraps it in a box that scrolls
    ("wide": sideways, "tall": both ways with the header kept in view)."""
    classes = dict(classes or {})
    for i in numeric:
        classes[i] = "num"
    head = "".join(f"<th>{_e(h)}</th>" for h in header)
    body = "".join(
        "<tr>" + "".join(f"<td class=\"{classes[i]}\">{c}</td>" if i in classes
                         else f"<td>{c}</td>" for i, c in enumerate(row)) + "</tr>"
        for row in rows)
    attrs = (f" id=\"{table_id}\"" if table_id else "") + \
        (f" class=\"{table_class}\"" if table_class else "")
    table = f"<table{attrs}><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"
    if scroll:
        return f"<div class=\"scroll{' tall' if scroll == 'tall' else ''}\">{table}</div>"
    return table


def _share(v: float | None) -> str:
    return "&ndash;" if v is None else f"{v:.2f}"


def _response(check: CheckResult) -> str:
    """The response matrix as a table shaded by the standardized shift."""
    resp = check.response
    marked = resp.marked(check.alpha)
    rows = []
    for i, regime in enumerate(resp.regimes):
        cells = [_e(regime)]
        for j in range(len(resp.variables)):
            s = float(resp.shift[i][j])
            if not math.isfinite(s):
                cells.append("&ndash;")
                continue
            a = min(abs(s) / 2.0, 1.0) * (0.85 if marked[i][j] else 0.25)
            colour = f"rgba(192,48,48,{a:.2f})" if s < 0 else f"rgba(48,96,192,{a:.2f})"
            mark = "*" if marked[i][j] else ""
            cells.append(f"<span style=\"background:{colour};padding:0 .3em\">{s:+.2f}{mark}"
                         f"</span>")
        rows.append(cells)
    return _table(["regime"] + list(resp.variables), rows, table_id="response",
                  table_class="matrix", scroll="tall")


def _edge_text(e) -> str:
    return f"{e.source} {'->' if e.orientation == 'directed' else '-'} {e.target}"


def _provenance(p: dict[str, Any]) -> str:
    """A small block: inputs (size, hash), version, date, command line."""
    if not p:
        return ""
    inputs = "".join(
        f"<li>{_e(i.get('role', ''))}: <code>{_e(i.get('path', ''))}</code>, "
        f"{_e(format(int(i.get('bytes', 0)), ','))} bytes, sha256 "
        f"<code>{_e(str(i.get('sha256', ''))[:16])}&hellip;</code></li>"
        for i in p.get("inputs", []))
    return ("<div class=\"small\"><b>Provenance</b>: "
            f"{_e(p.get('tool', 'orienteer'))} {_e(p.get('version', ''))}, run "
            f"{_e(p.get('date', ''))}, command <code>{_e(p.get('command', ''))}</code> "
            f"(Python {_e(p.get('python', ''))}, numpy {_e(p.get('numpy', ''))})"
            + (f"<ul>{inputs}</ul>" if inputs else "") + "</div>")


def render_report(record: ResultRecord, check: CheckResult | None = None,
                  sections: Sequence[tuple[str, str]] = (), picture: bool = False) -> str:
    """The HTML page of a learn result (a string; the caller writes it).

    Parameters
    ----------
    record : ResultRecord
        The content of ``result.json``.
    check : CheckResult, optional
        The input check (target check, response matrix).
    sections : sequence of (title, html)
        Further sections (sweep, plan, validation), already rendered; shown after the
        regimes, in the order given.
    picture : bool
        A ``graph.png`` lies beside the page: link it.
    """
    s = record.settings
    n_dir = sum(1 for e in record.edges if e.orientation == "directed")
    n_und = len(record.edges) - n_dir
    ref = [r.name for r in record.regimes if r.reference]
    parts = [f"<h1>Orienteer: learned causal graph</h1>"
             f"<p>{len(record.nodes)} variables, {len(record.regimes)} regimes "
             f"(reference: {_e(', '.join(ref))}). "
             f"<b>{n_dir + n_und}</b> edges: <b>{n_dir}</b> directed, <b>{n_und}</b> "
             f"undirected. DAGs still possible (class size): "
             f"<b>{_e(format_count(record.class_size))}</b>.</p>",
             _provenance(record.provenance)]
    if not record.valid:
        parts.append("<p class=\"bad\">The learned graph is not a valid essential graph: "
                     + _e("; ".join(record.problems)) + "</p>")
    conflicts = [e for e in record.edges if e.conflict]
    if conflicts:
        parts.append(f"<p class=\"warn\">The tests disagree about {len(conflicts)} edge(s) "
                     f"({_e(', '.join(_edge_text(e) for e in conflicts[:8]))}"
                     f"{', ...' if len(conflicts) > 8 else ''}). The graph shows one consistent "
                     f"answer that keeps the stronger evidence; these edges are marked "
                     f"<i>conflict</i> and their notes say what was set aside.</p>")

    # drawing
    parts.append("<h2>Graph</h2>")
    parts.append(graph_section(record.nodes, record.edges))
    if picture and record.edges and len(record.nodes) <= MAX_DRAWN:
        parts.append("<p class=\"small\">The same drawing as a picture for slides: "
                     "<a href=\"graph.png\">graph.png</a>, beside this page.</p>")

    # edges
    boot = any(e.bootstrap_adjacency is not None for e in record.edges)
    rows = []
    for e in record.edges:
        arrow = "&rarr;" if e.orientation == "directed" else "&mdash;"
        why = e.explanation.split(": ", 1)[-1] if e.explanation else ""
        row = [f"{_e(e.source)} {arrow} {_e(e.target)}", _e(e.rule),
               _e(", ".join(e.via)) or "&ndash;", _p(e.p_adjacency),
               "&ndash;" if e.strength is None else f"{e.strength:.1f}"]
        if boot:
            row += [_share(e.bootstrap_adjacency), _share(e.bootstrap_orientation)]
        rows.append(row + ["<b>yes</b>" if e.conflict else "", _e(why),
                           _e("; ".join(e.notes))])
    header = ["edge", "rule", "via", "p adjacency", "strength"]
    header += ["bootstrap adjacency", "bootstrap orientation"] if boot else []
    parts.append("<h2>Edges</h2>")
    parts.append(_table(header + ["conflict", "why", "notes"], rows,
                        numeric={3, 4, 5, 6} if boot else {3, 4}, classes={0: "edge"},
                        table_id="edges", scroll="tall") if rows
                 else "<p>No edge was found.</p>")
    parts.append("<p class=\"small\">p adjacency: the largest p-value of the tests that kept "
                 "the edge. strength: how firmly the data support the direction, as "
                 "&minus;log10 of the weakest test that had to find a dependence for it (2 "
                 "means p = 0.01; 0: no support, the direction only keeps the graph "
                 "consistent); for a direction that follows from other arrows, the weakest of "
                 "those. The full chain of tests behind each arrow is in result.json."
                 + (" Bootstrap adjacency: the share of resamples in which the pair was "
                    "adjacent; bootstrap orientation: the share in which it had this "
                    "orientation (for an undirected edge: present and undirected)."
                    if boot else "") + "</p>")

    # regimes and targets
    rows = [[_e(r.name), str(r.samples), _e(";".join(r.targets)) or "&ndash;",
             "yes" if r.known else "no",
             "reference" if r.reference else (_e(";".join(r.detected_targets)) or "&ndash;")]
            for r in record.regimes]
    parts.append("<h2>Regimes</h2>")
    parts.append(_table(["regime", "samples", "declared targets", "known", "detected targets"],
                        rows, numeric={1}, classes={0: "edge"}, table_id="regimes",
                        scroll="tall"))
    off = [f for f in record.findings if f.get("status") == "off-target"]
    if off:
        parts.append("<p>Off-target findings (no conditioning set made them invariant):</p>"
                     "<ul>" + "".join(f"<li>{_e(f['regime'])} acts on {_e(f['variable'])} "
                                      f"(p = {_p(f.get('pvalue'))})</li>" for f in off)
                     + "</ul>")
    if check is not None:
        rows = [[_e(t.regime), _e(t.target), "yes" if t.known else "no (hint)",
                 f"{t.shift:+.2f}" if math.isfinite(t.shift) else "&ndash;", _p(t.pvalue),
                 _p(t.conditional_pvalue), _e(t.verdict)] for t in check.targets]
        parts.append("<h2>Target check</h2>")
        parts.append(_table(["regime", "target", "known", "shift", "p", "p given neighbours",
                             "verdict"], rows, numeric={3, 4, 5}, classes={0: "edge"},
                            table_id="targets", scroll="tall")
                     if rows else "<p>No declared targets.</p>")
        parts.append("<h2>Response matrix</h2><p class=\"small\">Standardized mean shift of "
                     "each variable in each regime against the reference; * marks a "
                     f"Benjamini-Hochberg adjusted p &le; {check.alpha:g}. Blue: up, red: "
                     "down.</p>")
        parts.append(_response(check))
    for title, fragment in sections:
        parts.append(f"<h2>{_e(title)}</h2>")  # the fragment escapes its own strings
        parts.append(fragment)

    # warnings, settings, cautions
    parts.append("<h2>Warnings</h2>")
    parts.append("".join(f"<div class=\"warn\">{_e(w)}</div>" for w in record.warnings)
                 or "<p>None.</p>")
    parts.append("<h2>Settings</h2>")
    parts.append(_table(["option", "value"], [[_e(k), _e(v)] for k, v in s.items()],
                        scroll="wide"))
    if record.tests_per_level:
        parts.append(_table(["conditioning-set size", "tests"],
                            [[_e(k), _e(v)] for k, v in record.tests_per_level.items()],
                            numeric={0, 1}))
    parts.append("<h2>Cautions</h2>")
    parts.append("".join(f"<div class=\"caution\">{_e(c)}</div>" for c in CAUTIONS))
    body = "\n".join(parts)
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<title>Orienteer report</title><style>{_CSS}</style></head>\n<body>\n{body}\n"
            "</body></html>\n")
