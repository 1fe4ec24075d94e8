"""What every measurement-file reader shares: the header, the chunk, the reading options.

A reader is a module of :mod:`pipeline.intake.formats` with three functions (the
:class:`Reader` protocol):

- ``read_header(path, kind, compression, options) -> TableHeader``: the column names,
  cheaply;
- ``iter_chunks(header, variables, regime_column, chunk_rows, options)``: the rows in
  chunks of at most `chunk_rows`, as :class:`Chunk` (``regime_column`` None: the file has
  no regime column and the chunk's labels are left empty);
- ``locate_row(header, data_row) -> str``: where a data row is, as the user counts.

This module also holds the cell conversion that the text and spreadsheet readers share:
a variable cell is a number or a missing-value marker, never a guess, and a value such
as ``1,25`` in a file read with a decimal point is reported as a decimal comma.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path
from typing import Protocol

import numpy as np
import pandas as pd

from pipeline.errors import InputError
from pipeline.intake.reading import DECIMALS, REGIME_SOURCES, ReadOptions
from pipeline.records import record

__all__ = ["NA_STRINGS", "DECIMALS", "REGIME_SOURCES", "ReadOptions", "TableHeader", "Chunk",
           "Reader", "encode_labels", "labels_of", "numeric_block", "cell_text"]

#: Strings read as a missing value in a variable column (pandas' default markers).
NA_STRINGS = ("", "#N/A", "#N/A N/A", "#NA", "-1.#IND", "-1.#QNAN", "-NaN", "-nan", "1.#IND",
              "1.#QNAN", "<NA>", "N/A", "NA", "NULL", "NaN", "None", "n/a", "nan", "null")


# a number written with a decimal comma: 1,25  -0,5  ,75  3,1e-4
_DECIMAL_COMMA = re.compile(r"^\s*[+-]?(\d+,\d*|,\d+)([eE][+-]?\d+)?\s*$")


@record(frozen=True)
class TableHeader:
    """A data file and the names of its columns, in file order.

    `kind` is the reader's name for the format (``csv``, ``tsv``, ``txt``, ``parquet``,
    ``xlsx``, ``h5ad``); `compression` is ``"gzip"`` or None; `delimiter` is the column
    separator of a text file; `sheet` the worksheet read from a workbook; `obs` the
    per-row annotation columns (AnnData ``obs``), where the regime column may be found
    besides `columns`; `rows` the number of data rows when the format tells it cheaply.
    """

    path: Path
    kind: str
    columns: tuple[str, ...]
    compression: str | None = None
    delimiter: str | None = None
    sheet: str | None = None
    obs: tuple[str, ...] = ()
    rows: int | None = None


@record
class Chunk:
    """Consecutive rows of one file.

    `start` is the number of data rows of the file before this chunk; `labels` holds the
    distinct regime labels of the chunk and `codes` indexes into it per row (-1: missing);
    `values` is the float array (n, p) of the variables in the requested order.
    """

    start: int
    labels: list[str]
    codes: np.ndarray
    values: np.ndarray


class Reader(Protocol):
    """The three functions of a reader module (see the module docstring)."""

    def read_header(self, path: Path, kind: str, compression: str | None,
                    options: ReadOptions) -> TableHeader: ...

    def iter_chunks(self, header: TableHeader, variables: Sequence[str],
                    regime_column: str | None, chunk_rows: int,
                    options: ReadOptions) -> Iterator[Chunk]: ...

    def locate_row(self, header: TableHeader, data_row: int) -> str: ...


def cell_text(x: object) -> str:
    """A label cell as text: ``3`` and ``3.0`` both read ``"3"``; spaces stripped."""
    if isinstance(x, bytes):
        x = x.decode("utf-8", errors="replace")
    if isinstance(x, (float, np.floating)) and float(x).is_integer():
        return str(int(x))
    return str(x).strip()


def encode_labels(categories: Sequence[object], codes: np.ndarray) -> tuple[list[str], np.ndarray]:
    """Distinct labels (as stripped text, empty ones dropped) and per-row codes into them.

    `codes` index `categories` (-1: missing); categories that read the same once stripped
    share one label, and an empty one is a missing label.
    """
    raw = [cell_text(c) for c in categories]
    labels = list(dict.fromkeys(x for x in raw if x))
    where = {x: i for i, x in enumerate(labels)}
    remap = np.array([where.get(x, -1) for x in raw] + [-1], dtype=np.int64)
    return labels, remap[np.asarray(codes, dtype=np.int64)]  # code -1 picks the trailing -1


def labels_of(col: pd.Series) -> tuple[list[str], np.ndarray]:
    """Distinct stripped labels of a column and per-row codes (-1 for a missing label)."""
    if not isinstance(col.dtype, pd.CategoricalDtype):
        if col.dtype == object:
            col = col.map(lambda x: x if x is None or isinstance(x, str) or x != x
                          else cell_text(x))
        col = col.astype("category")
    return encode_labels(list(col.cat.categories), col.cat.codes.to_numpy())


def _to_number(raw: pd.Series, decimal: str) -> tuple[pd.Series, np.ndarray]:
    """Cells to floats, and which cells hold something (neither empty nor a missing marker).

    A cell that holds something but is not a number becomes NaN.
    """
    values = raw.to_numpy(dtype=object)
    n = len(values)
    is_str = np.fromiter((isinstance(x, str) for x in values), bool, n)
    # true/false cells are not measurements
    not_number = np.fromiter((isinstance(x, (bool, np.bool_)) for x in values), bool, n)
    obj = pd.Series(values, index=raw.index, dtype=object)
    text = obj[is_str].astype(str).str.strip()
    marker = np.zeros(n, dtype=bool)
    marker[is_str] = text.isin(NA_STRINGS).to_numpy()
    if decimal == ",":
        # "1,25" reads 1.25; a point is not a decimal mark here (it may group thousands)
        not_number[is_str] |= text.str.contains(".", regex=False).to_numpy()
        text = text.str.replace(",", ".", regex=False)
    obj[is_str] = text
    obj[marker] = None
    num = pd.to_numeric(obj, errors="coerce").astype(np.float64)
    num[not_number] = np.nan
    present = obj.notna().to_numpy()
    return num, present


def numeric_block(header: TableHeader, frame: pd.DataFrame, variables: Sequence[str],
                  start: int, decimal: str, locate: Callable[[TableHeader, int], str]
                  ) -> np.ndarray:
    """The variable columns of `frame` as float64 (n, p); report the first non-number.

    Columns already numeric pass as they are; other columns are converted cell by cell
    (missing markers become NaN). A cell that is neither raises InputError naming the
    file, the row (through `locate`), the column and the value, with a hint: decimal
    commas, or ``--ignore-columns`` for a column of text.
    """
    variables = list(variables)
    bad = [v for v in variables if frame[v].dtype.kind not in "fiu"]
    if not bad:
        return frame[variables].to_numpy(dtype=np.float64)
    frame = frame.copy()
    text_columns: list[tuple[str, int, str]] = []
    first_bad: tuple[int, str, str] | None = None
    for v in bad:
        raw = frame[v]
        num, present = _to_number(raw, decimal)
        wrong = present & num.isna().to_numpy()
        if wrong.any():
            i = int(np.flatnonzero(wrong)[0])
            val = str(raw.iloc[i])
            if decimal == "." and _DECIMAL_COMMA.match(val):
                also = " (and separate the columns by ';' or tabs)" \
                    if header.delimiter == "," else ""
                raise InputError(f"data file {header.path}: values such as '{val}' in column "
                                 f"{v} ({locate(header, start + i)}) look like decimal commas; "
                                 f"pass --decimal ,{also}")
            if start == 0 and num.notna().sum() == 0 and present.sum() >= 2:
                text_columns.append((v, i, val))
            elif first_bad is None or i < first_bad[0]:
                first_bad = (i, v, val)
        frame[v] = num
    if text_columns:
        names = [n for n, _, _ in text_columns]
        v, i, val = text_columns[0]
        raise InputError(f"data file {header.path}: column(s) {', '.join(names)} "
                         f"are not numeric (e.g. '{val}' in column '{v}' at "
                         f"{locate(header, start + i)}); if they are not measurements, "
                         f"pass --ignore-columns {','.join(names)}")
    if first_bad is not None:
        i, v, val = first_bad
        hint = " (a point is not a decimal mark with --decimal ,)" \
            if decimal == "," and "." in val else ""
        raise InputError(f"data file {header.path}, {locate(header, start + i)}, column "
                         f"'{v}': '{val}' is not a number{hint}; correct the cell, or empty it "
                         f"and pass --drop-missing to drop the row (or pass --ignore-columns "
                         f"{v} if the column is not a measurement)")
    return frame[variables].to_numpy(dtype=np.float64)
