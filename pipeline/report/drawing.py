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
import itertools
import math
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field

import networkx as nx
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
_FILL = 0.75  # share of a layer's width for nodes; the rest is for edges passing through
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
                   sep=round(font * (2.0 if n <= 100 else 1.2)))
    connected = {e.source for e in edges} | {e.target for e in edges}
    isolated = [v for v in nodes if v not in connected]
    if n > MAX_WITH_ISOLATED:
        isolated = []
    # 1-4. a layered layout of each connected part, largest first
    dummies = itertools.count()  # dummy points are numbered across the parts
    layouts = [_layout(part_nodes, part_edges, style, width - 2 * style.margin, dummies)
               for part_nodes, part_edges in _components([v for v in nodes if v in connected],
                                                         edges)]
    return _render(layouts, edges, isolated, style, width)


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

    def span(self) -> tuple[float, float]:
        """Left and right end of the drawing of this part."""
        items = [u for row in self.layers for u in row]
        return (min(self.x[u] - self.width[u] / 2 for u in items),
                max(self.x[u] + self.width[u] / 2 for u in items))


def _label(name: str) -> str:
    return name if len(name) <= _MAX_LABEL else name[:_MAX_LABEL - 1] + "\u2026"


def _components(nodes: list[str], edges: Sequence[EdgeRecord]
                ) -> list[tuple[list[str], list[EdgeRecord]]]:
    """The connected parts (edges taken without direction), largest first, then by node order."""
    g = nx.Graph()
    g.add_nodes_from(nodes)
    g.add_edges_from((e.source, e.target) for e in edges)
    index = {v: i for i, v in enumerate(nodes)}
    parts = [sorted(c, key=index.__getitem__) for c in nx.connected_components(g)]
    parts.sort(key=lambda c: (-len(c), index[c[0]]))
    where = {v: k for k, c in enumerate(parts) for v in c}
    part_edges: list[list[EdgeRecord]] = [[] for _ in parts]
    for e in edges:
        part_edges[where[e.source]].append(e)
    return list(zip(parts, part_edges, strict=True))


def _linear_order(nodes: list[str], edges: Sequence[EdgeRecord]) -> dict[str, int]:
    """Position of each node in a topological order of the directed edges (Kahn's algorithm,
    ties by node order); a directed cycle (an invalid result) is broken at the node with
    the fewest open in-arcs."""
    index = {v: i for i, v in enumerate(nodes)}
    succs: dict[str, list[str]] = {v: [] for v in nodes}
    open_in = dict.fromkeys(nodes, 0)
    for e in edges:
        if e.orientation == "directed":
            succs[e.source].append(e.target)
            open_in[e.target] += 1
    pos: dict[str, int] = {}
    remaining = set(nodes)
    while remaining:
        pick = min(remaining, key=lambda v: (open_in[v], index[v]))
        pos[pick] = len(pos)
        remaining.discard(pick)
        for w in succs[pick]:
            open_in[w] -= 1
    return pos


def _assign_layers(nodes: list[str], arcs: list[tuple[str, str]], pos: dict[str, int],
                   need: dict[str, float], capacity: float) -> dict[str, int]:
    """Layers by longest path over the arcs, except that a full layer (nodes needing more
    than `capacity`) sends a node further down; sources then move to just above their
    highest child where there is room. Empty layers are dropped."""
    parents: dict[str, list[str]] = {v: [] for v in nodes}
    children: dict[str, list[str]] = {v: [] for v in nodes}
    for a, b in arcs:
        parents[b].append(a)
        children[a].append(b)
    layer: dict[str, int] = {}
    load: list[float] = []
    for v in sorted(nodes, key=pos.__getitem__):
        k = max((layer[u] + 1 for u in parents[v]), default=0)
        while k < len(load) and load[k] > 0 and load[k] + need[v] > capacity:
            k += 1
        load.extend([0.0] * (k + 1 - len(load)))
        layer[v] = k
        load[k] += need[v]
    for v in nodes:
        if not parents[v] and children[v]:
            k = min(layer[c] for c in children[v]) - 1
            if k > layer[v] and load[k] + need[v] <= capacity:
                load[layer[v]] -= need[v]
                load[k] += need[v]
                layer[v] = k
    renumber = {k: i for i, k in enumerate(sorted(set(layer.values())))}
    return {v: renumber[k] for v, k in layer.items()}


