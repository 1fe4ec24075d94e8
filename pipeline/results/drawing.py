"""A drawing of the learned graph as inline SVG, laid out in layers.

A layered drawing puts every variable on a horizontal layer so that directed edges point
downwards, which reads best for a causal graph. The layout (`pipeline.results.layout`)
follows the four steps of Sugiyama, Tagawa & Toda [1]_: make the graph acyclic, assign
layers by longest path, order each layer to reduce crossings, and place the nodes by the
least-squares fit that keeps the order (isotonic regression [2]_). Everything is
deterministic: the same graph gives the same picture, byte for byte.

Undirected edges get a direction for the layout only, from the earlier node of a
topological order of the directed edges (ties by the order of `nodes`); they are drawn
without heads. Directed edges are coloured by the rule that set their direction
(Okabe-Ito colours, which stay distinct under the common colour-vision deficiencies [3]_),
conflicting edges are dashed (with a head when the result directs them), and every edge
carries an SVG ``<title>`` (a tooltip) with its evidence. The output has no script and no
external resource.

>>> from pipeline.results.schema import EdgeRecord
>>> svg = graph_svg(["A", "B"], [EdgeRecord("A", "B", "directed", "intervention")])
>>> svg.startswith("<svg") and svg.count('class="og-edge') == 1
True

References
----------
1. K. Sugiyama, S. Tagawa, M. Toda (1981). Methods for visual understanding of
   hierarchical system structures. IEEE Transactions on Systems, Man, and Cybernetics
   11(2), 109-125.
2. M. Ayer, H. D. Brunk, G. M. Ewing, W. T. Reid, E. Silverman (1955). An empirical
   distribution function for sampling with incomplete information. Annals of Mathematical
   Statistics 26(4), 641-647.
3. M. Okabe, K. Ito (2002). Color universal design: how to make figures and
   presentations that are friendly to colorblind people.
"""

from __future__ import annotations

import html
import itertools
import math
from collections.abc import Sequence

from pipeline.records import record
from pipeline.results.layout import Layout, Style, components, layered_layout, short_label
from pipeline.results.schema import EdgeRecord

__all__ = ["graph_svg", "graph_section", "graph_geometry", "Geometry", "MAX_DRAWN",
           "MAX_WITH_ISOLATED", "COLOURS"]

#: Above this many variables the report shows no drawing (graph.graphml is for them).
MAX_DRAWN = 400
#: Above this many variables, variables without an edge are left out of the drawing.
MAX_WITH_ISOLATED = 150

#: Edge colours by kind (Okabe-Ito palette).
COLOURS = {
    "intervention": "#0072B2",  # blue
    "collider": "#E69F00",  # orange
    "meek": "#009E73",  # bluish green
    "other": "#444444",  # directed, no rule recorded
    "undirected": "#999999",  # grey
    "conflict": "#D55E00",  # vermillion (the colour-blind-safe red)
}
_LEGEND = (("intervention", "intervention", True), ("collider", "collider", True),
           ("meek", "Meek rule", True), ("other", "directed, other", True),
           ("undirected", "undirected", False), ("conflict", "conflict", True))


# -- the public functions ------------------------------------------------------------------------
def graph_svg(nodes: Sequence[str], edges: Sequence[EdgeRecord], *, width: int = 900) -> str:
    """The graph as an inline ``<svg>`` element, laid out in layers.

    Parameters
    ----------
    nodes : sequence of str
        The variables, in their order (ties in the layout follow it).
    edges : sequence of EdgeRecord
        The edges; an undirected edge has no head, a directed one an arrowhead.
    width : int, default 900
        Width of the picture in pixels; a graph with very wide layers gets wider.

    Returns
    -------
    str
        An ``<svg>`` element (no XML namespace attribute: it is meant for an HTML5 page).
        With more than `MAX_WITH_ISOLATED` nodes, nodes without an edge are left out;
        with fewer, they are drawn in a row below the graph.

    Raises
    ------
    ValueError
        If `nodes` repeats a name, an edge names a node not in `nodes`, or `width` is
        below 200.
    """
    return _svg(graph_geometry(nodes, edges, width=width))


