"""The layered layout behind the report's graph drawing.

Sugiyama, Tagawa & Toda [1]_: (1) make the graph acyclic, (2) assign layers by longest path,
with dummy points where an edge spans several layers, (3) order each layer to reduce edge
crossings with the barycentre heuristic, (4) place the nodes horizontally by the
least-squares placement that keeps the order and a minimum gap, solved exactly by isotonic
regression with the pool-adjacent-violators algorithm [2]_. Deterministic: the same graph
gives the same layout.

References
----------
1. K. Sugiyama, S. Tagawa, M. Toda (1981). Methods for visual understanding of
   hierarchical system structures. IEEE Transactions on Systems, Man, and Cybernetics
   11(2), 109-125.
2. M. Ayer, H. D. Brunk, G. M. Ewing, W. T. Reid, E. Silverman (1955). An empirical
   distribution function for sampling with incomplete information. Annals of Mathematical
   Statistics 26(4), 641-647.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import field

import numpy as np

from pipeline.records import record
from pipeline.results.schema import EdgeRecord

__all__ = ["Style", "Layout", "short_label", "components", "layered_layout"]

_SWEEPS = 4  # barycentre sweeps (down and up) for the crossing reduction
_PLACE_PASSES = 6  # passes of the horizontal placement
_FILL = 0.75  # share of a layer's width for nodes; the rest is for edges passing through
_MAX_LABEL = 18  # characters of a node label; the full name is in the tooltip

@record(frozen=True)
class Style:
    font: int
    box_h: int
    layer_gap: int
    sep: int
    margin: int = 16
    dummy_sep: int = 10

    def box_w(self, label: str) -> float:
        """Estimated width of a node box holding `label` (about 0.62 em a character)."""
        return max(0.62 * self.font * len(label) + self.font * 1.2, self.box_h * 1.6)


@record
class Layout:
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


def short_label(name: str) -> str:
    return name if len(name) <= _MAX_LABEL else name[:_MAX_LABEL - 1] + "\u2026"


def components(nodes: list[str], edges: Sequence[EdgeRecord]
                ) -> list[tuple[list[str], list[EdgeRecord]]]:
    """The connected parts (edges taken without direction), largest first, then by node order."""
    near: dict[str, list[str]] = {v: [] for v in nodes}
    for e in edges:
        near[e.source].append(e.target)
        near[e.target].append(e.source)
    index = {v: i for i, v in enumerate(nodes)}
    parts, seen = [], set()
    for v in nodes:  # depth-first search from each node not yet reached
        if v in seen:
            continue
        seen.add(v)
        part, stack = [v], [v]
        while stack:
            for w in near[stack.pop()]:
                if w not in seen:
                    seen.add(w)
                    part.append(w)
                    stack.append(w)
        parts.append(sorted(part, key=index.__getitem__))
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


def layered_layout(nodes: list[str], edges: Sequence[EdgeRecord], style: Style, capacity: float,
            dummies: Iterator[int]) -> Layout:
    """Layers, order and x of one connected part; dummy points numbered by `dummies`."""
    # 1. acyclic: every layout arc follows one linear order of the nodes
    pos = _linear_order(nodes, edges)
    arcs = {(e.source, e.target): (e.source, e.target) if pos[e.source] < pos[e.target]
            else (e.target, e.source) for e in edges}
    # 2. layers, and dummy points where an arc spans several layers
    need = {v: style.box_w(short_label(v)) + style.sep for v in nodes}
    layer: dict[str | int, int] = dict(
        _assign_layers(nodes, list(arcs.values()), pos, need, _FILL * capacity))
    layers: list[list[str | int]] = [[] for _ in range(max(layer.values()) + 1)]
    for v in sorted(nodes, key=pos.__getitem__):
        layers[layer[v]].append(v)
    lay = Layout(layers, layer, up={v: [] for v in nodes}, down={v: [] for v in nodes})
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
            lay.width[u] = style.box_w(short_label(u)) if isinstance(u, str) else 0.0
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


def _gaps(row: list[str | int], lay: Layout, style: Style) -> np.ndarray:
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


def _place(lay: Layout, style: Style, capacity: float) -> None:
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
