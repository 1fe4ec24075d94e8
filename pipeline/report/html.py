"""The report of a ``learn`` run: one self-contained HTML page.

The page has no external resource (styles inline, no scripts, no fonts or images
fetched) so it can be mailed or archived as one file. Every string that comes from the
user's inputs (variable and regime names, warnings) is escaped.
"""

from __future__ import annotations

import html
import math
from typing import Any

from pipeline.report.drawing import graph_section

__all__ = ["render_report", "CAUTIONS"]

CAUTIONS = (
    "The graph is learned under causal sufficiency (no unmeasured common cause of two "
    "measured variables) and faithfulness (every independence in the data comes from the "
    "graph). A hidden confounder or cancelling pathways can add, remove or turn edges.",
    "The tests assume linear relations and Gaussian noise (or, with --test rank, a "
    "monotone transform of them). Strongly non-linear relations may be missed.",
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
.warn{background:#fff6e0;border-left:4px solid #e0a000;padding:.4em .8em;margin:.3em 0}
.bad{background:#fde8e8;border-left:4px solid #c03030;padding:.4em .8em}
.caution{background:#eef3fb;border-left:4px solid #3b6bb0;padding:.4em .8em;margin:.3em 0}
.small{color:#555;font-size:.88em}
"""


def _e(v: Any) -> str:
    return html.escape(str(v), quote=True)


def _p(v: float | None) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "&ndash;"
    return "&lt; 1e-300" if v == 0 else f"{v:.2g}"


def _table(header: list[str], rows: list[list[str]], numeric: set[int] = frozenset()) -> str:
    head = "".join(f"<th>{_e(h)}</th>" for h in header)
    body = "".join(
        "<tr>" + "".join(f"<td class=\"num\">{c}</td>" if i in numeric else f"<td>{c}</td>"
                         for i, c in enumerate(row)) + "</tr>"
        for row in rows)
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _response(check: Any) -> str:
    """The response matrix as a table shaded by the standardized shift."""
    resp = check.response
    rows = []
    for i, regime in enumerate(resp.regimes):
        cells = [_e(regime)]
        for j in range(len(resp.variables)):
            s, p = float(resp.shift[i][j]), float(resp.pvalue[i][j])
            if not math.isfinite(s):
                cells.append("&ndash;")
                continue
            a = min(abs(s) / 2.0, 1.0) * (0.85 if p <= check.alpha else 0.25)
            colour = f"rgba(192,48,48,{a:.2f})" if s < 0 else f"rgba(48,96,192,{a:.2f})"
            mark = "*" if p <= check.alpha else ""
            cells.append(f"<span style=\"background:{colour};padding:0 .3em\">{s:+.2f}{mark}"
                         f"</span>")
        rows.append(cells)
    return _table(["regime"] + list(resp.variables), rows)


def render_report(result: Any) -> str:
    """The HTML page of a `LearnResult` (a string; the caller writes it)."""
    design, learned, s = result.design, result.learned, result.settings
    g = result.graph
    n_dir = sum(1 for _ in g.directed_edges())
    n_und = sum(1 for _ in g.undirected_edges())
    parts = [f"<h1>Orienteer: learned causal graph</h1>"
             f"<p>{len(design.variables)} variables, {len(design.regimes)} regimes "
             f"(reference: {_e(', '.join(r.name for r in design.reference))}). "
             f"<b>{n_dir + n_und}</b> edges: <b>{n_dir}</b> directed, <b>{n_und}</b> "
             f"undirected. DAGs still possible (class size): <b>{result.class_size}</b>.</p>"]
    if not result.valid:
        parts.append("<p class=\"bad\">The learned graph is not a valid essential graph: "
                     + _e("; ".join(learned.problems)) + "</p>")

    # drawing
    parts.append("<h2>Graph</h2>")
    parts.append(graph_section(design.variables, result.edge_records))

    # edges
    rows = []
    for e in result.edge_records:
        arrow = "&rarr;" if e.orientation == "directed" else "&mdash;"
        rows.append([f"{_e(e.source)} {arrow} {_e(e.target)}", _e(e.orientation), _e(e.rule),
                     _e(", ".join(e.via)) or "&ndash;", _p(e.p_adjacency), _p(e.p_orientation),
                     "yes" if e.conflict else "", _e("; ".join(e.notes))])
    parts.append("<h2>Edges</h2>")
    parts.append(_table(["edge", "orientation", "rule", "via", "p adjacency", "p orientation",
                         "conflict", "notes"], rows, numeric={4, 5}) if rows
                 else "<p>No edge was found.</p>")
    parts.append("<p class=\"small\">p adjacency: the largest p-value of the tests that kept "
                 "the edge. p orientation: the p-value of the separating test behind the "
                 "collider that oriented it.</p>")

    # regimes and targets
    rows = [[_e(r.name), str(r.samples), _e(";".join(r.targets)) or "&ndash;",
             "yes" if r.known else "no",
             "reference" if r.reference else (_e(";".join(learned.targets.get(r.name, ())))
                                              or "&ndash;")]
            for r in design.regimes]
    parts.append("<h2>Regimes</h2>")
    parts.append(_table(["regime", "samples", "declared targets", "known", "detected targets"],
                        rows, numeric={1}))
    off = [f for f in learned.findings if f.status == "off-target"]
    if off:
        parts.append("<p>Off-target findings (no conditioning set made them invariant):</p>"
                     "<ul>" + "".join(f"<li>{_e(f.regime)} acts on {_e(f.variable)} "
                                      f"(p = {_p(f.pvalue)})</li>" for f in off) + "</ul>")
    check = result.check
    if check is not None:
        rows = [[_e(t.regime), _e(t.target), "yes" if t.known else "no (hint)",
                 f"{t.shift:+.2f}" if math.isfinite(t.shift) else "&ndash;", _p(t.pvalue),
                 _e(t.verdict)] for t in check.targets]
        parts.append("<h2>Target check</h2>")
        parts.append(_table(["regime", "target", "known", "shift", "p", "verdict"], rows,
                            numeric={3, 4}) if rows else "<p>No declared targets.</p>")
        parts.append("<h2>Response matrix</h2><p class=\"small\">Standardized mean shift of "
                     "each variable in each regime against the reference; * marks p &le; "
                     f"{check.alpha:g}. Blue: up, red: down.</p>")
        parts.append(_response(check))

    # warnings, settings, cautions
    parts.append("<h2>Warnings</h2>")
    parts.append("".join(f"<div class=\"warn\">{_e(w)}</div>" for w in result.warnings)
                 or "<p>None.</p>")
    parts.append("<h2>Settings</h2>")
    parts.append(_table(["option", "value"], [[_e(k), _e(v)] for k, v in s.items()]))
    if learned.tests_per_level:
        parts.append(_table(["conditioning-set size", "tests"],
                            [[str(k), str(v)] for k, v in sorted(learned.tests_per_level.items())],
                            numeric={0, 1}))
    parts.append("<h2>Cautions</h2>")
    parts.append("".join(f"<div class=\"caution\">{_e(c)}</div>" for c in CAUTIONS))
    body = "\n".join(parts)
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<title>Orienteer report</title><style>{_CSS}</style></head>\n<body>\n{body}\n"
            "</body></html>\n")