def graph_section(nodes: Sequence[str], edges: Sequence[EdgeRecord], *, width: int = 900) -> str:
    """The drawing for the report: the SVG and a caption, or a sentence when too large.

    Parameters
    ----------
    nodes, edges, width
        As for `graph_svg`.

    Returns
    -------
    str
        HTML: a ``<div>`` holding the SVG and a ``<p>`` caption explaining the marks.
    """
    n = len(nodes)
    if n > MAX_DRAWN:
        return (f"<p>The graph has {n} variables, too many to draw legibly here (the limit "
                f"is {MAX_DRAWN}). Open graph.graphml in a graph viewer instead.</p>")
    if not edges:
        return "<p>No edge was found, so there is nothing to draw.</p>"
    svg = graph_svg(nodes, edges, width=width)
    caption = ("Arrows are directed edges, coloured by the rule that set their direction; "
               "grey lines without heads are undirected edges (either direction is "
               "possible); dashed lines mark conflicting evidence. Hover over an edge for "
               "its rule, the regimes or nodes it used and its p-value.")
    if n > MAX_WITH_ISOLATED:
        caption += " With this many variables, variables without any edge are omitted."
    return (f"<div style=\"overflow-x:auto\">{svg}</div>"
            f"<p class=\"small\">{caption}</p>")


# -- validation ----------------------------------------------------------------------------------
def _validate(nodes: list[str], edges: Sequence[EdgeRecord], width: int) -> None:
    if isinstance(width, bool) or not isinstance(width, int) or width < 200:
        raise ValueError(f"width {width!r}: expected a whole number of pixels >= 200")
    if len(set(nodes)) != len(nodes):
        dup = next(v for k, v in enumerate(nodes) if v in nodes[:k])
        raise ValueError(f"nodes: {dup!r} appears twice; node names must be unique")
    known = set(nodes)
    for e in edges:
        for end in (e.source, e.target):
            if end not in known:
                raise ValueError(f"edges: edge {e.source} - {e.target} names {end!r}, which "
                                 f"is not in nodes; pass every endpoint in nodes")
        if e.source == e.target:
            raise ValueError(f"edges: edge {e.source} - {e.target} is a loop; a graph of "
                             f"variables has none")


# -- rendering -----------------------------------------------------------------------------------
def _e(v: object) -> str:
    return html.escape(str(v), quote=True)


def _kind(e: EdgeRecord) -> str:
    if e.conflict:
        return "conflict"
    if e.orientation != "directed":
        return "undirected"
    if e.rule in ("intervention", "collider"):
        return e.rule
    return "meek" if e.rule.startswith("meek") else "other"


def _fmt_p(v: float | None) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "-"
    return "< 1e-300" if v == 0 else f"{v:.2g}"


def _tooltip(e: EdgeRecord) -> str:
    arrow = "->" if e.orientation == "directed" else "--"
    text = (f"{e.source} {arrow} {e.target}; rule {e.rule}; via {', '.join(e.via) or '-'}; "
            f"p_adjacency {_fmt_p(e.p_adjacency)}")
    if e.strength is not None:
        text += f"; strength {e.strength:.1f}"
    text += "; conflicting evidence" if e.conflict else ""
    return text + (f". {e.explanation}" if e.explanation else "")


def _ports(chains: dict[tuple[str, str], list[str | int]], xs: dict[str | int, float],
           widths: dict[str | int, float]) -> dict[tuple[tuple[str, str], str], float]:
    """x where each edge leaves the bottom of its upper box ("out") and enters the top of
    its lower box ("in"): spread over the middle of the box in the order of the other end."""
    sides: dict[tuple[str | int, str], list[tuple[float, tuple[str, str]]]] = {}
    for key, chain in chains.items():
        sides.setdefault((chain[0], "out"), []).append((xs[chain[1]], key))
        sides.setdefault((chain[-1], "in"), []).append((xs[chain[-2]], key))
    ports = {}
    for (node, side), ends in sides.items():
        ends.sort()
        spread = min(widths[node] * 0.8, 12.0 * (len(ends) - 1))
        for k, (_, key) in enumerate(ends):
            frac = k / (len(ends) - 1) - 0.5 if len(ends) > 1 else 0.0
            ports[key, side] = xs[node] + frac * spread
    return ports


def _pack(layouts: list[Layout], style: Style, width: int, top: float
          ) -> tuple[dict[str | int, float], dict[str | int, float], int, float]:
    """Place the parts in rows (shelves) of at most `width`: x and y of every item, the
    width of the picture and the bottom of the last row."""
    gap = 3 * style.sep
    avail = width - 2 * style.margin
    shelves: list[list[tuple[Layout, float]]] = []
    used = math.inf
    for lay in layouts:
        left, right = lay.span()
        if used + gap + (right - left) > avail:
            shelves.append([])
            used = -gap
        shelves[-1].append((lay, used + gap - left))
        used += gap + (right - left)
    rows_w = [max((lay.span()[1] + off for lay, off in row), default=0.0) for row in shelves]
    total_w = max(width, int(math.ceil(max(rows_w, default=0.0) + 2 * style.margin)))
    xs: dict[str | int, float] = {}
    ys: dict[str | int, float] = {}
    y = top
    for row, row_w in zip(shelves, rows_w, strict=True):
        dx = (total_w - row_w) / 2
        for lay, off in row:
            for u, x in lay.x.items():
                xs[u] = x + off + dx
                ys[u] = y + style.box_h / 2 + lay.layer_of[u] * style.layer_gap
        depth = max(len(lay.layers) for lay, _ in row)
        y += (depth - 1) * style.layer_gap + style.box_h + style.layer_gap / 2
    return xs, ys, total_w, (y - style.layer_gap / 2 if shelves else top)


