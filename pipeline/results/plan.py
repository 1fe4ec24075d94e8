"""The result of ``plan``: which experiments to run next, and what each would orient.

`PlanResult` carries the ranking of candidate experiments (expected and worst-case
newly oriented edges, expected and worst-case DAGs left, chance of full identification,
with standard errors where the class was sampled), the plan of M experiments (exact or
greedy), the lower bounds on the number of experiments, and the settings. It prints
itself (`print`, `summary`), converts to ``plan.json`` (`to_dict`, format
``orienteer.plan/1``, see CONTRACT.md), reads itself back (`read`), writes atomically
(`write`) and renders its report section (`html_section`). The computation is
`pipeline.analyses.plan`; the graph algorithms are `pipeline.graphs.planning`.
"""

from __future__ import annotations

import html
from dataclasses import asdict, field
from pathlib import Path
from typing import Any

from pipeline.errors import InputError
from pipeline.records import record
from pipeline.results.formatting import finite_or_none, format_count
from pipeline.terminal import Table, Terminal, escape, plain_text

__all__ = ["FORMAT", "RankedExperiment", "PlannedStep", "PlanResult"]

FORMAT = "orienteer.plan/1"
#: Ranking rows printed on the terminal (plan.json and the report keep `settings["top"]`).
MAX_ROWS = 15

ASSUMPTION = ("Averages are over the DAGs of the class, each taken as equally likely (the "
              "uniform distribution on the class); an experiment acts on its targets on top "
              "of the reference condition, and its intervention node points at them.")


@record(frozen=True)
class RankedExperiment:
    """One candidate experiment and its score (see `pipeline.graphs.planning`)."""

    targets: tuple[str, ...]
    expected_oriented: float
    expected_class_size: float | None
    worst_class_size: int
    p_identified: float
    worst_oriented: int
    se_oriented: float | None = None
    se_class_size: float | None = None
    se_identified: float | None = None
    exact: bool = True

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d["targets"] = list(self.targets)
        for k in ("expected_oriented", "expected_class_size", "p_identified", "se_oriented",
                  "se_class_size", "se_identified"):
            d[k] = _num(d[k])
        return d


@record(frozen=True)
class PlannedStep:
    """One step of the plan: its gain given the steps before, the class left after it."""

    step: int
    targets: tuple[str, ...]
    expected_oriented: float
    cumulative_oriented: float
    expected_class_size: float | None
    worst_class_size: int
    p_identified: float
    se_oriented: float | None = None
    exact: bool = True

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d["targets"] = list(self.targets)
        for k in ("expected_oriented", "cumulative_oriented", "expected_class_size",
                  "p_identified", "se_oriented"):
            d[k] = _num(d[k])
        return d


