"""Measurement tables: files of any supported format, read in chunks of rows.

A table has one row per sample, one numeric column per variable and one column of
regime labels (or none, when each file is one regime: ``regime_from="filename"``). This
module checks the paths, reads headers, settles which columns are variables, and
streams chunks of ``(regime labels, values)`` with memory independent of the file
length. The format follows the file name and each format has its reader in
:mod:`pipeline.intake.formats` (CSV, TSV and text, gzip-compressed or not; Parquet;
Excel; AnnData). It checks only what a chunk shows (names, numbers); counting, missing
values and statistics are the caller's (:mod:`pipeline.intake.read`).

Cells are never guessed: a variable cell must parse as a number or be a missing-value
marker (empty, ``NA``, ``NaN``, ``null``, ...); regime labels are strings (surrounding
spaces stripped; only an empty cell is a missing label).
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from pathlib import Path

import numpy as np

from pipeline.errors import InputError, nearest_names
from pipeline.intake import formats
from pipeline.intake.formats.base import (
    DECIMALS,
    NA_STRINGS,
    REGIME_SOURCES,
    Chunk,
    ReadOptions,
    TableHeader,
)

__all__ = ["SUFFIXES", "NA_STRINGS", "DECIMALS", "REGIME_SOURCES", "ReadOptions", "TableHeader",
           "Chunk", "check_data_path", "read_header", "resolve_variables", "iter_chunks",
           "locate_row", "read_genes", "read_options", "reading_of", "file_stem",
           "DataFiles"]

#: Accepted data file endings and their (kind, compression).
SUFFIXES = formats.SUFFIXES
file_stem = formats.file_stem


def check_data_path(path: str | Path) -> Path:
    """Return `path` as a Path after checking that it is an existing file of a known format."""
    p = Path(path)
    if not p.exists():
        raise InputError(f"data file {p}: no such file; check the path")
    if not p.is_file():
        raise InputError(f"data file {p}: is not a file")
    if formats.detect(p) is None:
        ending = "".join(p.suffixes[-2:]) if p.suffix.lower() == ".gz" else p.suffix
        hint = " (save the sheet as .xlsx or CSV)" if p.suffix.lower() == ".xls" else ""
        raise InputError(f"data file {p}: unknown file type '{ending}'{hint}; use "
                         f"{formats.KIND_NAMES}")
    if p.stat().st_size == 0:
        raise InputError(f"data file {p}: is empty (0 bytes); it needs a header line and one "
                         f"row per sample")
    return p


def read_header(path: Path, options: ReadOptions | None = None) -> TableHeader:
    """Read the column names of a data file and check they are usable names."""
    kind, compression = formats.detect(path) or ("csv", None)
    header = formats.reader(kind).read_header(Path(path), kind, compression,
                                              options or ReadOptions())
    if kind == "h5ad":
        return header  # gene names are checked once chosen (resolve_variables)
    columns = header.columns
    empty = [i + 1 for i, c in enumerate(columns) if not c.strip()]
    if empty:
        raise InputError(f"data file {path}: column {', '.join(map(str, empty))} of the header "
                         f"has no name; name every column (a table saved with its row index "
                         f"has an unnamed first column: save it without the index)")
    dup = sorted({c for c in columns if columns.count(c) > 1})
    if dup:
        raise InputError(f"data file {path}: column name(s) {', '.join(dup)} appear more than "
                         f"once in the header; give every column its own name")
    return header


def read_genes(path: str | Path) -> tuple[str, ...]:
    """The names listed in a genes file: one per line; blank lines and ``#`` comments skipped.

    Raises
    ------
    InputError
        The file is missing, not UTF-8, lists no name, or lists a name twice.
    """
    p = Path(path)
    if not p.is_file():
        raise InputError(f"--genes {p}: no such file; name a text file with one gene (variable) "
                         f"name per line")
    try:
        lines = p.read_text(encoding="utf-8-sig").splitlines()
    except UnicodeDecodeError:
        raise InputError(f"--genes {p}: is not UTF-8 text; save it as UTF-8") from None
    names = [ln.strip() for ln in lines if ln.strip() and not ln.lstrip().startswith("#")]
    if not names:
        raise InputError(f"--genes {p}: lists no name; write one gene (variable) name per line")
    dup = sorted({g for g in names if names.count(g) > 1})
    if dup:
        raise InputError(f"--genes {p}: {', '.join(dup[:10])} listed more than once; list each "
                         f"gene once")
    return tuple(names)


def _variables_of(h: TableHeader, skip: set[str]) -> list[str]:
    return [c for c in h.columns if c not in skip]


def resolve_variables(headers: Sequence[TableHeader], regime_column: str | None,
                      ignore_columns: Sequence[str],
                      genes: Sequence[str] | None = None) -> tuple[str, ...]:
    """The variable columns: `genes` if given, else every column but the regime column and the
    ignored ones.

    Without `genes` they come in the column order of the first file and every file must
    have the same variables (in any order); with `genes`, every file must have each of
    them. Every file must have the regime column (in ``obs`` for AnnData), unless
    `regime_column` is None (the regime is the file name).
    """
    ignore = list(dict.fromkeys(ignore_columns))
    seen = set().union(*(set(h.columns) | set(h.obs) for h in headers))
    unknown = [c for c in ignore if c not in seen]
    if unknown:
        cols = sorted(seen)
        shown = ", ".join(cols[:50]) + (" ..." if len(cols) > 50 else "")
        raise InputError(f"--ignore-columns: column(s) {', '.join(unknown)} not found in the data"
                         f"{nearest_names(unknown[0], cols)}; columns are: {shown}")
    if regime_column is not None:
        if regime_column in ignore:
            raise InputError(f"--ignore-columns: '{regime_column}' is the regime column; it "
                             f"cannot be ignored (choose the regime column with --regime-column)")
        for h in headers:
            _check_regime_column(h, regime_column)
    skip = set(ignore) | ({regime_column} if regime_column is not None else set())
    if genes is not None:
        return _chosen(headers, [g for g in genes if g not in set(ignore)], regime_column)
    for h in headers:
        if h.kind == "h5ad" and len(h.columns) > formats.reader("h5ad").MAX_GENES_WITHOUT_LIST:
            raise InputError(f"data file {h.path}: has {len(h.columns)} genes; the statistics "
                             f"grow with the square of the number of variables, so choose the "
                             f"genes to analyse with --genes FILE (one name per line)")
    first_skip = skip if headers[0].kind != "h5ad" else set(ignore)
    variables = tuple(_variables_of(headers[0], first_skip))
    if not variables:
        raise InputError(f"data file {headers[0].path}: no variable columns besides the regime "
                         f"column '{regime_column}' and the ignored ones")
    first = set(variables)
    for h in headers:
        names = _variables_of(h, skip if h.kind != "h5ad" else set(ignore))
        dup = sorted({g for g in names if names.count(g) > 1})
        if dup:
            raise InputError(f"data file {h.path}: gene name(s) {', '.join(dup[:10])} appear "
                             f"more than once; choose the genes with --genes FILE")
        other = set(names)
        if other != first:
            only_first = sorted(first - other)
            only_other = sorted(other - first)
            parts = []
            if only_first:
                parts.append(f"missing {', '.join(only_first[:20])}")
            if only_other:
                parts.append(f"extra {', '.join(only_other[:20])}")
            raise InputError(f"data file {h.path}: its variable columns differ from those of "
                             f"{headers[0].path} ({'; '.join(parts)}); all data files need the "
                             f"same variables, or name extra columns with --ignore-columns")
    return variables


def _check_regime_column(h: TableHeader, regime_column: str) -> None:
    if h.kind == "h5ad":
        if regime_column not in h.obs:
            raise InputError(f"data file {h.path}: obs has no column '{regime_column}'"
                             f"{nearest_names(regime_column, h.obs)}; obs columns: "
                             f"{', '.join(h.obs) or '(none)'}; name the obs column that labels "
                             f"the regime with --regime-column NAME")
        return
    if regime_column not in h.columns:
        hint = ""
        if len(h.columns) == 1:
            seps = [name for sep, name in ((",", "commas"), (";", "semicolons"), ("\t", "tabs"))
                    if sep in h.columns[0]]
            if seps:
                hint = (f" (the header looks separated by {seps[0]}, which this file's name "
                        f"does not announce: name it .csv for commas or semicolons, .tsv "
                        f"for tabs)")
        shown = ", ".join(h.columns[:50]) + (" ..." if len(h.columns) > 50 else "")
        raise InputError(f"data file {h.path}: no regime column '{regime_column}'"
                         f"{nearest_names(regime_column, h.columns)}; columns seen: "
                         f"{shown}{hint}; name the column that labels the regime with "
                         f"--regime-column NAME, or pass --regime-from filename when each "
                         f"file holds one regime")


def _chosen(headers: Sequence[TableHeader], genes: list[str],
            regime_column: str | None) -> tuple[str, ...]:
    """The genes of the genes file, checked against every file."""
    if not genes:
        raise InputError("--genes: every listed gene is also in --ignore-columns; nothing is "
                         "left to analyse")
    if regime_column is not None and regime_column in genes:
        raise InputError(f"--genes: '{regime_column}' is the regime column; leave it out of "
                         f"the genes file")
    for h in headers:
        present = set(h.columns)
        missing = [g for g in genes if g not in present]
        if missing:
            shown = ", ".join(missing[:10]) + (" ..." if len(missing) > 10 else "")
            raise InputError(f"--genes: {len(missing)} gene(s) not in data file {h.path}: "
                             f"{shown}{nearest_names(missing[0], h.columns)}; correct the "
                             f"names or remove them from the genes file")
        if h.kind == "h5ad":
            counts: dict[str, int] = {}
            for c in h.columns:
                counts[c] = counts.get(c, 0) + 1
            dup = [g for g in genes if counts[g] > 1]
            if dup:
                raise InputError(f"data file {h.path}: gene name(s) {', '.join(dup[:10])} "
                                 f"appear more than once in var; they cannot be told apart, "
                                 f"leave them out of the genes file")
    return tuple(genes)


def locate_row(header: TableHeader, data_row: int) -> str:
    """Where data row `data_row` (0-based, header excluded) is, as a user counts it.

    ``"line L"`` for text (the line where the row starts, as a text editor numbers it),
    ``"row R"`` (1-based) for Parquet, ``"sheet S, row R"`` for Excel, ``"cell C"`` for
    AnnData.
    """
    return formats.reader(header.kind).locate_row(header, data_row)


def iter_chunks(header: TableHeader, variables: Sequence[str], regime_column: str | None,
                chunk_rows: int, options: ReadOptions | None = None) -> Iterator[Chunk]:
    """Yield the rows of one file in chunks of at most `chunk_rows` rows.

    With ``options.regime_from == "filename"`` (or `regime_column` None) every row's
    label is the file's stem.

    Raises
    ------
    InputError
        A variable column that is not numeric (named, with a sample value), a cell that is
        not a number (file, line, column and value), a row with too many cells, bytes that
        are not UTF-8 or not valid gzip, a sheet or obs column that is not there.
    """
    options = options or ReadOptions()
    column = None if options.regime_from == "filename" else regime_column
    chunks = formats.reader(header.kind).iter_chunks(header, list(variables), column,
                                                     chunk_rows, options)
    if column is not None:
        yield from chunks
        return
    stem = file_stem(header.path)
    for chunk in chunks:
        n = len(chunk.values)
        yield Chunk(chunk.start, [stem], np.zeros(n, dtype=np.int64), chunk.values)


def read_options(*, decimal: str = ".", regime_from: str = "column", sheet: str | None = None,
                 genes: str | Path | Sequence[str] | None = None) -> ReadOptions:
    """Check the reading options and return them; `genes` may be a genes file or names.

    Raises
    ------
    InputError
        A value that is not one of the choices (named, with the choices), a genes file
        that cannot be used.
    """
    if decimal not in DECIMALS:
        raise InputError(f"--decimal {decimal!r}: expected '.' (1.25) or ',' (1,25)")
    if regime_from not in REGIME_SOURCES:
        raise InputError(f"--regime-from {regime_from!r}: not a choice"
                         f"{nearest_names(str(regime_from), REGIME_SOURCES)}; use column (the "
                         f"--regime-column of the data) or filename (each file is one regime)")
    if sheet is not None and (not isinstance(sheet, str) or not sheet):
        raise InputError(f"--sheet {sheet!r}: expected the name of a worksheet")
    names = None
    if isinstance(genes, (str, Path)):
        names = read_genes(genes)
    elif genes is not None:
        names = tuple(str(g).strip() for g in genes if str(g).strip())
        if not names:
            raise InputError("genes: the list of genes is empty; name at least one variable")
        dup = sorted({g for g in names if names.count(g) > 1})
        if dup:
            raise InputError(f"genes: {', '.join(dup[:10])} listed more than once")
    return ReadOptions(decimal=decimal, regime_from=regime_from, sheet=sheet, genes=names)


class DataFiles(list):
    """Paths of measurement files that carry how to read them (`reading`, a ReadOptions).

    Functions that take data paths and pass them on (`pipeline.evidence.check.check`,
    `pipeline.workflow.learn`) hand the reading options to `read_inputs` this way.

    >>> files = DataFiles(["a.xlsx"], ReadOptions(sheet="plate 1"))
    >>> list(files), files.reading.sheet
    (['a.xlsx'], 'plate 1')
    """

    def __init__(self, paths, reading: ReadOptions | None = None):
        super().__init__(paths)
        self.reading = reading or ReadOptions()


def reading_of(data: object, decimal: str | None = None, regime_from: str | None = None,
               sheet: str | None = None,
               genes: str | Path | Sequence[str] | None = None) -> ReadOptions:
    """The reading options: those carried by `data` (a `DataFiles`), each replaced by the
    keyword given (not None), checked."""
    base = data.reading if isinstance(data, DataFiles) else ReadOptions()
    given = {"decimal": decimal, "regime_from": regime_from, "sheet": sheet, "genes": genes}
    values = {k: getattr(base, k) if v is None else v for k, v in given.items()}
    return read_options(**values)