def _stroke(kind: str, head: bool) -> str:
    """Colour, dashes and arrowhead attributes of an edge mark of `kind`."""
    dash = " stroke-dasharray=\"6 4\"" if kind == "conflict" else ""
    marker = f" marker-end=\"url(#og-head-{kind})\"" if head else ""
    return f"stroke=\"{COLOURS[kind]}\" stroke-width=\"2\"{dash}{marker}"


def _isolated_rows(isolated: list[str], style: Style, total_w: int, y: float
                   ) -> tuple[dict[str, tuple[float, float]], float]:
    """Centres of the nodes without edges, in rows from `y` down; and the bottom."""
    m, out, x = style.margin, {}, float(style.margin)
    y += style.box_h / 2
    for v in isolated:
        w = style.box_w(short_label(v))
        if x + w > total_w - m and x > m:
            x, y = float(m), y + style.box_h + style.sep
        out[v] = (x + w / 2, y)
        x += w + style.sep
    return out, y + style.box_h / 2


@record
class Geometry:
    """Where every mark of the drawing goes (pixels, y downwards); the SVG and the PNG
    (`pipeline.results.picture`) are both drawn from it.

    Attributes
    ----------
    width, height : int
    style : Style
    legend : list of (kind, text, head, x, y), the legend items and their start
    edges : list of (EdgeRecord, kind, head, points), each edge's polyline
    nodes : list of (name, cx, cy, box width)
    isolated_label : (x, y) of the caption above the variables without edges, or None
    """

    width: int
    height: int
    style: Style
    legend: list[tuple[str, str, bool, float, float]]
    edges: list[tuple[EdgeRecord, str, bool, list[tuple[float, float]]]]
    nodes: list[tuple[str, float, float, float]]
    isolated_label: tuple[float, float] | None


def graph_geometry(nodes: Sequence[str], edges: Sequence[EdgeRecord], *,
                   width: int = 900) -> Geometry:
    """The positions of every mark of the drawing (see `graph_svg` for the arguments)."""
    nodes = [str(n) for n in nodes]
    _validate(nodes, edges, width)
    n = len(nodes)
    # 0. sizes by the number of variables
    font = 12 if n <= 100 else (10 if n <= MAX_WITH_ISOLATED else 9)
    style = Style(font=font, box_h=round(font * 2.0), layer_gap=round(font * 5.4),
                  sep=round(font * (2.0 if n <= 100 else 1.2)))
    connected = {e.source for e in edges} | {e.target for e in edges}
    isolated = [v for v in nodes if v not in connected]
    if n > MAX_WITH_ISOLATED:
        isolated = []
    # 1-4. a layered layout of each connected part, largest first
    dummies = itertools.count()  # dummy points are numbered across the parts
    layouts = [layered_layout(part_nodes, part_edges, style, width - 2 * style.margin, dummies)
               for part_nodes, part_edges in components([v for v in nodes if v in connected],
                                                         edges)]
    return _geometry(layouts, edges, isolated, style, width)