@record
class PlanResult:
    """Ranking, plan and lower bounds for the next experiments on a result's class."""

    result: str | None
    ranking: list[RankedExperiment]
    plan: list[PlannedStep]
    lower_bound_experiments: int
    lower_bounds: dict[str, int]
    method: str
    exact: bool
    nodes: int
    edges: int
    open_edges: int
    class_size: int
    experiments_scored: int
    conflicts_opened: list[tuple[str, str]] = field(default_factory=list)
    current_targets: dict[str, list[str]] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    settings: dict[str, Any] = field(default_factory=dict)

    # -- conversions --------------------------------------------------------------------
    def to_dict(self) -> dict[str, Any]:
        """``plan.json`` (format ``orienteer.plan/1``)."""
        return {
            "format": FORMAT,
            "result": self.result,
            "ranking": [r.to_dict() for r in self.ranking],
            "plan": [s.to_dict() for s in self.plan],
            "lower_bound_experiments": int(self.lower_bound_experiments),
            "lower_bounds": dict(self.lower_bounds),
            "method": self.method,
            "exact": bool(self.exact),
            "nodes": self.nodes,
            "edges": self.edges,
            "open_edges": self.open_edges,
            "class_size": int(self.class_size),
            "experiments_scored": self.experiments_scored,
            "conflicts_opened": [list(e) for e in self.conflicts_opened],
            "current_targets": {k: list(v) for k, v in self.current_targets.items()},
            "notes": list(self.notes),
            "assumption": ASSUMPTION,
            "settings": dict(self.settings),
        }

    def to_json(self) -> str:
        from pipeline.fileio import json_text

        return json_text(self.to_dict())

    @classmethod
    def from_dict(cls, d: dict[str, Any], where: str = "plan.json") -> PlanResult:
        """Read back what `to_dict` wrote."""
        if not isinstance(d, dict) or d.get("format") != FORMAT:
            raise InputError(f"{where}: not an Orienteer plan (expected \"format\": "
                             f"\"{FORMAT}\")")
        try:
            ranking = [RankedExperiment(**{**r, "targets": tuple(r["targets"])})
                       for r in d["ranking"]]
            plan = [PlannedStep(**{**s, "targets": tuple(s["targets"])}) for s in d["plan"]]
            return cls(result=d.get("result"), ranking=ranking, plan=plan,
                       lower_bound_experiments=int(d["lower_bound_experiments"]),
                       lower_bounds=dict(d.get("lower_bounds", {})),
                       method=str(d.get("method", "greedy")), exact=bool(d.get("exact", False)),
                       nodes=int(d.get("nodes", 0)), edges=int(d.get("edges", 0)),
                       open_edges=int(d.get("open_edges", 0)),
                       class_size=int(d.get("class_size", 0)),
                       experiments_scored=int(d.get("experiments_scored", len(ranking))),
                       conflicts_opened=[tuple(e) for e in d.get("conflicts_opened", [])],
                       current_targets=dict(d.get("current_targets", {})),
                       notes=list(d.get("notes", [])), settings=dict(d.get("settings", {})))
        except (KeyError, TypeError, ValueError) as exc:
            raise InputError(f"{where}: malformed plan ({exc})") from None

    @classmethod
    def read(cls, path: str | Path) -> PlanResult:
        """Read a ``plan.json``."""
        from pipeline.fileio import read_json

        return cls.from_dict(read_json(path), where=str(path))

    def write(self, path: str | Path) -> Path:
        """Write ``plan.json`` to `path` atomically."""
        from pipeline.fileio import write_text

        return write_text(path, self.to_json())

    def to_frame(self):
        """The ranking as a pandas DataFrame, one row per experiment."""
        import pandas as pd

        rows = [r.to_dict() for r in self.ranking]
        for r in rows:
            r["targets"] = ";".join(r["targets"])
        return pd.DataFrame(rows)

    # -- people -----------------------------------------------------------------------
    def headline(self) -> str:
        """One sentence: what the plan is about."""
        opened = (f" ({len(self.conflicts_opened)} conflict edge(s) counted as open)"
                  if self.conflicts_opened else "")
        return (f"{self.nodes} variables, {self.edges} edges, {self.open_edges} undirected"
                f"{opened}; DAGs in the class: {format_count(self.class_size)}")

    def summary(self, width: int = 110) -> str:
        """The terminal tables as plain text."""
        return plain_text(self.print, width)

    def print(self, console: Terminal) -> None:
        """Print the ranking, the plan and the bounds as tables on `console`."""
        s = self.settings
        console.print(escape(f"Planning on {self.result or 'the result'}: {self.headline()}"))
        if not self.ranking:
            for n in self.notes:
                console.print(escape(f"note: {n}"))
            return
        t = Table(title=escape(f"Next experiment: {self.experiments_scored:,} candidate "
                               f"experiment(s) of up to {s.get('max_targets', 1)} target(s), "
                               "best first"))
        for col, right in (("rank", True), ("targets", False), ("exp. oriented", True),
                           ("worst oriented", True), ("exp. DAGs left", True),
                           ("worst DAGs left", True), ("P(identified)", True)):
            t.add_column(col, justify="right" if right else "left")
        for i, r in enumerate(self.ranking[:MAX_ROWS], 1):
            t.add_row(str(i), escape(", ".join(r.targets)),
                      _pm(r.expected_oriented, r.se_oriented, r.exact),
                      str(r.worst_oriented) + ("" if r.exact else "*"),
                      _pm(r.expected_class_size, r.se_class_size, r.exact, size=True),
                      format_count(r.worst_class_size) + ("" if r.exact else "*"),
                      _pm(r.p_identified, r.se_identified, r.exact, digits=3))
        console.print(t)
        if len(self.ranking) > MAX_ROWS:
            console.print(f"... {len(self.ranking) - MAX_ROWS} more rows in plan.json")
        if self.plan:
            t = Table(title=escape(f"Plan of {len(self.plan)} experiment(s) ({self.method})"))
            for col, right in (("step", True), ("targets", False), ("exp. newly oriented", True),
                               ("cumulative", True), ("exp. DAGs left", True),
                               ("P(identified)", True)):
                t.add_column(col, justify="right" if right else "left")
            for p in self.plan:
                t.add_row(str(p.step), escape(", ".join(p.targets)),
                          _pm(p.expected_oriented, p.se_oriented, p.exact),
                          f"{p.cumulative_oriented:.2f}",
                          _pm(p.expected_class_size, None, p.exact, size=True),
                          f"{p.p_identified:.3f}")
            console.print(t)
        for line in self._bound_lines():
            console.print(escape(line))
        if not self.exact:
            console.print("* estimated from uniform draws of the class (+- one standard "
                          "error); worst cases are the worst among the draws")
        for n in self.notes:
            console.print(escape(f"note: {n}"))

    def _bound_lines(self) -> list[str]:
        b = self.lower_bounds
        k = self.settings.get("max_targets", 1)
        return [f"Lower bound, worst case over the class, to orient every edge: "
                f"{self.lower_bound_experiments} experiment(s) of up to {k} target(s) "
                f"(single-target: {b.get('single_target', 0)}, sum of w - 1 over the "
                f"components; any number of targets: {b.get('multi_target', 0)}, "
                f"ceil(log2 w); largest clique w = {b.get('largest_clique', 1)}; "
                "Eberhardt, Glymour & Scheines 2005)."]

    def html_section(self) -> str:
        """The report section: the ranking, the plan, the bounds (every string escaped)."""
        e = html.escape
        parts = [f"<p>{e(self.headline())}. {e(ASSUMPTION)}</p>"]
        head = ["rank", "targets", "expected newly oriented", "worst newly oriented",
                "expected DAGs left", "worst DAGs left", "P(identified)"]
        rows = []
        for i, r in enumerate(self.ranking, 1):
            cells = [str(i), ", ".join(r.targets),
                     _pm(r.expected_oriented, r.se_oriented, r.exact),
                     str(r.worst_oriented), _pm(r.expected_class_size, r.se_class_size,
                                                r.exact, size=True),
                     format_count(r.worst_class_size),
                     _pm(r.p_identified, r.se_identified, r.exact, digits=3)]
            rows.append("<tr>" + "".join(f"<td>{e(c)}</td>" for c in cells) + "</tr>")
        parts.append(_table(head, rows, f"Next experiment ({self.experiments_scored:,} "
                                        "scored, best first)"))
        if self.plan:
            head = ["step", "targets", "expected newly oriented", "cumulative",
                    "expected DAGs left", "P(identified)"]
            rows = []
            for p in self.plan:
                cells = [str(p.step), ", ".join(p.targets),
                         _pm(p.expected_oriented, p.se_oriented, p.exact),
                         f"{p.cumulative_oriented:.2f}",
                         _pm(p.expected_class_size, None, p.exact, size=True),
                         f"{p.p_identified:.3f}"]
                rows.append("<tr>" + "".join(f"<td>{e(c)}</td>" for c in cells) + "</tr>")
            parts.append(_table(head, rows, f"Plan of {len(self.plan)} experiment(s), "
                                            f"{self.method}"))
        parts += [f"<p>{e(line)}</p>" for line in self._bound_lines()]
        if not self.exact:
            parts.append("<p>Figures with &plusmn; are estimated from uniform draws of the "
                         "class (one standard error); worst cases are the worst among the "
                         "draws.</p>")
        parts += [f"<p>Note: {e(n)}</p>" for n in self.notes]
        return "\n".join(parts)


def _table(head: list[str], rows: list[str], caption: str) -> str:
    return (f"<table><caption>{html.escape(caption)}</caption><thead><tr>"
            + "".join(f"<th>{html.escape(h)}</th>" for h in head)
            + "</tr></thead><tbody>" + "".join(rows) + "</tbody></table>")


def _num(v: float | None) -> float | None:
    v = finite_or_none(v)
    return None if v is None else round(v, 6) if abs(v) < 1e15 else v


def _pm(v: float | None, se: float | None, exact: bool, *, size: bool = False,
        digits: int = 2) -> str:
    if v is None:
        return "-"
    text = (f"{v:.3g}" if abs(v) >= 1e5 else f"{v:.{digits}f}") if size or digits != 2 \
        else f"{v:.2f}"
    if not exact and se:
        text += f" +- {se:.2g}"
    return text
