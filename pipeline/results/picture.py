"""The learned graph as a PNG picture for slides (``graph.png`` beside ``report.html``).

The picture is the report's drawing (`pipeline.results.drawing`): the same layered
layout, colours, arrowheads and dashes, rendered by matplotlib's Agg raster backend at
`DPI` dots per inch (two pixels of picture for each pixel of the layout at the default
scale), on a white background, without touching pyplot's state. matplotlib is imported
only when a picture is drawn; names are drawn as plain text (no math markup).

>>> from pipeline.results.schema import EdgeRecord
>>> graph_png(["A", "B"], [EdgeRecord("A", "B", "directed", "intervention")])[:8]
b'\\x89PNG\\r\\n\\x1a\\n'
"""

from __future__ import annotations

import io
from collections.abc import Sequence

from pipeline.results.drawing import COLOURS, MAX_DRAWN, graph_geometry
from pipeline.results.layout import short_label
from pipeline.results.schema import EdgeRecord

__all__ = ["graph_png", "DPI"]

#: Resolution of the picture: 192 dots per inch, i.e. 2 picture pixels per layout pixel.
DPI = 192
_PX = 96  # layout pixels per inch (the CSS pixel)


def graph_png(nodes: Sequence[str], edges: Sequence[EdgeRecord], *, width: int = 900) -> bytes:
    """The drawing of the graph as PNG bytes.

    Parameters
    ----------
    nodes, edges, width
        As for `pipeline.results.drawing.graph_svg`.

    Returns
    -------
    bytes
        A PNG file.

    Raises
    ------
    ValueError
        As `graph_svg`, or if there are more than `MAX_DRAWN` nodes (too many to draw).
    """
    if len(nodes) > MAX_DRAWN:
        raise ValueError(f"nodes: {len(nodes)} variables, more than {MAX_DRAWN}: too many to "
                         f"draw legibly")
    g = graph_geometry(nodes, edges, width=width)
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from matplotlib.patches import FancyArrowPatch, FancyBboxPatch
    from matplotlib.path import Path as MplPath

    fig = Figure(figsize=(g.width / _PX, g.height / _PX), dpi=DPI, facecolor="white")
    FigureCanvasAgg(fig)
    ax = fig.add_axes((0, 0, 1, 1))
    ax.set_xlim(0, g.width)
    ax.set_ylim(g.height, 0)  # y downwards, as in the layout
    ax.set_axis_off()
    pt = 72 / _PX  # points per layout pixel
    font = g.style.font * pt

    def line(points, kind: str, head: bool, z: float) -> None:
        verts = [(float(x), float(y)) for x, y in points]
        codes = [MplPath.MOVETO] + [MplPath.LINETO] * (len(verts) - 1)
        ax.add_patch(FancyArrowPatch(
            path=MplPath(verts, codes), arrowstyle="-|>,head_length=4,head_width=2.4"
            if head else "-", color=COLOURS[kind], linewidth=2 * pt,
            linestyle=(0, (3, 2)) if kind == "conflict" else "-", shrinkA=0, shrinkB=0,
            mutation_scale=1.0, zorder=z))

    for kind, text, head, x, y in g.legend:
        line([(x, y), (x + 28, y)], kind, head, 1)
        ax.text(x + 34, y, text, fontsize=font, color="#333333", va="center", ha="left",
                parse_math=False)
    for _, kind, head, points in g.edges:
        line(points, kind, head, 2)
    if g.isolated_label is not None:
        ax.text(*g.isolated_label, "variables without any edge:", fontsize=font,
                color="#555555", va="baseline", ha="left", parse_math=False)
    hh = g.style.box_h / 2
    for name, cx, cy, w in g.nodes:
        ax.add_patch(FancyBboxPatch((cx - w / 2, cy - hh), w, g.style.box_h,
                                    boxstyle=f"round,pad=0,rounding_size={hh / 2:.2f}",
                                    facecolor="white", edgecolor="#333333",
                                    linewidth=1.2 * pt, zorder=3))
        ax.text(cx, cy, short_label(name), fontsize=font, color="#111111", ha="center",
                va="center", zorder=4, parse_math=False)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI, facecolor="white",
                metadata={"Software": None})
    return buf.getvalue()
