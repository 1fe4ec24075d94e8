"""The known-graph file ``dag.csv``: one directed edge per row, columns ``source,target``.

Nodes are the names that appear in the file (in order of first appearance) plus any
extra nodes given by the caller (the targets named in the regimes file, CONTRACT.md).
Other columns (weights, notes) are allowed and ignored; names are stripped of
surrounding spaces. A row that repeats an edge already read is not an error: it is
kept once and reported in ``graph.graph["warnings"]``. A self-loop, an empty name or a
directed cycle is an `InputError` that names the rows or the cycle.
"""

from __future__ import annotations

import csv
from collections.abc import Iterable
from pathlib import Path

import networkx as nx

from pipeline.errors import InputError

__all__ = ["read_dag_csv"]


def read_dag_csv(path: str | Path, extra_nodes: Iterable[str] = ()) -> nx.DiGraph:
    """Read ``dag.csv`` into a directed acyclic graph.

    Parameters
    ----------
    path : str or Path
        The file, with a header holding ``source`` and ``target``.
    extra_nodes : iterable of str
        Nodes to add after those of the file (isolated unless they appear in it).

    Returns
    -------
    nx.DiGraph
        Nodes in order of first appearance, then `extra_nodes`; ``graph["warnings"]``
        lists the duplicate rows that were dropped.

    Raises
    ------
    InputError
        Missing or unreadable file, missing columns, an empty name, a self-loop, or a
        directed cycle (named).
    """
    path = Path(path)
    where = f"dag file {path}"
    if not path.exists():
        raise InputError(f"{where}: no such file; check the path given to --dag")
    if not path.is_file():
        raise InputError(f"{where}: is not a file")
    try:
        with open(path, encoding="utf-8-sig", newline="") as fh:
            reader = csv.reader(fh)
            header = None
            rows = []
            for cells in reader:
                if not cells or not any(c.strip() for c in cells):
                    continue
                if header is None:
                    header = [c.strip() for c in cells]
                else:
                    rows.append((reader.line_num, cells))
    except UnicodeDecodeError:
        raise InputError(f"{where}: is not UTF-8 text; save it as UTF-8 CSV") from None
    except csv.Error as exc:
        raise InputError(f"{where}: is not valid CSV ({exc})") from None
    if header is None:
        raise InputError(f"{where}: is empty; it needs a header 'source,target' and one row "
                         "per directed edge")
    for needed in ("source", "target"):
        if needed not in header:
            raise InputError(f"{where}: has no '{needed}' column (columns seen: "
                             f"{', '.join(header)}); the header should be 'source,target'")
    i_s, i_t = header.index("source"), header.index("target")

    g = nx.DiGraph()
    warnings: list[str] = []
    first_line: dict[tuple[str, str], int] = {}
    for line, cells in rows:
        cells = cells + [""] * (len(header) - len(cells))
        u, v = cells[i_s].strip(), cells[i_t].strip()
        if not u or not v:
            col = "source" if not u else "target"
            raise InputError(f"{where}, line {line}: the {col} is empty; every row needs both "
                             "a source and a target")
        if u == v:
            raise InputError(f"{where}, line {line}: self-loop {u} -> {u}; a variable cannot "
                             "cause itself, remove the row")
        if (u, v) in first_line:
            warnings.append(f"{where}, line {line}: edge {u} -> {v} repeats line "
                            f"{first_line[(u, v)]}; kept once")
            continue
        first_line[(u, v)] = line
        g.add_edge(u, v)
    for n in extra_nodes:
        g.add_node(str(n))
    try:
        cycle = nx.find_cycle(g)
    except nx.NetworkXNoCycle:
        cycle = None
    if cycle:
        text = " -> ".join(u for u, _ in cycle) + f" -> {cycle[0][0]}"
        lines = ", ".join(str(first_line[e]) for e in cycle)
        raise InputError(f"{where}: the edges form a directed cycle {text} (lines {lines}); "
                         "a DAG has none, remove or reverse one of these edges")
    g.graph["warnings"] = warnings
    return g
