"""Excel workbooks (``.xlsx``): one worksheet read row by row in read-only mode.

The workbook is opened with openpyxl in read-only mode, which streams the sheet's rows
from the file instead of building the whole workbook in memory; formulas give their
stored values. A workbook with one worksheet needs no option; with several, ``--sheet
NAME`` chooses one (without it, the error lists the sheet names). The first non-empty
row is the header; empty rows are skipped; rows are located as Excel numbers them.
Numeric cells are numbers already; a text cell must read as a number as in a CSV file
(``--decimal ,`` applies to text cells); true/false and date cells are not numbers.
"""

from __future__ import annotations

import zipfile
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path

import numpy as np
import pandas as pd

from pipeline.errors import InputError, nearest_names
from pipeline.intake.formats.base import (
    Chunk,
    ReadOptions,
    TableHeader,
    cell_text,
    labels_of,
    numeric_block,
)

__all__ = ["read_header", "iter_chunks", "locate_row"]

_INSTALL = "pip install openpyxl"


@contextmanager
def _sheet(path: Path, sheet: str | None):
    """The chosen worksheet of an open workbook (closed on exit) and its name."""
    try:
        import openpyxl
    except ImportError:
        raise InputError(f"data file {path}: reading .xlsx needs the openpyxl package; "
                         f"install it: {_INSTALL}") from None
    try:
        wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except (zipfile.BadZipFile, KeyError, OSError, ValueError) as exc:
        raise InputError(f"data file {path}: is not a readable Excel workbook (.xlsx) ({exc}); "
                         f"save it again from the spreadsheet program as .xlsx, or as CSV") \
            from None
    try:
        names = list(wb.sheetnames)
        if sheet is None:
            if len(names) != 1:
                raise InputError(f"data file {path}: the workbook has {len(names)} sheets "
                                 f"({', '.join(names)}); choose one with --sheet NAME")
            sheet = names[0]
        elif sheet not in names:
            raise InputError(f"data file {path}: no sheet '{sheet}'"
                             f"{nearest_names(sheet, names)}; the sheets are: "
                             f"{', '.join(names)}; choose one with --sheet NAME")
        yield wb[sheet], sheet
    finally:
        wb.close()


def _rows(ws) -> Iterator[tuple[int, tuple]]:
    """(Excel row number, cells) of every row that is not empty."""
    for number, row in enumerate(ws.iter_rows(values_only=True), start=1):
        if any(c is not None and not (isinstance(c, str) and not c.strip()) for c in row):
            yield number, row


def read_header(path: Path, kind: str, compression: str | None,
                options: ReadOptions) -> TableHeader:
    """The first non-empty row of the sheet, trailing empty cells dropped."""
    with _sheet(path, options.sheet) as (ws, name):
        first = next(_rows(ws), None)
    if first is None:
        raise InputError(f"data file {path}: sheet '{name}' is empty; it needs a header row "
                         f"and one row per sample")
    cells = list(first[1])
    while cells and cells[-1] is None:
        cells.pop()
    columns = tuple("" if c is None else cell_text(c) for c in cells)
    return TableHeader(path, kind, columns, sheet=name)


def locate_row(header: TableHeader, data_row: int) -> str:
    """``"sheet S, row R"`` with R as Excel numbers the row."""
    with _sheet(header.path, header.sheet) as (ws, name):
        for k, (number, _) in enumerate(_rows(ws)):
            if k == data_row + 1:  # k = 0 is the header
                return f"sheet '{name}', row {number}"
    return f"sheet '{header.sheet}', data row {data_row + 1}"


def iter_chunks(header: TableHeader, variables: Sequence[str], regime_column: str | None,
                chunk_rows: int, options: ReadOptions) -> Iterator[Chunk]:
    """Yield the sheet's rows in chunks; cells are checked as in a CSV file."""
    width = len(header.columns)
    variables = list(variables)
    with _sheet(header.path, header.sheet) as (ws, name):
        rows = _rows(ws)
        next(rows, None)  # the header
        start = 0
        block: list[tuple] = []
        for number, row in rows:
            if len(row) > width and any(c is not None for c in row[width:]):
                raise InputError(f"data file {header.path}, sheet '{name}', row {number}: has a "
                                 f"value beyond the last named column; name the column in the "
                                 f"header row or clear the cell")
            block.append(tuple(row[:width]) + (None,) * (width - len(row)))
            if len(block) == chunk_rows:
                yield _chunk(header, block, variables, regime_column, start, options)
                start += len(block)
                block = []
        if block:
            yield _chunk(header, block, variables, regime_column, start, options)


def _chunk(header: TableHeader, block: list[tuple], variables: list[str],
           regime_column: str | None, start: int, options: ReadOptions) -> Chunk:
    frame = pd.DataFrame.from_records(block, columns=list(header.columns), coerce_float=False)
    values = numeric_block(header, frame, variables, start, options.decimal, locate_row)
    if regime_column is None:
        return Chunk(start, [], None, values)
    col = frame[regime_column].astype(object)
    labels, codes = labels_of(col.where(col.notna(), None))
    return Chunk(start, labels, codes, np.asarray(values, dtype=np.float64))
