"""Measurement tables: CSV and Parquet files read in chunks of rows.

A table has one row per sample, one numeric column per variable and one column of
regime labels. This module reads headers, settles which columns are variables, and
streams chunks of ``(regime labels, values)`` with memory independent of the file
length: CSV through the pandas C parser in chunks, Parquet by record batches. It checks
only what a chunk shows (names, numbers); counting, missing values and statistics are
the caller's (:mod:`pipeline.intake.read`).

Cells are never guessed: a variable cell must parse as a number or be a missing-value
marker (empty, ``NA``, ``NaN``, ``null``, ...); regime labels are strings (surrounding
spaces stripped; only an empty cell is a missing label).
"""

from __future__ import annotations

import csv
import warnings
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from pipeline.errors import InputError, nearest_names

__all__ = ["SUFFIXES", "NA_STRINGS", "TableHeader", "Chunk", "check_data_path", "read_header",
           "resolve_variables", "iter_chunks", "locate_row"]

#: Accepted data file suffixes and their kind.
SUFFIXES = {".csv": "csv", ".parquet": "parquet"}

#: Strings read as a missing value in a variable column (pandas' default markers).
NA_STRINGS = ("", "#N/A", "#N/A N/A", "#NA", "-1.#IND", "-1.#QNAN", "-NaN", "-nan", "1.#IND",
              "1.#QNAN", "<NA>", "N/A", "NA", "NULL", "NaN", "None", "n/a", "nan", "null")


@dataclass(frozen=True)
class TableHeader:
    """A data file and the column names of its header, in file order."""

    path: Path
    kind: str  # "csv" | "parquet"
    columns: tuple[str, ...]


@dataclass
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


def check_data_path(path: str | Path) -> Path:
    """Return `path` as a Path after checking that it is an existing CSV or Parquet file."""
    p = Path(path)
    if not p.exists():
        raise InputError(f"data file {p}: no such file; check the path")
    if not p.is_file():
        raise InputError(f"data file {p}: is not a file")
    if p.suffix.lower() not in SUFFIXES:
        raise InputError(f"data file {p}: unknown file type '{p.suffix}'; use CSV (.csv) or "
                         f"Parquet (.parquet)")
    if p.stat().st_size == 0:
        raise InputError(f"data file {p}: is empty (0 bytes); it needs a header line and one "
                         f"row per sample")
    return p


def read_header(path: Path) -> TableHeader:
    """Read the column names of a data file and check they are usable names."""
    kind = SUFFIXES[path.suffix.lower()]
    if kind == "csv":
        try:
            with open(path, encoding="utf-8-sig", newline="") as fh:
                reader = csv.reader(fh)
                columns = next((row for row in reader if row), None)
        except UnicodeDecodeError:
            raise InputError(f"data file {path}: is not UTF-8 text; save it as UTF-8 CSV") \
                from None
        except csv.Error as exc:
            raise InputError(f"data file {path}: is not valid CSV ({exc})") from None
        if columns is None:
            raise InputError(f"data file {path}: has no header line; the first line should "
                             f"name the columns")
    else:
        import pyarrow.parquet as pq

        try:
            columns = list(pq.ParquetFile(path).schema_arrow.names)
        except Exception as exc:  # noqa: BLE001 - pyarrow raises several types for bad files
            raise InputError(f"data file {path}: is not a readable Parquet file ({exc})") \
                from None
    empty = [i + 1 for i, c in enumerate(columns) if not c.strip()]
    if empty:
        raise InputError(f"data file {path}: column {', '.join(map(str, empty))} of the header "
                         f"has no name; name every column (a table saved with its row index "
                         f"has an unnamed first column: save it without the index)")
    dup = sorted({c for c in columns if columns.count(c) > 1})
    if dup:
        raise InputError(f"data file {path}: column name(s) {', '.join(dup)} appear more than "
                         f"once in the header; give every column its own name")
    return TableHeader(path, kind, tuple(columns))


