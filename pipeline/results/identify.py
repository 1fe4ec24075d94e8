"""The result of ``identify``: the essential graph a design identifies, with per-regime figures.

`IdentifyResult` carries the interventional essential graph of a known DAG under the
regimes' targets, the class size and what each regime contributes; it prints them
(`print`, `summary`) and converts to ``result.json`` (format ``orienteer.result/1``,
without test evidence). The computation is `pipeline.analyses.identify`.
"""

from __future__ import annotations

from dataclasses import field

from pipeline.design import Design
from pipeline.graphs.essential import EssentialGraph
from pipeline.graphs.pdag import InterventionNode
from pipeline.graphs.validity import essential_graph_problems
from pipeline.records import record
from pipeline.results.formatting import format_count
from pipeline.results.schema import EdgeRecord, RegimeRecord, ResultRecord
from pipeline.terminal import Table, Terminal, escape, plain_text

__all__ = ["IdentifyResult"]

#: Edge rows shown by `IdentifyResult.print` (the JSON has them all).
MAX_EDGE_ROWS = 40


@record
class IdentifyResult:
    """The essential graph a design identifies, with per-regime figures."""

    design: Design
    essential: EssentialGraph
    class_size: int
    oriented: dict[str, int]
    lost_without: dict[str, int]
    warnings: list[str] = field(default_factory=list)

    @property
    def nodes(self) -> list[str]:
        return list(self.design.variables)

    @property
    def undirected_edges(self) -> list[tuple[str, str]]:
        return list(self.essential.graph.undirected_edges())

    @property
    def directed_edges(self) -> list[tuple[str, str]]:
        return list(self.essential.graph.directed_edges())

    def record(self, settings: dict | None = None) -> ResultRecord:
        """The ``result.json`` record (CONTRACT.md), without test evidence."""
        g = self.essential.graph
        rows = []
        for u, v in self.directed_edges:
            reason = self.essential.reasons[(u, v)]
            rows.append(EdgeRecord(source=str(u), target=str(v), orientation="directed",
                                   rule=reason.rule, via=[_name(x) for x in reason.via]))
        for u, v in self.undirected_edges:
            rows.append(EdgeRecord(source=str(u), target=str(v), orientation="undirected"))
        rows.sort(key=lambda e: sorted((g.index(e.source), g.index(e.target))))
        regimes = [RegimeRecord(name=r.name, targets=list(r.targets), known=r.known,
                                samples=r.samples, reference=r.reference)
                   for r in self.design.regimes]
        problems = essential_graph_problems(g)
        return ResultRecord(nodes=self.nodes, regimes=regimes, edges=rows,
                            class_size=self.class_size,
                            settings={"command": "identify", **(settings or {})},
                            warnings=list(self.warnings), valid=not problems, problems=problems)

    def summary(self, width: int = 100) -> str:
        """A readable text summary: class size, per-regime figures, the edges."""
        return plain_text(self.print, width)

    def print(self, console: Terminal) -> None:
        """Print the summary as tables on `console`."""
        rec = self.record()
        n_dir, n_und = len(self.directed_edges), len(self.undirected_edges)
        console.print(f"Identifiable from the design: {len(self.nodes)} variables, "
                      f"{n_dir + n_und} edges, {n_dir} directed, {n_und} undirected")
        size = format_count(self.class_size)
        console.print(f"DAGs in the class: {size}"
                      + (" (fully identified)" if self.class_size == 1 else ""))
        t = Table(title="Regimes")
        for col in ("regime", "targets", "role", "orients", "lost without it"):
            t.add_column(col, justify="right" if col in ("orients", "lost without it") else "left")
        for r in self.design.regimes:
            if r.reference:
                t.add_row(escape(r.name), escape(";".join(r.targets) or "-"), "reference",
                          "-", "-")
            else:
                t.add_row(escape(r.name), escape(";".join(r.targets) or "-"), "intervention",
                          str(self.oriented.get(r.name, 0)),
                          str(self.lost_without.get(r.name, 0)))
        console.print(t)
        t = Table(title="Edges")
        for col in ("source", "", "target", "rule", "via"):
            t.add_column(col)
        for e in rec.edges[:MAX_EDGE_ROWS]:
            mark = "->" if e.orientation == "directed" else "---"
            t.add_row(escape(e.source), mark, escape(e.target),
                      e.rule if e.orientation == "directed" else "", escape(", ".join(e.via)))
        console.print(t)
        if len(rec.edges) > MAX_EDGE_ROWS:
            console.print(f"... and {len(rec.edges) - MAX_EDGE_ROWS} more edges "
                          "(write them all with --out)")
        for w in self.warnings:
            console.print(f"warning: {escape(w)}")


def _name(x) -> str:
    return x.regime if isinstance(x, InterventionNode) else str(x)
