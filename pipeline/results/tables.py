"""The evidence of a learned graph flattened into records and tables.

`edge_records` turns the learner's output into one `EdgeRecord` per edge of the learned
graph (the ``edges`` of ``result.json``): its orientation, the rule and the regimes or
nodes behind its direction, the largest p-value of the tests that kept it, the p-value
behind its collider, the strength and chain of the evidence with a one-sentence
explanation (`pipeline.results.explain`), conflicts, and notes. `edges_frame` and
`removed_frame` give the same as pandas tables; `to_csv` writes them with list cells
joined by ``;``.
"""

from __future__ import annotations

import csv
import io
import math
import re
from collections.abc import Iterable
from typing import TYPE_CHECKING

from pipeline.design import Design
from pipeline.graphs.pdag import InterventionNode
from pipeline.learner.evidence import Learned
from pipeline.results.explain import explain_edges
from pipeline.results.schema import EdgeRecord

if TYPE_CHECKING:  # pandas is imported where a table is made (a faster start)
    import pandas as pd

__all__ = ["EDGE_COLUMNS", "REMOVED_COLUMNS", "edge_records", "edges_frame", "removed_frame",
           "edges_csv", "removed_csv", "to_csv"]

EDGE_COLUMNS = ("source", "target", "orientation", "rule", "via", "p_adjacency",
                "p_orientation", "conflict", "bootstrap_adjacency", "bootstrap_orientation",
                "notes", "strength", "explanation")
REMOVED_COLUMNS = ("x", "y", "separating_set", "pvalue", "statistic", "level", "regime",
                   "notes")


def _num(v: float | None) -> float | None:
    """A finite float, or None (JSON has no NaN)."""
    if v is None:
        return None
    v = float(v)
    return v if math.isfinite(v) else None


def _via_name(n: object) -> str:
    return n.regime if isinstance(n, InterventionNode) else str(n)


def edge_records(learned: Learned, design: Design,
                 constant: dict[str, list[str]] | None = None) -> list[EdgeRecord]:
    """One record per edge of ``learned.graph``: directed edges first, in variable order.

    Parameters
    ----------
    learned : Learned
        The learner's output.
    design : Design
        Fixes the variable order (an undirected edge is listed from the earlier node).
    constant : dict, optional
        Regime -> variables constant within it; the tests of an edge touching one leave
        that regime out, and the edge says so in its notes.

    Returns
    -------
    list of EdgeRecord
    """
    g = learned.graph
    order = {v: i for i, v in enumerate(design.variables)}
    kept = {frozenset((k.x, k.y)): k for k in learned.kept if k.regime is None}
    conflicts = {frozenset((c.source, c.target)): c for c in learned.conflicts}
    changed = {frozenset(e) for e in learned.resolution.get("changed", [])}
    stage = learned.resolution.get("stage", "closure")
    why = explain_edges(learned, float(learned.settings.get("alpha", 0.01)))
    left_out: dict[str, list[str]] = {}
    for regime, names in (constant or {}).items():
        for v in names:
            left_out.setdefault(v, []).append(regime)
    out: list[EdgeRecord] = []

    def evidence(u: str, v: str) -> tuple[float | None, list[str]]:
        k = kept.get(frozenset((u, v)))
        notes: list[str] = []
        if k is not None and k.tests:
            notes.append(f"kept by {k.tests} tests")
        for w in (u, v):
            if w in left_out:
                notes.append(f"{w} is constant within {', '.join(left_out[w])}: "
                             f"left out of the tests of this edge")
        c = conflicts.get(frozenset((u, v)))
        if c is not None:
            notes.append(f"conflict: the result keeps {c.kept}")
            notes.extend(c.reasons)
        if frozenset((u, v)) in changed:
            notes.append("the tests alone left this edge open: its direction was set so that "
                         "the graph stays consistent" if stage == "unblocked" else
                         "changed by the repair: no graph fits every test decision, this one "
                         "keeps the strongest evidence")
        return (_num(k.max_pvalue) if k is not None else None), notes

    # directed edges, by variable order of the source then the target
    for u, v in sorted(g.directed_edges(), key=lambda e: (order[e[0]], order[e[1]])):
        reason = learned.essential.reasons.get((u, v))
        p_adj, notes = evidence(u, v)
        ex = why[(str(u), str(v))]
        out.append(EdgeRecord(
            source=str(u), target=str(v), orientation="directed",
            rule=reason.rule if reason is not None else "none",
            via=[_via_name(n) for n in (reason.via if reason is not None else ())],
            p_adjacency=p_adj, p_orientation=_num(learned.p_orientation.get((u, v))),
            conflict=frozenset((u, v)) in conflicts, notes=notes,
            strength=None if ex.strength is None else round(ex.strength, 2),
            explanation=ex.sentence, chain=_finite(ex.chain)))
    # undirected edges, the earlier node first
    for u, v in sorted((tuple(sorted(e, key=order.__getitem__)) for e in g.undirected_edges()),
                       key=lambda e: (order[e[0]], order[e[1]])):
        p_adj, notes = evidence(u, v)
        ex = why.get((str(u), str(v))) or why[(str(v), str(u))]
        out.append(EdgeRecord(
            source=str(u), target=str(v), orientation="undirected", rule="none", via=[],
            p_adjacency=p_adj, p_orientation=None,
            conflict=frozenset((u, v)) in conflicts, notes=notes,
            explanation=ex.sentence))
    return out