def resolve_variables(headers: Sequence[TableHeader], regime_column: str,
                      ignore_columns: Sequence[str]) -> tuple[str, ...]:
    """The variable columns: every column but the regime column and the ignored ones.

    They come in the column order of the first file; every file must have the regime
    column and the same variables (in any order).
    """
    ignore = list(dict.fromkeys(ignore_columns))
    seen = set().union(*(h.columns for h in headers))
    unknown = [c for c in ignore if c not in seen]
    if unknown:
        cols = sorted(seen)
        raise InputError(f"--ignore-columns: column(s) {', '.join(unknown)} not found in the data"
                         f"{nearest_names(unknown[0], cols)}; columns are: {', '.join(cols)}")
    if regime_column in ignore:
        raise InputError(f"--ignore-columns: '{regime_column}' is the regime column; it cannot "
                         f"be ignored (choose the regime column with --regime-column)")
    for h in headers:
        if regime_column not in h.columns:
            hint = ""
            if len(h.columns) == 1 and any(s in h.columns[0] for s in (";", "\t")):
                hint = " (the header looks separated by ';' or tabs: save the file as comma-" \
                       "separated CSV)"
            raise InputError(f"data file {h.path}: no regime column '{regime_column}'"
                             f"{nearest_names(regime_column, h.columns)}; columns seen: "
                             f"{', '.join(h.columns)}{hint}; name the column that labels the "
                             f"regime with --regime-column NAME")
    skip = set(ignore) | {regime_column}
    variables = tuple(c for c in headers[0].columns if c not in skip)
    if not variables:
        raise InputError(f"data file {headers[0].path}: no variable columns besides the regime "
                         f"column '{regime_column}' and the ignored ones")
    first = set(variables)
    for h in headers[1:]:
        other = {c for c in h.columns if c not in skip}
        if other != first:
            only_first = sorted(first - other)
            only_other = sorted(other - first)
            parts = []
            if only_first:
                parts.append(f"missing {', '.join(only_first)}")
            if only_other:
                parts.append(f"extra {', '.join(only_other)}")
            raise InputError(f"data file {h.path}: its variable columns differ from those of "
                             f"{headers[0].path} ({'; '.join(parts)}); all data files need the "
                             f"same variables, or name extra columns with --ignore-columns")
    return variables


def locate_row(header: TableHeader, data_row: int) -> str:
    """Where data row `data_row` (0-based, header excluded) is, as a user counts it.

    ``"line L"`` for CSV (the line where the row starts, as a text editor numbers it),
    ``"row R"`` (1-based) for Parquet.
    """
    if header.kind != "csv":
        return f"row {data_row + 1}"
    with open(header.path, encoding="utf-8-sig", errors="replace", newline="") as fh:
        reader = csv.reader(fh)
        start, k = 1, -1  # k: index of the current data row (-1: the header)
        seen_header = False
        for cells in reader:
            if cells:  # blank lines are skipped, as the parser does
                if seen_header:
                    k += 1
                    if k == data_row:
                        return f"line {start}"
                seen_header = True
            start = reader.line_num + 1
    return f"data row {data_row + 1}"


def iter_chunks(header: TableHeader, variables: Sequence[str], regime_column: str,
                chunk_rows: int) -> Iterator[Chunk]:
    """Yield the rows of one file in chunks of at most `chunk_rows` rows.

    Raises
    ------
    InputError
        A variable column that is not numeric (named, with a sample value), a cell that is
        not a number (file, line, column and value), a row with too many cells, bytes that
        are not UTF-8.
    """
    if header.kind == "csv":
        yield from _csv_chunks(header, list(variables), regime_column, chunk_rows)
    else:
        yield from _parquet_chunks(header, list(variables), regime_column, chunk_rows)


def _csv_chunks(header: TableHeader, variables: list[str], regime_column: str,
                chunk_rows: int) -> Iterator[Chunk]:
    na = {v: list(NA_STRINGS) for v in variables}
    na[regime_column] = [""]
    reader = pd.read_csv(
        # every column is parsed (no usecols): the parser then rejects rows with extra cells
        header.path, engine="c", chunksize=chunk_rows, header=0, names=list(header.columns),
        dtype={regime_column: "category"}, keep_default_na=False, na_values=na,
        skip_blank_lines=True, encoding="utf-8-sig")
    start = 0
    try:
        with reader:
            while True:
                with warnings.catch_warnings():
                    # a text cell makes the parser warn about mixed types: we report it ourselves
                    warnings.simplefilter("ignore", pd.errors.DtypeWarning)
                    frame = next(reader, None)
                if frame is None:
                    break
                values = _numeric_block(header, frame, variables, start)
                labels, codes = _labels(frame[regime_column])
                yield Chunk(start, labels, codes, values)
                start += len(frame)
    except UnicodeDecodeError:
        raise InputError(f"data file {header.path}: is not UTF-8 text; save it as UTF-8 CSV") \
            from None
    except pd.errors.ParserError as exc:
        raise InputError(f"data file {header.path}: cannot be read as CSV ({exc}); every row "
                         f"needs as many cells as the header") from None


