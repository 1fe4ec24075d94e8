"""Delimited text: CSV, tab-separated and ``.txt`` tables, plain or gzip-compressed.

The column separator follows the file name: ``.tsv``/``.tab`` are tab-separated; ``.csv``
is comma-separated, or semicolon-separated when its header line has no comma but
semicolons (the usual form where the comma is the decimal mark); ``.txt`` takes the most
frequent of tab, comma and semicolon in its header line. A ``.gz`` file is decompressed
as a stream, never to disk. Rows are parsed by the pandas C parser in chunks, so memory
does not grow with the file.
"""

from __future__ import annotations

import csv
import gzip
import io
import warnings
import zlib
from collections.abc import Iterator, Sequence
from pathlib import Path

import pandas as pd

from pipeline.errors import InputError
from pipeline.intake.formats.base import (
    NA_STRINGS,
    Chunk,
    ReadOptions,
    TableHeader,
    labels_of,
    numeric_block,
)

__all__ = ["read_header", "iter_chunks", "locate_row"]

# what a damaged or truncated gzip stream raises while it is read
_GZIP_ERRORS = (gzip.BadGzipFile, EOFError, zlib.error)
_NAMES = {",": "commas", ";": "semicolons", "\t": "tabs"}


def _open(path: Path, compression: str | None, errors: str = "strict") -> io.TextIOBase:
    if compression == "gzip":
        return gzip.open(path, "rt", encoding="utf-8-sig", errors=errors, newline="")
    return open(path, encoding="utf-8-sig", errors=errors, newline="")  # noqa: SIM115


def _looks_like(path: Path) -> str:
    """What to do: rename, when the first bytes show another format, else save as UTF-8."""
    with open(path, "rb") as fh:
        magic = fh.read(8)
    for start, what in ((b"\x1f\x8b", "gzip-compressed: name it .csv.gz or .tsv.gz"),
                        (b"PK\x03\x04", "like an Excel workbook (a zip archive): name it .xlsx"),
                        (b"PAR1", "like a Parquet file: name it .parquet"),
                        (b"\x89HDF", "like an HDF5 (AnnData) file: name it .h5ad")):
        if magic.startswith(start):
            return f"it looks {what}"
    return "save it as UTF-8"


def _sniff(line: str, kind: str) -> str:
    """The column separator of a header line."""
    if kind == "tsv":
        return "\t"
    counts = {d: line.count(d) for d in ("\t", ",", ";")}
    if kind == "csv":
        if counts[","] or not (counts[";"] or counts["\t"]):
            return ","
        return ";" if counts[";"] >= counts["\t"] else "\t"
    best = max(counts, key=lambda d: counts[d])
    return best if counts[best] else "\t"


def read_header(path: Path, kind: str, compression: str | None,
                options: ReadOptions) -> TableHeader:
    """Read the header line, find the column separator, split the names."""
    try:
        with _open(path, compression) as fh:
            line = next((ln for ln in fh if ln.strip("\r\n")), None)
    except UnicodeDecodeError:
        raise InputError(f"data file {path}: is not UTF-8 text; {_looks_like(path)}") from None
    except _GZIP_ERRORS as exc:
        raise InputError(f"data file {path}: is not a valid gzip file ({exc}); compress it "
                         f"again, or give the uncompressed file") from None
    if line is None:
        raise InputError(f"data file {path}: has no header line; the first line should "
                         f"name the columns")
    delimiter = _sniff(line, kind)
    if options.decimal == "," and delimiter == ",":
        raise InputError(f"data file {path}: --decimal , needs columns separated by ';' or "
                         f"tabs, but the header is separated by commas; save the file with "
                         f"';' as separator, or leave --decimal out")
    try:
        columns = next(csv.reader([line], delimiter=delimiter))
    except csv.Error as exc:
        raise InputError(f"data file {path}: the header line is not valid ({exc})") from None
    return TableHeader(path, kind, tuple(columns), compression=compression,
                       delimiter=delimiter)


def locate_row(header: TableHeader, data_row: int) -> str:
    """``"line L"``: the line where data row `data_row` (0-based) starts, as an editor counts."""
    try:
        with _open(header.path, header.compression, errors="replace") as fh:
            reader = csv.reader(fh, delimiter=header.delimiter or ",")
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
    except (csv.Error, *_GZIP_ERRORS):
        pass
    return f"data row {data_row + 1}"


def iter_chunks(header: TableHeader, variables: Sequence[str], regime_column: str | None,
                chunk_rows: int, options: ReadOptions) -> Iterator[Chunk]:
    """Yield the rows in chunks; every cell of a variable is checked (see `numeric_block`)."""
    variables = list(variables)
    na = {v: list(NA_STRINGS) for v in variables}
    dtype = {}
    if regime_column is not None:
        na[regime_column] = [""]
        dtype[regime_column] = "category"
    start = 0
    try:
        reader = pd.read_csv(
            # every column is parsed (no usecols): the parser rejects rows with extra cells
            header.path, engine="c", sep=header.delimiter, chunksize=chunk_rows, header=0,
            names=list(header.columns), dtype=dtype, keep_default_na=False, na_values=na,
            skip_blank_lines=True, encoding="utf-8-sig", compression=header.compression,
            decimal=options.decimal)
        with reader:
            while True:
                with warnings.catch_warnings():
                    # a text cell makes the parser warn about mixed types: reported below
                    warnings.simplefilter("ignore", pd.errors.DtypeWarning)
                    frame = next(reader, None)
                if frame is None:
                    break
                values = numeric_block(header, frame, variables, start, options.decimal,
                                       locate_row)
                if regime_column is None:
                    labels, codes = [], None
                else:
                    labels, codes = labels_of(frame[regime_column])
                yield Chunk(start, labels, codes, values)
                start += len(frame)
    except UnicodeDecodeError:
        raise InputError(f"data file {header.path}: is not UTF-8 text; save it as UTF-8") \
            from None
    except _GZIP_ERRORS as exc:
        raise InputError(f"data file {header.path}: is not a valid gzip file, or is cut short "
                         f"({exc}); compress it again, or give the uncompressed file") from None
    except pd.errors.ParserError as exc:
        sep = _NAMES.get(header.delimiter or ",", repr(header.delimiter))
        raise InputError(f"data file {header.path}: cannot be read as a table separated by "
                         f"{sep} ({exc}); every row needs as many cells as the header") from None