def _layout(nodes: list[str], edges: Sequence[EdgeRecord], style: _Style, capacity: float,
            dummies: Iterator[int]) -> _Layout:
    """Layers, order and x of one connected part; dummy points numbered by `dummies`."""
    # 1. acyclic: every layout arc follows one linear order of the nodes
    pos = _linear_order(nodes, edges)
    arcs = {(e.source, e.target): (e.source, e.target) if pos[e.source] < pos[e.target]
            else (e.target, e.source) for e in edges}
    # 2. layers, and dummy points where an arc spans several layers
    need = {v: style.box_w(_label(v)) + style.sep for v in nodes}
    layer: dict[str | int, int] = dict(
        _assign_layers(nodes, list(arcs.values()), pos, need, _FILL * capacity))
    layers: list[list[str | int]] = [[] for _ in range(max(layer.values()) + 1)]
    for v in sorted(nodes, key=pos.__getitem__):
        layers[layer[v]].append(v)
    lay = _Layout(layers, layer, up={v: [] for v in nodes}, down={v: [] for v in nodes})
    for key, (a, b) in arcs.items():
        chain: list[str | int] = [a]
        for k in range(layer[a] + 1, layer[b]):
            dummy = next(dummies)
            chain.append(dummy)
            layer[dummy] = k
            layers[k].append(dummy)
            lay.up[dummy], lay.down[dummy] = [], []
        chain.append(b)
        for u, w in zip(chain, chain[1:], strict=False):
            lay.down[u].append(w)
            lay.up[w].append(u)
        lay.chains[key] = chain
    # 3. crossing reduction, 4. horizontal placement
    lay.layers = _reduce_crossings(layers, lay.up, lay.down)
    for row in lay.layers:
        for u in row:
            lay.width[u] = style.box_w(_label(u)) if isinstance(u, str) else 0.0
    _place(lay, style, capacity)
    return lay


def _reduce_crossings(layers: list[list[str | int]], up: dict[str | int, list[str | int]],
                      down: dict[str | int, list[str | int]]) -> list[list[str | int]]:
    """Barycentre sweeps, down and up; the order with the fewest crossings seen."""
    layers = [list(row) for row in layers]
    best, best_cross = [list(row) for row in layers], _crossings(layers, down)
    depth = len(layers)
    for sweep in range(_SWEEPS):
        downward = sweep % 2 == 0
        for i in (range(1, depth) if downward else range(depth - 2, -1, -1)):
            where = {u: k for k, u in enumerate(layers[i - 1] if downward else layers[i + 1])}
            nbrs = up if downward else down
            keys = {}
            for k, u in enumerate(layers[i]):
                ks = [where[w] for w in nbrs[u]]
                keys[u] = sum(ks) / len(ks) if ks else k
            layers[i].sort(key=keys.__getitem__)  # stable: ties keep their order
        cross = _crossings(layers, down)
        if cross < best_cross:
            best, best_cross = [list(row) for row in layers], cross
    return best


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


def _place(lay: _Layout, style: _Style, capacity: float) -> None:
    """x of every item: near the mean x of its neighbours, in order, never too close, and
    within ``[0, capacity]`` where the layer fits (bounds on a monotone fit are a clip)."""
    offsets = [_gaps(row, lay, style) for row in lay.layers]
    widest = max(capacity, max((off[-1] for off in offsets if len(off)), default=0.0))
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
            x = np.clip(_isotonic(want - off), 0.0, max(0.0, widest - off[-1])) + off
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
    text = (f"{e.source} {arrow} {e.target}; rule {e.rule}; via {', '.join(e.via) or '-'}; "
            f"p_adjacency {_fmt_p(e.p_adjacency)}")
    return text + ("; conflicting evidence" if e.conflict else "")


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


def _pack(layouts: list[_Layout], style: _Style, width: int, top: float
          ) -> tuple[dict[str | int, float], dict[str | int, float], int, float]:
    """Place the parts in rows (shelves) of at most `width`: x and y of every item, the
    width of the picture and the bottom of the last row."""
    gap = 3 * style.sep
    avail = width - 2 * style.margin
    shelves: list[list[tuple[_Layout, float]]] = []
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


