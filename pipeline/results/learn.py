"""The result of ``learn``: the learned graph with the evidence of every edge, and its files.

`LearnResult` carries every number a user may want (``.edges``, ``.removed``,
``.class_size``, ``.learned`` for the raw evidence), prints its tables (``.print`` on a
terminal, ``.summary()`` as text), converts to ``result.json`` (``.record()``) and
networkx (``.to_networkx()``), and ``.save(folder)`` writes the result files
(`pipeline.results.files`).
"""

from __future__ import annotations

from dataclasses import field
from functools import cached_property
from pathlib import Path
from typing import TYPE_CHECKING, Any

from pipeline.design import Design
from pipeline.graphs.pdag import PDAG
from pipeline.learner.evidence import Learned
from pipeline.records import record
from pipeline.results.formatting import format_count, format_p
from pipeline.results.schema import EdgeRecord, RegimeRecord, ResultRecord
from pipeline.results.tables import edge_records, edges_frame, removed_frame
from pipeline.terminal import Table, Terminal, escape, plain_text

if TYPE_CHECKING:  # networkx and pandas are imported where a graph or table is made
    import networkx as nx
    import pandas as pd

__all__ = ["LearnResult"]

#: Edges listed on the terminal; edges.csv and report.html have them all.
MAX_ROWS = 40


def _share(v: float | None) -> str:
    return "-" if v is None else f"{v:.2f}"


