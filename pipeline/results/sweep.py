"""The result of ``sweep``: every pair of variables at every significance level.

`SweepResult` holds, for each alpha of the sweep, the state of every pair adjacent at
that alpha (directed one way or the other, or undirected; the rule that oriented it; its
adjacency p-value) and the totals of the graph (edges, class size, tests computed and
reused). It writes ``sweep.csv`` (one row per pair and alpha: `to_frame`, `to_csv`) and
``sweep.json`` (the totals and the pairs adjacent at some alpha with their verdict:
`to_dict`; `read` reads it back), prints a summary, and renders its report section.

A pair's verdict across the range: ``stable`` (adjacent at every alpha, oriented the same
way), ``orientation varies`` (adjacent at every alpha, not always oriented the same way),
or ``adjacent at k of m`` (present at some levels only).
"""

from __future__ import annotations

import html
import io
from collections.abc import Iterator
from dataclasses import field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from pipeline.errors import InputError
from pipeline.records import record
from pipeline.terminal import plain_text

if TYPE_CHECKING:  # pandas is imported where a table is made
    import pandas as pd

__all__ = ["SweepResult", "FORMAT", "CSV_COLUMNS", "STABLE", "VARIES"]

FORMAT = "orienteer.sweep/1"
CSV_COLUMNS = ("x", "y", "alpha", "adjacent", "orientation", "source", "target", "rule",
               "p_adjacency", "stable")
STABLE = "stable"
VARIES = "orientation varies"
#: Pairs listed on the terminal.
MAX_ROWS = 40
#: State of a pair ``x, y`` (x first in variable order): x -> y, y -> x, undirected.
_FORWARD, _BACKWARD, _UNDIRECTED = 1, -1, 0
_SYMBOL = {_FORWARD: "\u2192", _BACKWARD: "\u2190", _UNDIRECTED: "\u2014", None: "\u00b7"}