def _geometry(layouts: list[Layout], edges: Sequence[EdgeRecord], isolated: list[str],
              style: Style, width: int) -> Geometry:
    m, f, hh = style.margin, style.font, style.box_h / 2
    # where everything goes: legend on top (kinds present only), the parts in rows (the
    # picture widens if one part is wider than `width`), nodes without edges below
    legend = [item for item in _LEGEND if item[0] in {_kind(e) for e in edges}]
    top = m + (2 * f if legend else 0)
    xs, ys, total_w, bottom = _pack(layouts, style, width, top)
    widths: dict[str | int, float] = {}
    chains: dict[tuple[str, str], list[str | int]] = {}
    for lay in layouts:
        widths.update(lay.width)
        chains.update(lay.chains)
    nodes = [(u, xs[u], ys[u]) for lay in layouts for row in lay.layers for u in row
             if isinstance(u, str)]
    label_y = (bottom + 1.5 * f) if layouts else top + f
    iso, bottom = _isolated_rows(isolated, style, total_w, label_y + f * 0.5) if isolated \
        else ({}, bottom)
    nodes += [(v, x, y) for v, (x, y) in iso.items()]
    height = int(math.ceil(bottom + m))
    placed_legend = []
    x, y = float(m), m + f / 2
    for kind, text, head in legend:
        placed_legend.append((kind, text, head, x, y))
        x += 34 + 0.62 * f * len(text) + 2 * f
    ports = _ports(chains, xs, widths)
    lines = []
    for e in edges:
        chain = chains[(e.source, e.target)]
        pts = [(xs[u], ys[u]) for u in chain]
        key = (e.source, e.target)
        pts[0] = (ports[key, "out"], ys[chain[0]] + hh)
        pts[-1] = (ports[key, "in"], ys[chain[-1]] - hh - 1)
        if chain[0] != e.source:  # the layout arc runs against the edge: draw it forwards
            pts.reverse()
        kind = _kind(e)
        lines.append((e, kind, e.orientation == "directed", pts))
    boxes = [(name, cx, cy, style.box_w(short_label(name))) for name, cx, cy in nodes]
    return Geometry(total_w, height, style, placed_legend, lines, boxes,
                    (float(m), label_y) if iso else None)


def _render(layouts: list[Layout], edges: Sequence[EdgeRecord], isolated: list[str],
            style: Style, width: int) -> str:
    return _svg(_geometry(layouts, edges, isolated, style, width))


def _svg(g: Geometry) -> str:
    f, hh = g.style.font, g.style.box_h / 2
    total_w, height = g.width, g.height
    # the marks: header, arrowheads, legend, edges under the nodes, nodes
    out = [f"<svg class=\"og-graph\" width=\"{total_w}\" height=\"{height}\" "
           f"viewBox=\"0 0 {total_w} {height}\" role=\"img\" aria-label=\"drawing of the "
           f"learned graph\" font-family=\"system-ui, sans-serif\" font-size=\"{f}\">",
           "<style>.og-edge:hover{stroke-width:4}</style>", "<defs>"]
    out += [f"<marker id=\"og-head-{kind}\" viewBox=\"0 0 10 10\" refX=\"10\" refY=\"5\" "
            f"markerWidth=\"5\" markerHeight=\"5\" orient=\"auto-start-reverse\">"
            f"<path d=\"M0,0 L10,5 L0,10 z\" fill=\"{COLOURS[kind]}\"/></marker>"
            for kind, _, head in _LEGEND if head]
    out.append("</defs>")
    for kind, text, head, x, y in g.legend:
        out.append(f"<line class=\"og-legend\" x1=\"{x:.1f}\" y1=\"{y:.1f}\" "
                   f"x2=\"{x + 28:.1f}\" y2=\"{y:.1f}\" {_stroke(kind, head)}/>"
                   f"<text x=\"{x + 34:.1f}\" y=\"{y:.1f}\" dominant-baseline=\"central\" "
                   f"fill=\"#333\">{_e(text)}</text>")
    for e, kind, head, pts in g.edges:
        d = "M" + " L".join(f"{px:.1f},{py:.1f}" for px, py in pts)
        out.append(f"<path class=\"og-edge og-{kind}\" d=\"{d}\" fill=\"none\" "
                   f"stroke-linejoin=\"round\" {_stroke(kind, head)}>"
                   f"<title>{_e(_tooltip(e))}</title></path>")
    if g.isolated_label is not None:
        lx, ly = g.isolated_label
        out.append(f"<text x=\"{lx:g}\" y=\"{ly:.1f}\" fill=\"#555\">variables without "
                   f"any edge:</text>")
    for name, cx, cy, w in g.nodes:
        out.append(f"<g class=\"og-node\"><title>{_e(name)}</title>"
                   f"<rect class=\"og-box\" x=\"{cx - w / 2:.1f}\" y=\"{cy - hh:.1f}\" "
                   f"width=\"{w:.1f}\" height=\"{g.style.box_h}\" rx=\"{hh / 2:.1f}\" "
                   f"fill=\"#ffffff\" stroke=\"#333333\" stroke-width=\"1.2\"/>"
                   f"<text x=\"{cx:.1f}\" y=\"{cy:.1f}\" text-anchor=\"middle\" "
                   f"dominant-baseline=\"central\" fill=\"#111\">"
                   f"{_e(short_label(name))}</text></g>")
    out.append("</svg>")
    return "\n".join(out)
