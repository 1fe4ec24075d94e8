"""GraphML (an open XML standard for graphs) of a result's edges, written directly.

Each edge of the result appears once: a directed edge from its source to its target, an
undirected edge from the node that comes first, marked ``orientation = undirected``.
Edge data: orientation, rule, via (``;``-joined), conflict, p_adjacency, p_orientation,
strength, explanation (numbers omitted when absent). Node data: kind (``variable``).
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

from pipeline.results.schema import EdgeRecord

__all__ = ["graphml_text"]

#: XML's predefined entities for text, and for a double-quoted attribute value (where
#: white space other than a blank is kept as character references).
_TEXT = str.maketrans({"&": "&amp;", "<": "&lt;", ">": "&gt;"})
_ATTRIBUTE = str.maketrans({"&": "&amp;", "<": "&lt;", ">": "&gt;", '"': "&quot;",
                            "\n": "&#10;", "\r": "&#13;", "\t": "&#9;"})


def _escape(text: str) -> str:
    """`text` as XML character data."""
    return text.translate(_TEXT)


def _quoteattr(value: str) -> str:
    """`value` as a double-quoted XML attribute value."""
    return '"' + value.translate(_ATTRIBUTE) + '"'

_KEYS = (  # id, owner, name, type
    ("d0", "node", "kind", "string"),
    ("d1", "edge", "orientation", "string"),
    ("d2", "edge", "rule", "string"),
    ("d3", "edge", "via", "string"),
    ("d4", "edge", "conflict", "boolean"),
    ("d5", "edge", "p_adjacency", "double"),
    ("d6", "edge", "p_orientation", "double"),
    ("d7", "edge", "strength", "double"),
    ("d8", "edge", "explanation", "string"),
)


def graphml_text(nodes: Sequence[str], edges: Iterable[EdgeRecord]) -> str:
    """Return the GraphML document of `nodes` and `edges` as text."""
    out = ['<?xml version="1.0" encoding="utf-8"?>',
           '<graphml xmlns="http://graphml.graphdrawing.org/xmlns" '
           'xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance" '
           'xsi:schemaLocation="http://graphml.graphdrawing.org/xmlns '
           'http://graphml.graphdrawing.org/xmlns/1.0/graphml.xsd">']
    out += [f'  <key id="{k}" for="{owner}" attr.name="{name}" attr.type="{kind}" />'
            for k, owner, name, kind in _KEYS]
    out.append('  <graph edgedefault="directed">')
    for n in nodes:
        out.append(f'    <node id={_quoteattr(str(n))}><data key="d0">variable</data></node>')
    for e in edges:
        data = [f'<data key="d1">{_escape(e.orientation)}</data>',
                f'<data key="d2">{_escape(e.rule)}</data>',
                f'<data key="d3">{_escape(";".join(e.via))}</data>',
                f'<data key="d4">{"true" if e.conflict else "false"}</data>']
        if e.p_adjacency is not None:
            data.append(f'<data key="d5">{float(e.p_adjacency)!r}</data>')
        if e.p_orientation is not None:
            data.append(f'<data key="d6">{float(e.p_orientation)!r}</data>')
        if e.strength is not None:
            data.append(f'<data key="d7">{float(e.strength)!r}</data>')
        if e.explanation:
            data.append(f'<data key="d8">{_escape(e.explanation)}</data>')
        out.append(f'    <edge source={_quoteattr(str(e.source))} '
                   f'target={_quoteattr(str(e.target))}>{"".join(data)}</edge>')
    out += ["  </graph>", "</graphml>", ""]
    return "\n".join(out)