@record
class SweepResult:
    """The learner of one run folder at several significance levels.

    Attributes
    ----------
    alphas : list of float, increasing
    variables : list of str
    settings : dict, the settings of the run (only alpha varies)
    totals : list of dict, per alpha: alpha, edges, directed, undirected, class_size,
        computed, reused
    states : list of dict, per alpha: ``(x, y) -> (state, rule, p_adjacency)`` for each
        adjacent pair, ``x`` first in variable order; state 1 is ``x -> y``, -1
        ``y -> x``, 0 undirected
    folder : str, the run folder
    """

    alphas: list[float]
    variables: list[str]
    settings: dict[str, Any] = field(default_factory=dict)
    totals: list[dict[str, Any]] = field(default_factory=list)
    states: list[dict[tuple[str, str], tuple[int, str, float | None]]] = field(
        default_factory=list)
    folder: str = ""

    # -- numbers ------------------------------------------------------------------------------
    def pairs(self) -> list[tuple[str, str]]:
        """Pairs adjacent at one alpha at least, in variable order."""
        order = {v: i for i, v in enumerate(self.variables)}
        keys = set().union(*(s.keys() for s in self.states)) if self.states else set()
        return sorted(keys, key=lambda k: (order[k[0]], order[k[1]]))

    def verdict(self, pair: tuple[str, str]) -> str:
        """``stable``, ``orientation varies`` or ``adjacent at k of m``."""
        seen = [s[pair][0] for s in self.states if pair in s]
        m = len(self.alphas)
        if len(seen) < m:
            return f"adjacent at {len(seen)} of {m}"
        return STABLE if len(set(seen)) == 1 else VARIES

    def edge_rows(self) -> list[tuple[str, ...]]:
        """The pairs adjacent at some alpha: ``(x, y, state at each alpha..., verdict)``."""
        rows = []
        for pair in self.pairs():
            states = [s.get(pair) for s in self.states]
            rows.append((pair[0], pair[1],
                         *(_edge_text(pair, st[0]) if st is not None else "" for st in states),
                         self.verdict(pair)))
        return rows

    def edges(self) -> pd.DataFrame:
        """The pairs adjacent at some alpha: x, y, one state column per alpha, verdict."""
        import pandas as pd

        return pd.DataFrame(self.edge_rows(),
                            columns=["x", "y"] + [f"{a:g}" for a in self.alphas] + ["verdict"])

    def csv_rows(self) -> Iterator[tuple]:
        """The rows of ``sweep.csv`` (`CSV_COLUMNS`): every pair of variables (the earlier
        variable first) at each alpha in turn.

        ``orientation`` is directed, undirected or none (not adjacent); ``source`` and
        ``target`` give the direction of a directed edge (for an undirected one the
        earlier variable first); ``stable`` is true when the pair is in the same state
        (absent, or present with the same orientation) at every alpha. ``p_adjacency`` is
        None where the pair is not adjacent.
        """
        v = list(self.variables)
        changing = {pair for pair in self.pairs()
                    if len({None if (t := s.get(pair)) is None else t[0]
                            for s in self.states}) > 1}
        for alpha, states in zip(self.alphas, self.states, strict=True):
            for i, x in enumerate(v):
                for y in v[i + 1:]:
                    stable = (x, y) not in changing
                    st = states.get((x, y))
                    if st is None:
                        yield (x, y, alpha, False, "none", "", "", "", None, stable)
                        continue
                    code, rule, pv = st
                    source, target = (y, x) if code == _BACKWARD else (x, y)
                    yield (x, y, alpha, True,
                           "undirected" if code == _UNDIRECTED else "directed",
                           source, target, rule, pv, stable)

    def to_frame(self) -> pd.DataFrame:
        """``sweep.csv`` as a table: one row per pair of variables and alpha (`csv_rows`)."""
        import pandas as pd

        frame = pd.DataFrame(list(self.csv_rows()), columns=list(CSV_COLUMNS))
        return frame.astype({"p_adjacency": float})

    def to_csv(self) -> str:
        """``sweep.csv``: the rows of `csv_rows` as the csv module writes them (floats in
        their shortest exact form, None empty, a name quoted where it needs it).

        Rows are formatted directly rather than cell by cell through the csv writer: a
        sweep of thousands of variables has millions of rows, most of them a pair that is
        not adjacent.
        """
        names = [_csv_field(v) for v in self.variables]
        rules: dict[str, str] = {}
        changing = {pair for pair in self.pairs()
                    if len({None if (t := s.get(pair)) is None else t[0]
                            for s in self.states}) > 1}
        at = {v: i for i, v in enumerate(self.variables)}
        changing_index = {(at[x], at[y]) for x, y in changing}
        out = [",".join(CSV_COLUMNS) + "\n"]
        p = len(names)
        for alpha, states in zip(self.alphas, self.states, strict=True):
            a = _csv_field(alpha)
            adjacent = {(at[x], at[y]): st for (x, y), st in states.items()}
            for i in range(p):
                x = names[i]
                for j in range(i + 1, p):
                    y = names[j]
                    stable = "False" if (i, j) in changing_index else "True"
                    st = adjacent.get((i, j))
                    if st is None:
                        out.append(f"{x},{y},{a},False,none,,,,,{stable}\n")
                        continue
                    code, rule, pv = st
                    source, target = (y, x) if code == _BACKWARD else (x, y)
                    r = rules.get(rule)
                    if r is None:
                        r = rules[rule] = _csv_field(rule)
                    out.append(f"{x},{y},{a},True,"
                               f"{'undirected' if code == _UNDIRECTED else 'directed'},"
                               f"{source},{target},{r},{_csv_field(pv)},{stable}\n")
        return "".join(out)

    def to_dict(self) -> dict[str, Any]:
        """``sweep.json``: alphas, settings, totals and every pair adjacent at some alpha."""
        pairs = []
        for pair in self.pairs():
            st = [s.get(pair) for s in self.states]
            pairs.append({"x": pair[0], "y": pair[1],
                          "states": [None if t is None else t[0] for t in st],
                          "rules": [None if t is None else t[1] for t in st],
                          "p_adjacency": [None if t is None else t[2] for t in st],
                          "verdict": self.verdict(pair)})
        return {"format": FORMAT, "folder": self.folder, "alphas": list(self.alphas),
                "variables": list(self.variables), "settings": dict(self.settings),
                "totals": [dict(t) for t in self.totals], "pairs": pairs}

    def to_json(self) -> str:
        from pipeline.fileio import json_text

        return json_text(self.to_dict())

    @classmethod
    def from_dict(cls, d: dict[str, Any], where: str = "sweep.json") -> SweepResult:
        if not isinstance(d, dict) or d.get("format") != FORMAT:
            raise InputError(f"{where}: not an Orienteer sweep (expected \"format\": "
                             f"\"{FORMAT}\")")
        try:
            alphas = [float(a) for a in d["alphas"]]
            states: list[dict] = [{} for _ in alphas]
            for e in d["pairs"]:
                for a, (st, r, pv) in enumerate(zip(e["states"], e["rules"], e["p_adjacency"],
                                                    strict=True)):
                    if st is not None:
                        states[a][(str(e["x"]), str(e["y"]))] = (int(st), str(r), pv)
            return cls(alphas, [str(v) for v in d["variables"]], dict(d.get("settings", {})),
                       [dict(t) for t in d.get("totals", [])], states, str(d.get("folder", "")))
        except (KeyError, TypeError, ValueError) as exc:
            raise InputError(f"{where}: malformed sweep ({exc})") from None

    @classmethod
    def read(cls, path: str | Path) -> SweepResult:
        """Read ``sweep.json``."""
        from pipeline.fileio import read_json

        return cls.from_dict(read_json(path), where=str(path))

    # -- text -----------------------------------------------------------------------------------
    def counts(self) -> dict[str, int]:
        """How many pairs got each kind of verdict (stable, orientation varies, partial)."""
        out = {STABLE: 0, VARIES: 0, "partial": 0}
        for pair in self.pairs():
            v = self.verdict(pair)
            out[v if v in (STABLE, VARIES) else "partial"] += 1
        return out

    def summary(self, width: int = 100) -> str:
        return plain_text(self.print, width, max_rows=None)

    def print(self, console: Any, max_rows: int | None = MAX_ROWS) -> None:
        """Totals per alpha, the verdict counts, and the pairs that are not stable."""
        from pipeline.terminal import Table, escape

        t = Table(title="Sweep: the graph at each significance level")
        for col in ("alpha", "edges", "directed", "undirected", "class size",
                    "tests computed", "reused"):
            t.add_column(col, justify="right")
        for row in self.totals:
            t.add_row(f"{row['alpha']:g}", str(row["edges"]), str(row["directed"]),
                      str(row["undirected"]), _count(row["class_size"]),
                      str(row.get("computed", "")), str(row.get("reused", "")))
        console.print(t)
        c = self.counts()
        console.print(f"pairs adjacent at some alpha: {sum(c.values())}; stable across the "
                      f"range: {c[STABLE]}; orientation varies: {c[VARIES]}; adjacent at "
                      f"some alphas only: {c['partial']}")
        rows = [r for r in self.edge_rows() if r[-1] != STABLE]
        if rows:
            shown = rows if max_rows is None else rows[:max_rows]
            t = Table(title="Pairs not stable across the range"
                      + (f" (first {max_rows} of {len(rows)}; all in sweep.csv)"
                         if len(shown) < len(rows) else ""))
            for col in ["x", "y", *(f"{a:g}" for a in self.alphas), "verdict"]:
                t.add_column(col)
            for row in shown:
                t.add_row(*(escape(str(v)) for v in row))
            console.print(t)

    def html_section(self) -> str:
        """The report section: totals per alpha, then each pair across the alphas."""
        e = lambda v: html.escape(str(v), quote=True)  # noqa: E731
        out = io.StringIO()
        c = self.counts()
        out.write(f"<p>The learner of this run again at alpha = "
                  f"{e(', '.join(f'{a:g}' for a in self.alphas))}, from the stored statistics "
                  f"and tests (other settings unchanged). Of {sum(c.values())} pairs adjacent "
                  f"at some level, <b>{c[STABLE]}</b> are stable (adjacent at every level, "
                  f"oriented the same way), {c[VARIES]} change orientation and "
                  f"{c['partial']} appear at some levels only. All pairs are in sweep.csv."
                  f"</p>")
        head = "".join(f"<th>{a:g}</th>" for a in self.alphas)
        rows = "".join(
            f"<tr><th>{name}</th>" + "".join(f"<td class=\"num\">{_count(t[key])}</td>"
                                             for t in self.totals) + "</tr>"
            for key, name in (("edges", "edges"), ("directed", "directed"),
                              ("undirected", "undirected"), ("class_size", "class size")))
        out.write(f"<div class=\"scroll\"><table><thead><tr><th>alpha</th>{head}</tr></thead>"
                  f"<tbody>{rows}</tbody></table></div>")
        body = []
        for pair in self.pairs():
            cells = []
            for s in self.states:
                st = s.get(pair)
                if st is None:
                    cells.append("<td class=\"state\">&middot;</td>")
                else:
                    cells.append(f"<td class=\"state\" title=\"{e(_edge_text(pair, st[0]))}; "
                                 f"rule {e(st[1])}\">{_SYMBOL[st[0]]}</td>")
            v = self.verdict(pair)
            body.append(f"<tr><td class=\"edge\">{e(pair[0])} &ndash; {e(pair[1])}</td>"
                        + "".join(cells)
                        + f"<td class=\"{'' if v == STABLE else 'unstable'}\">{e(v)}</td></tr>")
        if body:
            out.write("<p class=\"small\">Each pair x &ndash; y at each alpha: &rarr; x causes "
                      "y, &larr; y causes x, &mdash; adjacent but undirected, &middot; not "
                      "adjacent. Hover over a mark for the rule.</p>")
            out.write(f"<div class=\"scroll tall\"><table id=\"sweep\"><thead><tr>"
                      f"<th>pair (x &ndash; y)</th>{head}<th>verdict</th></tr></thead><tbody>"
                      + "".join(body) + "</tbody></table></div>")
        return out.getvalue()


def _edge_text(pair: tuple[str, str], state: int) -> str:
    x, y = pair
    return {_FORWARD: f"{x} -> {y}", _BACKWARD: f"{y} -> {x}", _UNDIRECTED: f"{x} -- {y}"}[
        state]


def _csv_field(value: Any) -> str:
    """One cell as the csv module writes it (None and NaN empty, floats shortest exact)."""
    from pipeline.results.tables import csv_text

    if value is None or (isinstance(value, float) and value != value):
        return ""
    if isinstance(value, float):
        return float.__repr__(float(value))
    return csv_text([str(value)], []).rstrip("\n")


def _count(v: Any) -> str:
    from pipeline.results.formatting import format_count

    return format_count(int(v)) if isinstance(v, int) else str(v)