def _isolated_rows(isolated: list[str], style: _Style, total_w: int, y: float
                   ) -> tuple[dict[str, tuple[float, float]], float]:
    """Centres of the nodes without edges, in rows from `y` down; and the bottom."""
    m, out, x = style.margin, {}, float(style.margin)
    y += style.box_h / 2
    for v in isolated:
        w = style.box_w(_label(v))
        if x + w > total_w - m and x > m:
            x, y = float(m), y + style.box_h + style.sep
        out[v] = (x + w / 2, y)
        x += w + style.sep
    return out, y + style.box_h / 2


def _render(layouts: list[_Layout], edges: Sequence[EdgeRecord], isolated: list[str],
            style: _Style, width: int) -> str:
    m, f, hh = style.margin, style.font, style.box_h / 2
    # 1. where everything goes: legend on top (kinds present only), the parts in rows (the
    #    picture widens if one part is wider than `width`), nodes without edges below
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
    # 2. the marks: header, arrowheads, legend, edges under the nodes, nodes
    out = [f"<svg class=\"og-graph\" width=\"{total_w}\" height=\"{height}\" "
           f"viewBox=\"0 0 {total_w} {height}\" role=\"img\" aria-label=\"drawing of the "
           f"learned graph\" font-family=\"system-ui, sans-serif\" font-size=\"{f}\">",
           "<style>.og-edge:hover{stroke-width:4}</style>", "<defs>"]
    out += [f"<marker id=\"og-head-{kind}\" viewBox=\"0 0 10 10\" refX=\"10\" refY=\"5\" "
            f"markerWidth=\"5\" markerHeight=\"5\" orient=\"auto-start-reverse\">"
            f"<path d=\"M0,0 L10,5 L0,10 z\" fill=\"{COLOURS[kind]}\"/></marker>"
            for kind, _, head in _LEGEND if head]
    out.append("</defs>")
    x, y = float(m), m + f / 2
    for kind, text, head in legend:
        out.append(f"<line class=\"og-legend\" x1=\"{x:.1f}\" y1=\"{y:.1f}\" "
                   f"x2=\"{x + 28:.1f}\" y2=\"{y:.1f}\" {_stroke(kind, head)}/>"
                   f"<text x=\"{x + 34:.1f}\" y=\"{y:.1f}\" dominant-baseline=\"central\" "
                   f"fill=\"#333\">{_e(text)}</text>")
        x += 34 + 0.62 * f * len(text) + 2 * f
    ports = _ports(chains, xs, widths)
    for e in edges:
        chain = chains[(e.source, e.target)]
        pts = [(xs[u], ys[u]) for u in chain]
        key = (e.source, e.target)
        pts[0] = (ports[key, "out"], ys[chain[0]] + hh)
        pts[-1] = (ports[key, "in"], ys[chain[-1]] - hh - 1)
        if chain[0] != e.source:  # the layout arc runs against the edge: draw it forwards
            pts.reverse()
        kind = _kind(e)
        d = "M" + " L".join(f"{px:.1f},{py:.1f}" for px, py in pts)
        head = e.orientation == "directed" and kind != "conflict"
        out.append(f"<path class=\"og-edge og-{kind}\" d=\"{d}\" fill=\"none\" "
                   f"stroke-linejoin=\"round\" {_stroke(kind, head)}>"
                   f"<title>{_e(_tooltip(e))}</title></path>")
    if iso:
        out.append(f"<text x=\"{m}\" y=\"{label_y:.1f}\" fill=\"#555\">variables without "
                   f"any edge:</text>")
    for name, cx, cy in nodes:
        w = style.box_w(_label(name))
        out.append(f"<g class=\"og-node\"><title>{_e(name)}</title>"
                   f"<rect class=\"og-box\" x=\"{cx - w / 2:.1f}\" y=\"{cy - hh:.1f}\" "
                   f"width=\"{w:.1f}\" height=\"{style.box_h}\" rx=\"{hh / 2:.1f}\" "
                   f"fill=\"#ffffff\" stroke=\"#333333\" stroke-width=\"1.2\"/>"
                   f"<text x=\"{cx:.1f}\" y=\"{cy:.1f}\" text-anchor=\"middle\" "
                   f"dominant-baseline=\"central\" fill=\"#111\">{_e(_label(name))}</text></g>")
    out.append("</svg>")
    return "\n".join(out)
