"""Property: on any small table, read_inputs returns an Intake or raises InputError.

Random headers (duplicates, empty names, stray spaces), random cells (numbers, text,
NaN, inf, empty, huge), ragged rows and random options: no other exception may escape,
since anything else is reported to the user as an internal fault.
"""

import csv
import tempfile
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from pipeline.errors import InputError
from pipeline.intake.read import Intake, read_inputs

NAMES = ["X1", "X2", "X3", "regime", "", "X1 ", "plate"]
CELLS = ["1", "2.5", "-3e2", "0", "abc", "NaN", "nan", "inf", "-inf", "", "NA", "1e400",
         " 4 ", "q,uote", "ctrl"]
LABELS = ["ctrl", "kd", "", " ctrl", "zz"]
REGIMES = [
    "regime,targets\nctrl,\nkd,X1\n",
    "regime,targets,known\nctrl,,\nkd,X2;X3,no\n",
    "regime,targets\nctrl,X3\nkd,X1\n",
    "regime,targets\nctrl,\n",
    "regime\nctrl\n",
    "",
]

cells = st.one_of(st.sampled_from(CELLS), st.floats(allow_nan=True, allow_infinity=True).map(repr),
                  st.integers(-5, 5).map(str))


# mostly clean numbers, so that many examples get through the whole intake
numbers = st.floats(-1e3, 1e3).map(repr)
clean = st.one_of(*[numbers] * 200, cells)


@st.composite
def tables(draw):
    if draw(st.booleans()):  # wild header
        header = draw(st.lists(st.sampled_from(NAMES), min_size=1, max_size=5))
    else:  # plausible header
        header = draw(st.permutations(["X1", "X2", "X3", "regime"]))
    body = draw(st.sampled_from([cells, clean, numbers, numbers]))
    ragged = draw(st.sampled_from([[0], [0], [0], [0, 1, -1]]))
    labels = draw(st.sampled_from([LABELS[:2], LABELS[:2], LABELS]))
    n = draw(st.integers(0, 40))
    rows = []
    for _ in range(n):
        width = len(header) + draw(st.sampled_from(ragged))
        row = [draw(st.sampled_from(labels)) if j < len(header) and header[j] == "regime"
               else draw(body) for j in range(max(width, 0))]
        rows.append(row)
    return header, rows


@pytest.mark.slow
@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(table=tables(), regimes=st.sampled_from(REGIMES), drop=st.booleans(),
       reference=st.sampled_from([None, "ctrl", "kd", "nope"]),
       ignore=st.sampled_from([(), ("plate",), ("X3",)]),
       test=st.sampled_from(["gaussian", "rank"]), chunk=st.integers(1, 30))
@example(table=(["X1", "X2", "regime", "X3"], [["1", "1", "ctrl", "NaN"]]),  # found by the search:
         regimes="regime,targets\nctrl,\nkd,X1\n", drop=True, reference=None, ignore=(),
         test="rank", chunk=1)  # the reference loses its only row (once a ValueError)
def test_intake_returns_or_raises_input_error(table, regimes, drop, reference, ignore, test, chunk):
    header, rows = table
    with tempfile.TemporaryDirectory() as folder:
        data = Path(folder) / "d.csv"
        with open(data, "w", newline="", encoding="utf-8") as fh:
            writer = csv.writer(fh)
            writer.writerow(header)
            writer.writerows(rows)
        reg = Path(folder) / "regimes.csv"
        reg.write_text(regimes, encoding="utf-8")
        try:
            intake = read_inputs([data], reg, drop_missing=drop, reference=reference,
                                 ignore_columns=ignore, test=test, chunk_rows=chunk)
        except InputError as exc:
            assert str(exc)  # a message for the user
        else:
            assert isinstance(intake, Intake)
            assert np.isfinite(intake.moments.scatter).all()
            assert int(intake.moments.count.sum()) + intake.dropped_rows <= len(rows)
