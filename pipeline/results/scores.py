"""Scores of a learned graph against a truth (the result of ``compare``).

`Scores` carries the structural Hamming distance and the adjacency and orientation
precision and recall with the counts behind them; it prints them as a table. The
computation is `pipeline.analyses.scoring`.
"""

from __future__ import annotations

import io
from dataclasses import asdict, dataclass
from typing import Any

from rich.console import Console
from rich.markup import escape
from rich.table import Table

__all__ = ["Scores"]


@dataclass(frozen=True)
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
        console = Console(file=io.StringIO(), width=width, color_system=None,
                          force_terminal=False)
        self.print(console)
        return console.file.getvalue()

    def print(self, console: Console, title: str = "") -> None:
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