@record
class LearnResult:
    """A learned interventional essential graph with the evidence of each decision.

    Attributes
    ----------
    learned : Learned
        The learner's raw output (removed and kept pairs, targets, conflicts, ...).
    design : Design
        Variables and regimes.
    settings : dict
        The options of the run (alpha, max_condition_size, targets, test,
        collider_rule, reference, fingerprint, ...).
    warnings : list of str
        Intake, check and learner warnings, each once.
    check : CheckResult or None
        The input check (target check, response matrix), when it was run.
    run : dict
        Facts of this run that are not part of the result (tests computed and reused,
        seconds taken).
    provenance : dict
        Where the result comes from: input files with sizes and hashes, tool version,
        date, command line.
    bootstrap : BootstrapResult or None
        Bootstrap frequencies of every pair (`add_bootstrap`), when resamples were run.
    """

    learned: Learned
    design: Design
    settings: dict[str, Any] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    check: Any = None
    run: dict[str, Any] = field(default_factory=dict)
    provenance: dict[str, Any] = field(default_factory=dict)
    bootstrap: Any = None

    # -- numbers ------------------------------------------------------------------------------
    @property
    def graph(self) -> PDAG:
        """The learned essential graph over the measured variables."""
        return self.learned.graph

    @cached_property
    def edge_records(self) -> list[EdgeRecord]:
        """One `EdgeRecord` per edge (directed first, then undirected)."""
        constant = getattr(self.check, "constant", None)
        records = edge_records(self.learned, self.design, constant)
        if self.bootstrap is not None:
            for e in records:
                e.bootstrap_adjacency, e.bootstrap_orientation = self.bootstrap.frequencies(
                    e.source, e.target, e.orientation)
        return records

    def add_bootstrap(self, bootstrap: Any) -> None:
        """Attach bootstrap frequencies (a `BootstrapResult`); every edge record gets its
        ``bootstrap_adjacency`` and ``bootstrap_orientation``."""
        self.bootstrap = bootstrap
        self.__dict__.pop("edge_records", None)  # recomputed with the frequencies

    @property
    def edges(self) -> pd.DataFrame:
        """One row per edge: source, target, orientation, rule, via, p-values, conflict, notes."""
        return edges_frame(self.edge_records)

    @property
    def removed(self) -> pd.DataFrame:
        """One row per non-adjacent pair: separating set, p-value, statistic, level, notes."""
        return removed_frame(self.learned)

    @cached_property
    def class_size(self) -> int:
        """Number of DAGs the result leaves possible (0 when the graph is not valid)."""
        if self.learned.problems:
            return 0
        try:
            return int(self.learned.essential.class_size())
        except ValueError:
            return 0

    @property
    def detected_targets(self) -> dict[str, tuple[str, ...]]:
        """Regime -> variables its intervention node is adjacent to in the result."""
        return dict(self.learned.targets)

    @property
    def valid(self) -> bool:
        return not self.learned.problems

    # -- conversions ----------------------------------------------------------------------------
    def record(self) -> ResultRecord:
        """The ``result.json`` content."""
        regimes = [RegimeRecord(name=r.name, targets=list(r.targets), known=r.known,
                                samples=int(r.samples), reference=r.reference,
                                detected_targets=list(self.learned.targets.get(r.name, ())))
                   for r in self.design.regimes]
        findings = [{"regime": f.regime, "variable": f.variable, "status": f.status,
                     "pvalue": f.pvalue} for f in self.learned.findings]
        return ResultRecord(nodes=list(self.design.variables), regimes=regimes,
                            edges=list(self.edge_records), class_size=self.class_size,
                            settings=dict(self.settings), warnings=list(self.warnings),
                            valid=self.valid, problems=list(self.learned.problems),
                            findings=findings,
                            tests_per_level={str(k): v for k, v in
                                             sorted(self.learned.tests_per_level.items())},
                            provenance=dict(self.provenance))

    def to_networkx(self) -> nx.DiGraph:
        """A DiGraph with the edge evidence as attributes.

        A directed edge is one arc; an undirected edge two opposite arcs, both with
        ``orientation="undirected"``.
        """
        import networkx as nx

        d = nx.DiGraph()
        d.add_nodes_from(self.design.variables, kind="variable")
        for e in self.edge_records:
            attrs = {"orientation": e.orientation, "rule": e.rule, "via": list(e.via),
                     "p_adjacency": e.p_adjacency, "p_orientation": e.p_orientation,
                     "conflict": e.conflict, "notes": list(e.notes), "strength": e.strength,
                     "explanation": e.explanation,
                     "bootstrap_adjacency": e.bootstrap_adjacency,
                     "bootstrap_orientation": e.bootstrap_orientation}
            d.add_edge(e.source, e.target, **attrs)
            if e.orientation == "undirected":
                d.add_edge(e.target, e.source, **attrs)
        return d

    def graphml(self) -> str:
        """GraphML text: each edge once (undirected ones from the earlier node)."""
        from pipeline.results.graphml import graphml_text

        return graphml_text(self.design.variables, self.edge_records)

    # -- text -----------------------------------------------------------------------------------
    def summary(self, width: int = 100) -> str:
        """The same tables as `print`, as plain text."""
        return plain_text(self.print, width, max_rows=None)

    def print(self, console: Terminal, max_rows: int | None = MAX_ROWS) -> None:
        """Counts, the edge table, regimes, off-target findings, conflicts and warnings."""
        g = self.graph
        n_dir = sum(1 for _ in g.directed_edges())
        n_und = sum(1 for _ in g.undirected_edges())
        s = self.settings
        ref = ", ".join(r.name for r in self.design.reference)
        console.print(f"[bold]Learned graph[/bold]: {len(self.design.variables)} variables, "
                      f"{len(self.design.regimes)} regimes (reference: {escape(ref)})")
        console.print(f"{n_dir + n_und} edges ({n_dir} directed, {n_und} undirected); "
                      f"DAGs in the class: {format_count(self.class_size)}")
        console.print(f"settings: alpha = {s.get('alpha')}, max condition size = "
                      f"{s.get('max_condition_size')}, targets = {s.get('targets')}, test = "
                      f"{s.get('test')}, collider rule = {s.get('collider_rule')}")
        if not self.valid:
            console.print("[red]not a valid essential graph:[/red] "
                          + escape("; ".join(self.learned.problems)))
        edges = self.edge_records
        shown = edges if max_rows is None else edges[:max_rows]
        t = Table(title="Edges" + (f" (first {max_rows} of {len(edges)}; all in edges.csv)"
                                   if len(shown) < len(edges) else ""))
        boot = self.bootstrap is not None
        cols = ["edge", "rule", "via", "p adjacency", "strength"]
        cols += ["boot adj", "boot orient"] if boot else []
        for col in cols:
            t.add_column(col, justify="left" if col in ("edge", "rule", "via") else "right")
        for e in shown:
            arrow = "->" if e.orientation == "directed" else "--"
            name = escape(f"{e.source} {arrow} {e.target}")
            if e.conflict:
                name += " [red](conflict)[/red]"
            cells = [name, escape(e.rule), escape(", ".join(e.via) or "-"),
                     format_p(e.p_adjacency), "-" if e.strength is None else f"{e.strength:.1f}"]
            if boot:
                cells += [_share(e.bootstrap_adjacency), _share(e.bootstrap_orientation)]
            t.add_row(*cells)
        console.print(t)
        if any(e.orientation == "directed" for e in shown):
            console.print("strength: -log10 of the weakest test behind the direction (2: "
                          "p = 0.01); why each edge has its direction: edges.csv "
                          "(explanation) and report.html")
        if boot:
            self.bootstrap.print(console)
        t = Table(title="Regimes: declared and detected targets")
        for col in ("regime", "samples", "declared", "known", "detected"):
            t.add_column(col, justify="right" if col == "samples" else "left")
        for r in self.design.regimes:
            detected = ("(reference)" if r.reference
                        else ";".join(self.learned.targets.get(r.name, ())) or "-")
            t.add_row(escape(r.name), str(r.samples), escape(";".join(r.targets) or "-"),
                      "yes" if r.known else "no", escape(detected))
        console.print(t)
        for f in self.learned.findings:
            if f.status == "off-target":
                console.print(f"[yellow]off-target[/yellow]: {escape(f.regime)} acts on "
                              f"{escape(f.variable)} (p = {format_p(f.pvalue)})")
        for c in self.learned.conflicts:
            console.print(f"[yellow]conflict[/yellow]: {escape(c.source)} -- "
                          f"{escape(c.target)}: the result keeps {escape(c.kept)}; "
                          + escape("; ".join(c.reasons)))
        levels = ", ".join(f"{k}: {v}" for k, v in sorted(self.learned.tests_per_level.items()))
        console.print(f"tests per conditioning-set size: {levels}")
        if self.run.get("computed") is not None:
            console.print(f"tests computed: {self.run['computed']}, reused from the store: "
                          f"{self.run.get('reused', 0)}"
                          + ("; statistics read from the store (no data file parsed)"
                             if self.run.get("from_store") else ""))
        if self.warnings:
            console.print("\n[bold yellow]Warnings[/bold yellow]")
            for w in self.warnings:
                console.print(f"[yellow]-[/yellow] {escape(w)}")

    def __repr__(self) -> str:
        return f"LearnResult({self.graph!r}, class_size={self.class_size})"

    # -- files ----------------------------------------------------------------------------------
    def save(self, folder: str | Path, picture: bool = False) -> dict[str, Path]:
        """Write the result files into `folder`; earlier ones go to ``folder/history/``.

        With `picture`, also ``graph.png`` (matplotlib). Returns the paths written, by
        file name (see `pipeline.results.files.save_learn`).
        """
        from pipeline.results.files import save_learn

        return save_learn(self, folder, picture=picture)
