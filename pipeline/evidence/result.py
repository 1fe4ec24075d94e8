"""The result of ``learn``: the learned graph with the evidence of every edge, and its files.

`LearnResult` carries every number a user may want (``.edges``, ``.removed``,
``.class_size``, ``.learned`` for the raw evidence), prints a readable ``.summary()``,
converts to ``result.json`` (``.record()``) and networkx (``.to_networkx()``), and
``.save(folder)`` writes the result files. Before writing, result files of an earlier run
in the same folder are moved into ``folder/history/<time of that run>/``: nothing is
overwritten or deleted, and each file is written atomically. ``tests.sqlite`` stays.
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import Any

import networkx as nx
import pandas as pd

from pipeline.evidence.formatting import format_p
from pipeline.evidence.schema import EdgeRecord, RegimeRecord, ResultRecord
from pipeline.evidence.tables import (
    edge_records,
    edges_csv,
    edges_frame,
    removed_csv,
    removed_frame,
)
from pipeline.fileio import write_text
from pipeline.graphs.pdag import PDAG
from pipeline.intake.design import Design
from pipeline.learner.evidence import Learned

__all__ = ["LearnResult", "RESULT_FILES", "archive_previous"]

#: The files `LearnResult.save` writes.
RESULT_FILES = ("result.json", "edges.csv", "removed.csv", "graph.graphml", "report.html")
#: Files of an earlier run that go to history/ with them (other commands add them to DIR).
_RUN_FILES = RESULT_FILES + ("sweep.csv", "validation.csv", "validation.json", "plan.json",
                             "check.json", "response.csv")


@dataclass
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
    """

    learned: Learned
    design: Design
    settings: dict[str, Any] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    check: Any = None
    run: dict[str, Any] = field(default_factory=dict)

    # -- numbers ------------------------------------------------------------------------------
    @property
    def graph(self) -> PDAG:
        """The learned essential graph over the measured variables."""
        return self.learned.graph

    @cached_property
    def edge_records(self) -> list[EdgeRecord]:
        """One `EdgeRecord` per edge (directed first, then undirected)."""
        constant = getattr(self.check, "constant", None)
        return edge_records(self.learned, self.design, constant)

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
        return ResultRecord(nodes=list(self.design.variables), regimes=regimes,
                            edges=list(self.edge_records), class_size=self.class_size,
                            settings=dict(self.settings), warnings=list(self.warnings),
                            valid=self.valid, problems=list(self.learned.problems))

    def to_networkx(self) -> nx.DiGraph:
        """A DiGraph with the edge evidence as attributes.

        A directed edge is one arc; an undirected edge two opposite arcs, both with
        ``orientation="undirected"``.
        """
        d = nx.DiGraph()
        d.add_nodes_from(self.design.variables, kind="variable")
        for e in self.edge_records:
            attrs = {"orientation": e.orientation, "rule": e.rule, "via": list(e.via),
                     "p_adjacency": e.p_adjacency, "p_orientation": e.p_orientation,
                     "conflict": e.conflict, "notes": list(e.notes)}
            d.add_edge(e.source, e.target, **attrs)
            if e.orientation == "undirected":
                d.add_edge(e.target, e.source, **attrs)
        return d

    def graphml(self) -> str:
        """GraphML text: each edge once (undirected ones from the earlier node)."""
        from pipeline.evidence.graphml import graphml_text

        return graphml_text(self.design.variables, self.edge_records)

    # -- text -----------------------------------------------------------------------------------
    def summary(self) -> str:
        """A readable account: counts, class size, targets per regime, conflicts, warnings."""
        g = self.graph
        n_dir = sum(1 for _ in g.directed_edges())
        n_und = sum(1 for _ in g.undirected_edges())
        ref = ", ".join(r.name for r in self.design.reference)
        s = self.settings
        lines = [f"Orienteer learn: {len(self.design.variables)} variables, "
                 f"{len(self.design.regimes)} regimes (reference: {ref})",
                 f"settings: alpha = {s.get('alpha')}, max condition size = "
                 f"{s.get('max_condition_size')}, targets = {s.get('targets')}, test = "
                 f"{s.get('test')}, collider rule = {s.get('collider_rule')}",
                 f"edges: {n_dir + n_und} ({n_dir} directed, {n_und} undirected); "
                 f"DAGs in the class: {self.class_size}"]
        if not self.valid:
            lines.append("NOT a valid essential graph: " + "; ".join(self.learned.problems))
        frame = self.edges
        if len(frame):
            show = pd.DataFrame({
                "edge": [f"{a} {'->' if o == 'directed' else '--'} {b}" for a, b, o in
                         zip(frame.source, frame.target, frame.orientation, strict=True)],
                "rule": frame.rule, "via": frame.via.map(lambda v: ";".join(v) or "-"),
                "p_adjacency": frame.p_adjacency.map(_fmt_p),
                "p_orientation": frame.p_orientation.map(_fmt_p),
                "conflict": frame.conflict.map({True: "yes", False: ""})})
            lines += ["", show.to_string(index=False)]
        lines += ["", "Regimes: declared and detected targets"]
        reg = pd.DataFrame({
            "regime": [r.name for r in self.design.regimes],
            "samples": [r.samples for r in self.design.regimes],
            "declared": [";".join(r.targets) or "-" for r in self.design.regimes],
            "known": ["yes" if r.known else "no" for r in self.design.regimes],
            "detected": ["(reference)" if r.reference else
                         ";".join(self.learned.targets.get(r.name, ())) or "-"
                         for r in self.design.regimes]})
        lines.append(reg.to_string(index=False))
        off = [f for f in self.learned.findings if f.status == "off-target"]
        if off:
            lines += ["", "Off-target findings (no conditioning set made them invariant)"]
            lines += [f"- {f.regime} acts on {f.variable} (p = {_fmt_p(f.pvalue)})" for f in off]
        if self.learned.conflicts:
            lines += ["", "Conflicts (left undirected)"]
            lines += [f"- {c.source} -- {c.target}" for c in self.learned.conflicts]
        lines += ["", "Tests per conditioning-set size: " + ", ".join(
            f"{k}: {v}" for k, v in sorted(self.learned.tests_per_level.items()))]
        if self.run:
            lines.append(f"tests computed: {self.run.get('computed', '?')}, reused from the "
                         f"store: {self.run.get('reused', 0)}")
        lines += ["", "Warnings"]
        lines += [f"- {w}" for w in self.warnings] or ["none"]
        return "\n".join(lines)

    def __repr__(self) -> str:
        return f"LearnResult({self.graph!r}, class_size={self.class_size})"

    # -- files ----------------------------------------------------------------------------------
    def save(self, folder: str | Path) -> dict[str, Path]:
        """Write the result files into `folder`; earlier ones go to ``folder/history/``.

        Returns the paths written, by file name.
        """
        from pipeline.report.html import render_report

        folder = Path(folder)
        # 1. render everything first: a failure here leaves the folder untouched
        texts = {"result.json": self.record().to_json(),
                 "edges.csv": edges_csv(self.edge_records),
                 "removed.csv": removed_csv(self.learned),
                 "graph.graphml": self.graphml(),
                 "report.html": render_report(self)}
        # 2. move the files of the earlier run aside, 3. write each file atomically
        archive_previous(folder)
        return {name: write_text(folder / name, text) for name, text in texts.items()}


def archive_previous(folder: str | Path, names: tuple[str, ...] = _RUN_FILES) -> Path | None:
    """Move result files of an earlier run into ``folder/history/<time>/``; return that folder.

    The time is that of the earlier ``result.json`` (its modification time), so each
    history entry is named after the run that made it. Returns None if nothing was moved.
    """
    folder = Path(folder)
    present = [folder / n for n in names if (folder / n).is_file()]
    if not present:
        return None
    anchor = folder / "result.json"
    stamp = (anchor if anchor.is_file() else present[0]).stat().st_mtime
    base = folder / "history" / time.strftime("%Y-%m-%dT%H-%M-%S", time.localtime(stamp))
    target, n = base, 1
    while target.exists():
        n += 1
        target = base.with_name(f"{base.name}-{n}")
    target.mkdir(parents=True)
    for path in present:
        os.replace(path, target / path.name)
    return target


def _fmt_p(v: float | None) -> str:
    return format_p(v)