def _labels(col: pd.Series) -> tuple[list[str], np.ndarray]:
    """Distinct stripped labels and per-row codes (-1 for a missing label)."""
    cat = col.cat if isinstance(col.dtype, pd.CategoricalDtype) else col.astype("category").cat
    raw = [str(c).strip() for c in cat.categories]
    labels = list(dict.fromkeys(x for x in raw if x))
    where = {x: i for i, x in enumerate(labels)}
    remap = np.array([where.get(x, -1) for x in raw] + [-1], dtype=np.int64)
    codes = cat.codes.to_numpy()
    return labels, remap[codes]  # code -1 picks the trailing -1


def _numeric_block(header: TableHeader, frame: pd.DataFrame, variables: list[str],
                   start: int) -> np.ndarray:
    """The variable columns of `frame` as float64 (n, p); locate the first non-number."""
    bad = [v for v in variables if frame[v].dtype.kind not in "fiu"]
    if not bad:
        return frame[variables].to_numpy(dtype=np.float64)
    frame = frame.copy()
    text_columns: list[tuple[str, int, str]] = []
    first_bad: tuple[int, str, str] | None = None
    for v in bad:
        raw = frame[v]
        num = pd.to_numeric(raw.astype(object).where(raw.notna(), np.nan), errors="coerce")
        wrong = raw.notna().to_numpy() & num.isna().to_numpy()
        if wrong.any():
            i = int(np.flatnonzero(wrong)[0])
            if start == 0 and num.notna().sum() == 0 and raw.notna().sum() >= 2:
                text_columns.append((v, i, str(raw.iloc[i])))
            elif first_bad is None or i < first_bad[0]:
                first_bad = (i, v, str(raw.iloc[i]))
        frame[v] = num.astype(np.float64)
    if text_columns:
        names = [n for n, _, _ in text_columns]
        v, i, val = text_columns[0]
        raise InputError(f"data file {header.path}: column(s) {', '.join(names)} "
                         f"are not numeric (e.g. '{val}' in column '{v}' at "
                         f"{locate_row(header, start + i)}); if they are not measurements, "
                         f"pass --ignore-columns {','.join(names)}")
    if first_bad is not None:
        i, v, val = first_bad
        raise InputError(f"data file {header.path}, {locate_row(header, start + i)}, column "
                         f"'{v}': '{val}' is not a number; correct the cell, or empty it and "
                         f"pass --drop-missing to drop the row (or pass --ignore-columns {v} "
                         f"if the column is not a measurement)")
    return frame[variables].to_numpy(dtype=np.float64)


def _parquet_chunks(header: TableHeader, variables: list[str], regime_column: str,
                    chunk_rows: int) -> Iterator[Chunk]:
    import pyarrow as pa
    import pyarrow.compute as pc
    import pyarrow.parquet as pq

    pf = pq.ParquetFile(header.path)
    schema = pf.schema_arrow

    def numeric(t: pa.DataType) -> bool:
        return pa.types.is_integer(t) or pa.types.is_floating(t) or pa.types.is_decimal(t) \
            or pa.types.is_null(t)

    text = [v for v in variables if not numeric(schema.field(v).type)]
    if text:
        kinds = ", ".join(f"{v} ({_kind(schema.field(v).type)})" for v in text)
        raise InputError(f"data file {header.path}: column(s) {kinds} are not numeric; if they "
                         f"are not measurements, pass --ignore-columns {','.join(text)}")
    start = 0
    for batch in pf.iter_batches(batch_size=chunk_rows, columns=[regime_column, *variables]):
        n = batch.num_rows
        values = np.empty((n, len(variables)))
        for j, v in enumerate(variables):
            col = batch.column(v)
            if not pa.types.is_floating(col.type):
                col = pc.cast(col, pa.float64())
            values[:, j] = col.to_numpy(zero_copy_only=False)
        reg = pc.cast(batch.column(regime_column), pa.string())
        labels, codes = _labels(pd.Series(reg.to_pandas(), dtype="category"))
        yield Chunk(start, labels, codes, values)
        start += n


def _kind(t) -> str:
    """A Parquet column type in plain words."""
    import pyarrow as pa

    if pa.types.is_string(t) or pa.types.is_large_string(t):
        return "text"
    if pa.types.is_boolean(t):
        return "true/false"
    if pa.types.is_temporal(t):
        return "dates or times"
    return str(t)
