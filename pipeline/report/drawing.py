"""A drawing of the learned graph as inline SVG, laid out in layers.

A layered drawing puts every variable on a horizontal layer so that directed edges point
downwards, which reads best for a causal graph. It follows the four steps of Sugiyama,
Tagawa & Toda [1]_: (1) make the graph acyclic, (2) assign layers by longest path, with
dummy points where an edge spans several layers, (3) order each layer to reduce edge
crossings with the barycentre heuristic, (4) place the nodes horizontally, here by the
least-squares placement that keeps the order and a minimum gap (solved exactly by
isotonic regression with the pool-adjacent-violators algorithm [2]_). Everything is
deterministic: the same graph gives the same picture, byte for byte.

Undirected edges get a direction for the layout only, from the earlier node of a
topological order of the directed edges (ties by the order of `nodes`); they are drawn
without heads. Directed edges are coloured by the rule that set their direction
(Okabe-Ito colours, which stay distinct under the common colour-vision deficiencies [3]_),
conflicting edges are dashed, and every edge carries an SVG ``<title>`` (a tooltip) with
its evidence. The output has no script and no external resource.

>>> from pipeline.evidence.schema import EdgeRecord
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
import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from pipeline.evidence.schema import EdgeRecord

__all__ = ["graph_svg", "graph_section", "MAX_DRAWN", "MAX_WITH_ISOLATED", "COLOURS"]

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
           ("undirected", "undirected", False), ("conflict", "conflict", False))
_SWEEPS = 4  # barycentre sweeps (down and up) for the crossing reduction
_PLACE_PASSES = 6  # passes of the horizontal placement
_MAX_LABEL = 18  # characters of a node label; the full name is in the tooltip


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
    nodes = [str(n) for n in nodes]
    _validate(nodes, edges, width)
    n = len(nodes)
    # 0. sizes by the number of variables
    font = 12 if n <= 100 else (10 if n <= MAX_WITH_ISOLATED else 9)
    style = _Style(font=font, box_h=round(font * 2.0), layer_gap=round(font * 5.4),
                   sep=round(font * 1.2))
    connected = {e.source for e in edges} | {e.target for e in edges}
    isolated = [v for v in nodes if v not in connected]
    if n > MAX_WITH_ISOLATED:
        isolated = []
    # 1-4. the layered layout of the nodes with edges
    lay = _layout([v for v in nodes if v in connected], edges, style)
    return _render(lay, edges, isolated, style, width)


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
        seen: set[str] = set()
        dup = next(v for v in nodes if v in seen or seen.add(v))
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


# -- layout --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class _Style:
    font: int
    box_h: int
    layer_gap: int
    sep: int
    margin: int = 16
    dummy_sep: int = 10

    def box_w(self, label: str) -> float:
        """Estimated width of a node box holding `label` (about 0.62 em a character)."""
        return max(0.62 * self.font * len(label) + self.font * 1.2, self.box_h * 1.6)


@dataclass
class _Layout:
    """Layers of items (real nodes are str, dummy points are int) and their x."""

    layers: list[list[str | int]]
    layer_of: dict[str | int, int]
    x: dict[str | int, float] = field(default_factory=dict)
    width: dict[str | int, float] = field(default_factory=dict)
    # layout edge (upper, lower) of each drawn edge, and its chain of dummy points
    chains: dict[tuple[str, str], list[str | int]] = field(default_factory=dict)
    up: dict[str | int, list[str | int]] = field(default_factory=dict)
    down: dict[str | int, list[str | int]] = field(default_factory=dict)


def _label(name: str) -> str:
    return name if len(name) <= _MAX_LABEL else name[:_MAX_LABEL - 1] + "\u2026"


def _layout(nodes: list[str], edges: Sequence[EdgeRecord], style: _Style) -> _Layout:
    index = {v: i for i, v in enumerate(nodes)}
    # 1. a linear order: Kahn's algorithm on the directed edges, ties by node order; a
    #    directed cycle (an invalid result) is broken at the node with fewest open in-arcs
    preds: dict[str, set[str]] = {v: set() for v in nodes}
    for e in edges:
        if e.orientation == "directed":
            preds[e.target].add(e.source)
    open_in = {v: len(preds[v]) for v in nodes}
    succs: dict[str, list[str]] = {v: [] for v in nodes}
    for v in nodes:
        for u in preds[v]:
            succs[u].append(v)
    pos: dict[str, int] = {}
    remaining = set(nodes)
    while remaining:
        ready = [v for v in remaining if open_in[v] == 0]
        pick = min(ready or remaining, key=lambda v: (open_in[v], index[v]))
        pos[pick] = len(pos)
        remaining.discard(pick)
        for w in succs[pick]:
            open_in[w] -= 1
    # 2. layout arcs all agree with that order (so they form a DAG); layers by longest
    #    path, then sources moved down to just above their highest child
    arcs: dict[tuple[str, str], tuple[str, str]] = {}
    for e in edges:
        a, b = (e.source, e.target) if pos[e.source] < pos[e.target] else (e.target, e.source)
        arcs[(e.source, e.target)] = (a, b)
    parents: dict[str, list[str]] = {v: [] for v in nodes}
    children: dict[str, list[str]] = {v: [] for v in nodes}
    for a, b in arcs.values():
        parents[b].append(a)
        children[a].append(b)
    layer: dict[str | int, int] = {}
    for v in sorted(nodes, key=pos.__getitem__):
        layer[v] = max((layer[u] + 1 for u in parents[v]), default=0)
    for v in nodes:
        if not parents[v] and children[v]:
            layer[v] = min(layer[c] for c in children[v]) - 1
    depth = max(layer.values(), default=-1) + 1
    layers: list[list[str | int]] = [[] for _ in range(depth)]
    for v in sorted(nodes, key=pos.__getitem__):
        layers[int(layer[v])].append(v)
    lay = _Layout(layers, layer)
    lay.up = {v: [] for v in nodes}
    lay.down = {v: [] for v in nodes}
    # dummy points where an arc spans several layers
    dummy = 0
    for key, (a, b) in arcs.items():
        chain: list[str | int] = [a]
        for k in range(int(layer[a]) + 1, int(layer[b])):
            chain.append(dummy)
            layer[dummy] = k
            layers[k].append(dummy)
            lay.up[dummy], lay.down[dummy] = [], []
            dummy += 1
        chain.append(b)
        for u, w in zip(chain, chain[1:], strict=False):
            lay.down[u].append(w)
            lay.up[w].append(u)
        lay.chains[key] = chain
    # 3. crossing reduction: barycentre sweeps, keeping the best order seen
    best = [list(row) for row in layers]
    best_cross = _crossings(layers, lay.down)
    for sweep in range(_SWEEPS):
        downward = sweep % 2 == 0
        rows = range(1, depth) if downward else range(depth - 2, -1, -1)
        for i in rows:
            ref = layers[i - 1] if downward else layers[i + 1]
            where = {u: k for k, u in enumerate(ref)}
            nbrs = lay.up if downward else lay.down
            keys = {}
            for k, u in enumerate(layers[i]):
                ks = [where[w] for w in nbrs[u]]
                keys[u] = sum(ks) / len(ks) if ks else k
            layers[i].sort(key=keys.__getitem__)  # stable: ties keep their order
        cross = _crossings(layers, lay.down)
        if cross < best_cross:
            best, best_cross = [list(row) for row in layers], cross
    lay.layers = best
    # 4. horizontal placement
    for row in lay.layers:
        for u in row:
            lay.width[u] = style.box_w(_label(u)) if isinstance(u, str) else 0.0
    _place(lay, style)
    return lay


def _crossings(layers: list[list[str | int]], down: dict[str | int, list[str | int]]) -> int:
    """Number of crossing segment pairs between consecutive layers."""
    total = 0
    for i in range(len(layers) - 1):
        top = {u: k for k, u in enumerate(layers[i])}
        low = {u: k for k, u in enumerate(layers[i + 1])}
        seg = np.array([(top[u], low[w]) for u in layers[i] for w in down[u] if w in low],
                       dtype=float).reshape(-1, 2)
        if len(seg) < 2:
            continue
        a, b = seg[:, 0], seg[:, 1]
        total += int(np.sum((a[:, None] < a[None, :]) & (b[:, None] > b[None, :])))
    return total


def _gaps(row: list[str | int], lay: _Layout, style: _Style) -> np.ndarray:
    """Smallest centre-to-centre distance between consecutive items of a layer."""
    g = np.zeros(len(row))
    for k in range(1, len(row)):
        a, b = row[k - 1], row[k]
        sep = style.sep if isinstance(a, str) and isinstance(b, str) else style.dummy_sep
        g[k] = (lay.width[a] + lay.width[b]) / 2 + sep
    return np.cumsum(g)


def _isotonic(y: np.ndarray) -> np.ndarray:
    """Least-squares non-decreasing fit to `y` (pool adjacent violators)."""
    values: list[float] = []
    counts: list[int] = []
    for v in y:
        values.append(float(v))
        counts.append(1)
        while len(values) > 1 and values[-2] > values[-1]:
            c = counts[-2] + counts[-1]
            values[-2] = (values[-2] * counts[-2] + values[-1] * counts[-1]) / c
            counts[-2] = c
            values.pop()
            counts.pop()
    return np.repeat(values, counts)


def _place(lay: _Layout, style: _Style) -> None:
    """x of every item: near the mean x of its neighbours, in order, never too close."""
    offsets = [_gaps(row, lay, style) for row in lay.layers]
    widest = max((off[-1] for off in offsets if len(off)), default=0.0)
    for row, off in zip(lay.layers, offsets, strict=True):
        shift = (widest - (off[-1] if len(off) else 0.0)) / 2
        for u, o in zip(row, off, strict=True):
            lay.x[u] = float(o + shift)
    depth = len(lay.layers)
    for p in range(_PLACE_PASSES):
        downward = p % 2 == 0
        rows = range(depth) if downward else range(depth - 1, -1, -1)
        for i in rows:
            row, off = lay.layers[i], offsets[i]
            if not row:
                continue
            want = np.empty(len(row))
            for k, u in enumerate(row):
                nb = lay.up[u] + lay.down[u]
                want[k] = sum(lay.x[w] for w in nb) / len(nb) if nb else lay.x[u]
            x = _isotonic(want - off) + off
            for u, v in zip(row, x, strict=True):
                lay.x[u] = float(v)


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
    text = (f"{e.source} {arrow} {e.target}, rule {e.rule}, via {', '.join(e.via) or '-'}, "
            f"p_adjacency {_fmt_p(e.p_adjacency)}")
    return text + (", conflicting evidence" if e.conflict else "")


def _clip(cx: float, cy: float, tx: float, ty: float, hw: float, hh: float) -> tuple[float, float]:
    """Where the segment from the box centre (cx, cy) towards (tx, ty) leaves the box."""
    dx, dy = tx - cx, ty - cy
    if dx == 0 and dy == 0:
        return cx, cy
    t = min(hw / abs(dx) if dx else math.inf, hh / abs(dy) if dy else math.inf)
    return cx + t * dx, cy + t * dy


def _render(lay: _Layout, edges: Sequence[EdgeRecord], isolated: list[str], style: _Style,
            width: int) -> str:
    m, f = style.margin, style.font
    # legend band on top, only for the kinds present
    kinds = {_kind(e) for e in edges}
    legend = [item for item in _LEGEND if item[0] in kinds]
    top = m + (2 * f if legend else 0)
    # horizontal extent: centre the drawing, or widen the picture if needed
    left = min((lay.x[u] - lay.width[u] / 2 for row in lay.layers for u in row), default=0.0)
    right = max((lay.x[u] + lay.width[u] / 2 for row in lay.layers for u in row), default=0.0)
    extent = right - left
    total_w = max(width, int(math.ceil(extent + 2 * m)))
    dx = (total_w - extent) / 2 - left
    xs = {u: x + dx for u, x in lay.x.items()}
    ys = {u: top + style.box_h / 2 + k * style.layer_gap for u, k in lay.layer_of.items()}
    height = top + (len(lay.layers) - 1) * style.layer_gap + style.box_h + m
    # isolated nodes: rows below the graph
    iso_xy: dict[str, tuple[float, float]] = {}
    if isolated:
        y = height + f * 1.5 if lay.layers else top + f * 1.5
        label_y = y - f * 0.5
        y += style.box_h / 2 + f * 0.5
        x = float(m)
        for v in isolated:
            w = style.box_w(_label(v))
            if x + w > total_w - m and x > m:
                x, y = float(m), y + style.box_h + style.sep
            iso_xy[v] = (x + w / 2, y)
            x += w + style.sep
        height = y + style.box_h / 2 + m
    else:
        label_y = 0.0
    height = int(math.ceil(height))
    out = [f"<svg class=\"og-graph\" width=\"{total_w}\" height=\"{height}\" "
           f"viewBox=\"0 0 {total_w} {height}\" role=\"img\" aria-label=\"drawing of the "
           f"learned graph\" font-family=\"system-ui, sans-serif\" font-size=\"{f}\">",
           "<style>.og-edge:hover{stroke-width:4}</style>", "<defs>"]
    for kind, _, head in _LEGEND:
        if head:
            out.append(f"<marker id=\"og-head-{kind}\" viewBox=\"0 0 10 10\" refX=\"10\" "
                       f"refY=\"5\" markerWidth=\"5\" markerHeight=\"5\" "
                       f"orient=\"auto-start-reverse\"><path d=\"M0,0 L10,5 L0,10 z\" "
                       f"fill=\"{COLOURS[kind]}\"/></marker>")
    out.append("</defs>")
    # legend
    x = float(m)
    for kind, text, head in legend:
        dash = " stroke-dasharray=\"6 4\"" if kind == "conflict" else ""
        marker = f" marker-end=\"url(#og-head-{kind})\"" if head else ""
        out.append(f"<line class=\"og-legend\" x1=\"{x:.1f}\" y1=\"{m + f / 2:.1f}\" "
                   f"x2=\"{x + 28:.1f}\" y2=\"{m + f / 2:.1f}\" stroke=\"{COLOURS[kind]}\" "
                   f"stroke-width=\"2\"{dash}{marker}/>")
        out.append(f"<text x=\"{x + 34:.1f}\" y=\"{m + f / 2:.1f}\" dominant-baseline=\"central\" "
                   f"fill=\"#333\">{_e(text)}</text>")
        x += 34 + 0.62 * f * len(text) + 2 * f
    # edges, under the nodes
    hh = style.box_h / 2
    for e in edges:
        chain = lay.chains[(e.source, e.target)]
        pts = [(xs[u], ys[u]) for u in chain]
        a, b = chain[0], chain[-1]
        pts[0] = _clip(*pts[0], *pts[1], lay.width[a] / 2, hh)
        pts[-1] = _clip(*pts[-1], *pts[-2], lay.width[b] / 2 + 1, hh + 1)
        if chain[0] != e.source:  # the layout arc runs against the edge: draw it forwards
            pts.reverse()
        kind = _kind(e)
        d = "M" + " L".join(f"{px:.1f},{py:.1f}" for px, py in pts)
        dash = " stroke-dasharray=\"6 4\"" if kind == "conflict" else ""
        marker = (f" marker-end=\"url(#og-head-{kind})\""
                  if e.orientation == "directed" and kind != "conflict" else "")
        out.append(f"<path class=\"og-edge og-{kind}\" d=\"{d}\" fill=\"none\" "
                   f"stroke=\"{COLOURS[kind]}\" stroke-width=\"2\" stroke-linejoin=\"round\""
                   f"{dash}{marker}><title>{_e(_tooltip(e))}</title></path>")
    # nodes
    drawn = [(u, xs[u], ys[u]) for row in lay.layers for u in row if isinstance(u, str)]
    if iso_xy:
        out.append(f"<text x=\"{m}\" y=\"{label_y:.1f}\" fill=\"#555\">variables without any "
                   f"edge:</text>")
    drawn += [(v, x, y) for v, (x, y) in iso_xy.items()]
    for name, cx, cy in drawn:
        w = style.box_w(_label(name))
        out.append(f"<g class=\"og-node\"><title>{_e(name)}</title>"
                   f"<rect class=\"og-box\" x=\"{cx - w / 2:.1f}\" y=\"{cy - hh:.1f}\" "
                   f"width=\"{w:.1f}\" height=\"{style.box_h}\" rx=\"{hh / 2:.1f}\" "
                   f"fill=\"#ffffff\" stroke=\"#333333\" stroke-width=\"1.2\"/>"
                   f"<text x=\"{cx:.1f}\" y=\"{cy:.1f}\" text-anchor=\"middle\" "
                   f"dominant-baseline=\"central\" fill=\"#111\">{_e(_label(name))}</text></g>")
    out.append("</svg>")
    return "\n".join(out)
