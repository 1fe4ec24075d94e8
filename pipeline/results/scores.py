"""Scores of a learned graph against a truth (the result of ``compare``).

`Scores` carries the structural Hamming distance and the adjacency and orientation
precision and recall with the counts behind them; it prints them as a table.
`Comparison` holds the scores against three references (the true DAG, its essential
graph under the true targets, and under the targets the result was learned with). The
computation is `pipeline.analyses.scoring`.
"""

from __future__ import annotations

from dataclasses import asdict
from typing import Any

from pipeline.records import record
from pipeline.terminal import Table, Terminal, escape, plain_text

__all__ = ["Scores", "Comparison"]


@record(frozen=True)
class Scores:
    """How close a learned graph is to the truth.

    Attributes
    ----------
    shd : int
        Structural Hamming distance (see `shd`).
    adjacency_precision, adjacency_recall : float or None
        Among the learned adjacencies, the fraction that are true; among the true
        adjacencies, the fraction learned. None when the denominator is 0.
    orientation_precision, orientation_recall : float or None
        Among the directed edges of the learned graph, the fraction directed the same way
        in the truth; among the directed edges of the truth, the fraction the learned
        graph directs the same way. None when the denominator is 0.
    learned_edges, true_edges, shared_adjacencies : int
    learned_directed, true_directed, shared_directed : int
        The counts behind the fractions.
    """

    shd: int
    adjacency_precision: float | None
    adjacency_recall: float | None
    orientation_precision: float | None
    orientation_recall: float | None
    learned_edges: int
    true_edges: int
    shared_adjacencies: int
    learned_directed: int
    true_directed: int
    shared_directed: int

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)

    def summary(self, width: int = 100) -> str:
        """The same table as `print`, as plain text."""
        return plain_text(self.print, width)

    def print(self, console: Terminal, title: str = "") -> None:
        """A table of the scores on `console`."""
        def f(v: float | None) -> str:
            return "n/a" if v is None else f"{v:.3f}"

        t = Table(title=escape("Scores against the true interventional essential graph"
                               + (f": {title}" if title else "")))
        t.add_column("score")
        t.add_column("value", justify="right")
        t.add_column("counts", justify="right")
        t.add_row("structural Hamming distance", str(self.shd), "")
        t.add_row("adjacency precision", f(self.adjacency_precision),
                  f"{self.shared_adjacencies} / {self.learned_edges}")
        t.add_row("adjacency recall", f(self.adjacency_recall),
                  f"{self.shared_adjacencies} / {self.true_edges}")
        t.add_row("orientation precision", f(self.orientation_precision),
                  f"{self.shared_directed} / {self.learned_directed}")
        t.add_row("orientation recall", f(self.orientation_recall),
                  f"{self.shared_directed} / {self.true_directed}")
        console.print(t)


@record(frozen=True)
class Comparison:
    """A result scored against fixed references.

    Attributes
    ----------
    dag : Scores
        Against the true DAG itself: every true edge counts as directed, so orientation
        recall is the share of all true arrows the result recovers.
    true_design : Scores
        Against the interventional essential graph of the true DAG under the true
        targets (`true_targets`) or, without them, the declared targets: the same
        yardstick for every run on these experiments, whatever its settings.
    design : Scores
        Against the essential graph under the targets the result was learned with
        (declared, or detected where learned): the scores ``compare`` gave before.
    true_targets : bool
        Whether the true targets were given (else the declared ones stand in).
    """

    dag: Scores
    true_design: Scores
    design: Scores
    true_targets: bool = False

    def to_dict(self) -> dict[str, Any]:
        """The scores against the result's own design at the top level (as before), plus
        ``against_dag`` and ``against_true_design``."""
        return {**self.design.to_dict(), "against_dag": self.dag.to_dict(),
                "against_true_design": self.true_design.to_dict(),
                "true_design_targets": "true" if self.true_targets else "declared"}

    def summary(self, width: int = 100) -> str:
        """The same table as `print`, as plain text."""
        return plain_text(self.print, width)

    def print(self, console: Terminal, title: str = "") -> None:
        """One table: a column per reference."""
        def f(v: float | None) -> str:
            return "n/a" if v is None else f"{v:.3f}"

        which = "true targets" if self.true_targets else "declared targets"
        cols = [("true DAG", self.dag), (which, self.true_design)]
        if self.design != self.true_design:
            cols.append(("result's targets", self.design))
        t = Table(title=escape("Scores" + (f": {title}" if title else "")))
        t.add_column("score")
        for name, _ in cols:
            t.add_column(escape(name), justify="right")
        t.add_row("structural Hamming distance", *(str(s.shd) for _, s in cols))
        rows = (("adjacency precision", "adjacency_precision", "shared_adjacencies",
                 "learned_edges"),
                ("adjacency recall", "adjacency_recall", "shared_adjacencies", "true_edges"),
                ("orientation precision", "orientation_precision", "shared_directed",
                 "learned_directed"),
                ("orientation recall", "orientation_recall", "shared_directed",
                 "true_directed"))
        for label, frac, num, den in rows:
            t.add_row(label, *(f"{f(getattr(s, frac))} ({getattr(s, num)}/{getattr(s, den)})"
                               for _, s in cols))
        console.print(t)
        console.print("true DAG: every true edge counts as directed. "
                      f"{which}: the true essential graph under the {which}, where edges "
                      "that no experiment could orient count as undirected"
                      + ("" if self.true_targets else
                         " (give --truth-regimes for the targets that really acted)")
                      + (". result's targets: the same under the targets the result was "
                         "learned with" if len(cols) > 2 else ""))