def _finite(chain: list[dict]) -> list[dict]:
    """The chain with every p-value a finite float or None (JSON has no NaN)."""
    out = []
    for step in chain:
        step = dict(step)
        step["tests"] = [{**t, "p": _num(t.get("p"))} for t in step.get("tests", [])]
        out.append(step)
    return out


def edges_frame(records: Iterable[EdgeRecord]) -> pd.DataFrame:
    """The edge records as a table (columns `EDGE_COLUMNS`; `via`, `notes` hold lists)."""
    import pandas as pd

    rows = [{c: getattr(r, c) for c in EDGE_COLUMNS} for r in records]
    frame = pd.DataFrame(rows, columns=list(EDGE_COLUMNS))
    for c in ("p_adjacency", "p_orientation", "bootstrap_adjacency", "bootstrap_orientation"):
        frame[c] = frame[c].astype(float)
    frame["conflict"] = frame["conflict"].astype(bool)
    return frame


def removed_frame(learned: Learned) -> pd.DataFrame:
    """One row per pair found non-adjacent, with the test that separated it.

    Columns `REMOVED_COLUMNS`; `separating_set` and `notes` hold lists; `regime` names
    the regime when `x` is an intervention node (``F[regime]``), else it is empty.
    """
    import pandas as pd

    rows = [{"x": r.x, "y": r.y, "separating_set": list(r.separating_set),
             "pvalue": _num(r.pvalue), "statistic": _num(r.statistic), "level": int(r.level),
             "regime": r.regime or "", "notes": list(r.notes)}
            for r in learned.removed]
    frame = pd.DataFrame(rows, columns=list(REMOVED_COLUMNS))
    frame["pvalue"] = frame["pvalue"].astype(float)
    frame["statistic"] = frame["statistic"].astype(float)
    frame["level"] = frame["level"].astype(int)
    return frame


def to_csv(frame: pd.DataFrame) -> str:
    """CSV text of a table: list cells joined by ``;``, None and NaN as empty cells.

    Floats are written in their shortest exact form, so nothing is rounded.
    """
    return _csv(frame.columns, frame.itertuples(index=False, name=None))

def _cell(v: object) -> object:
    if isinstance(v, (list, tuple)):
        return ";".join(map(str, v))
    if v is None or (isinstance(v, float) and v != v):
        return ""
    return v


def csv_text(header: Iterable[str], rows: Iterable[Iterable[object]]) -> str:
    """CSV text: list cells joined by ``;``, None and NaN as empty cells, floats exact."""
    return _csv(header, rows)


def _csv(header: Iterable[str], rows: Iterable[Iterable[object]]) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(list(header))
    w.writerows([_cell(v) for v in row] for row in rows)
    return buf.getvalue()


def edges_csv(records: Iterable[EdgeRecord]) -> str:
    """``edges.csv``: one row per edge record, columns `EDGE_COLUMNS`."""
    return _csv(EDGE_COLUMNS, ([getattr(r, c) for c in EDGE_COLUMNS] for r in records))


def removed_csv(learned: Learned) -> str:
    """``removed.csv``: one row per non-adjacent pair, columns `REMOVED_COLUMNS`."""
    # A row whose text cells need no quoting is formatted directly (what the csv writer
    # would write: floats in their shortest exact form, None and non-finite as empty);
    # the others go through the csv writer. The per-cell writer pass costs more than this.
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(REMOVED_COLUMNS)
    write, isfinite = buf.write, math.isfinite
    for r in learned.removed:
        p, s = r.pvalue, r.statistic
        p = "" if p is None or not isfinite(p := float(p)) else repr(p)
        s = "" if s is None or not isfinite(s := float(s)) else repr(s)
        sep, notes, regime = ";".join(r.separating_set), ";".join(r.notes), r.regime or ""
        if _NEEDS_QUOTES(f"{r.x}{r.y}{sep}{regime}{notes}"):
            w.writerow((r.x, r.y, sep, p, s, int(r.level), regime, notes))
        else:
            write(f"{r.x},{r.y},{sep},{p},{s},{int(r.level)},{regime},{notes}\n")
    return buf.getvalue()


#: Characters that may make the csv writer quote a cell (delimiter, quote, line ends) or
#: refuse it (NUL): a row holding one is left to the writer.
_NEEDS_QUOTES = re.compile('[,"\r\n\x00]').search
