"""Flattened evidence tables: ``removed.csv`` against the standard library's csv writer."""

from __future__ import annotations

import csv
import io
import math

from pipeline.learner.evidence import RemovedPair
from pipeline.results.tables import REMOVED_COLUMNS, removed_csv


class _Removed:
    """The one attribute `removed_csv` reads of a `Learned`."""

    def __init__(self, removed):
        self.removed = removed


def _reference(removed) -> str:
    """The csv module's text (QUOTE_MINIMAL, common practice) of the documented cells."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(REMOVED_COLUMNS)
    for r in removed:
        cells = [r.x, r.y, ";".join(r.separating_set)]
        for v in (r.pvalue, r.statistic):
            cells.append(None if v is None or not math.isfinite(float(v)) else float(v))
        cells += [int(r.level), r.regime or "", ";".join(r.notes)]
        w.writerow(cells)
    return buf.getvalue()


def test_removed_csv_is_what_the_csv_writer_writes():
    removed = [
        RemovedPair("A", "B", (), 0.5, 1.25, 0),
        RemovedPair("A", "C", ("B", "D"), 1e-300, -0.0, 2, ("a note",)),
        RemovedPair("x,1", 'say "hi"', ("line\nbreak",), float("nan"), float("inf"), 1),
        RemovedPair("F[kd]", "B", ("C",), None, None, 1, ("left out: r1, r2",), regime="kd"),
        RemovedPair("B", "C", (), 0.1 + 0.2, 3.0, 0, ("x", "y"), regime=None),
        RemovedPair("C", "D\r", (), 2.5e-17, 12345678901234567.0, 0),
    ]
    text = removed_csv(_Removed(removed))
    assert text == _reference(removed)
    back = list(csv.reader(io.StringIO(removed_csv(_Removed(removed[:5])))))
    assert back[3][:2] == ["x,1", 'say "hi"'] and back[3][3:5] == ["", ""]
    assert float(back[5][3]) == 0.1 + 0.2  # shortest exact form, read back exactly
