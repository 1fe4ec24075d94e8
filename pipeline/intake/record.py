"""What the intake read: the design, the per-regime statistics and the notes, as one record.

Kept apart from the readers (`pipeline.intake.read`) so that a rerun whose statistics come
from the store builds it without importing the file readers.
"""

from __future__ import annotations

from dataclasses import field

from pipeline.design import Design
from pipeline.records import record
from pipeline.stats.moments import Moments

__all__ = ["Intake"]


@record
class Intake:
    """What the intake read: design, per-regime statistics, fingerprint, notes.

    Attributes
    ----------
    design : Design
        Variables in data column order (first file); regimes in regimes-file order with
        their sample counts.
    moments : Moments
        Per-regime statistics, regimes in the order of ``design.regimes``.
    fingerprint : str
        Content hash of the input bytes and the options that change the statistics.
    dropped_rows : int
        Rows dropped for missing values (``drop_missing``).
    warnings : list of str
    """

    design: Design
    moments: Moments
    fingerprint: str
    dropped_rows: int = 0
    warnings: list[str] = field(default_factory=list)

    def summary(self) -> str:
        """A plain-text table: samples and targets per regime, then the warnings."""
        rows = [("regime", "samples", "targets", "role")]
        for r in self.design.regimes:
            role = "reference" if r.reference else ("targets unknown" if not r.known
                                                     else "intervention")
            rows.append((r.name, str(r.samples), ";".join(r.targets) or "-", role))
        widths = [max(len(row[i]) for row in rows) for i in range(4)]
        lines = [f"{len(self.design.variables)} variables, "
                 f"{int(self.moments.count.sum())} samples, {len(self.design.regimes)} regimes"
                 + (f" ({self.dropped_rows} rows dropped)" if self.dropped_rows else "")]
        lines += ["  ".join(c.ljust(w) for c, w in zip(row, widths, strict=True)).rstrip()
                  for row in rows]
        lines += [f"warning: {w}" for w in self.warnings]
        return "\n".join(lines)

