"""How to read the measurement files: the reading options, checked.

`read_options` checks the options that change how the bytes become numbers (decimal mark,
where the regime comes from, the worksheet, the chosen genes) and returns a `ReadOptions`.
This module imports nothing heavy, so the command line can check the options before the
numerical stack is loaded.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

from pipeline.errors import InputError, nearest_names
from pipeline.records import record

__all__ = ["DECIMALS", "REGIME_SOURCES", "ReadOptions", "read_options", "reading_of",
           "read_genes"]

#: Values of the ``decimal`` option: the decimal mark of numbers written as text.
DECIMALS = (".", ",")

#: Values of the ``regime_from`` option: a column of the data, or the name of each file.
REGIME_SOURCES = ("column", "filename")


@record(frozen=True)
class ReadOptions:
    """How to read the measurement files (each option changes the statistics).

    Attributes
    ----------
    decimal : {".", ","}
        Decimal mark of numbers written as text (CSV, TSV, text cells of a sheet).
    regime_from : {"column", "filename"}
        Where the regime of a row comes from: the regime column, or the file's name
        (its stem: ``ko_A.csv.gz`` is regime ``ko_A``).
    sheet : str or None
        The worksheet of ``.xlsx`` workbooks (needed when a workbook has several).
    genes : tuple of str or None
        The variables to analyse, in this order (None: every column but the regime
        column and the ignored ones).
    """

    decimal: str = "."
    regime_from: str = "column"
    sheet: str | None = None
    genes: tuple[str, ...] | None = None



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


def reading_of(decimal: str | None = None, regime_from: str | None = None,
               sheet: str | None = None,
               genes: str | Path | Sequence[str] | None = None) -> ReadOptions:
    """The reading options, checked; None takes the default."""
    base = ReadOptions()
    given = {"decimal": decimal, "regime_from": regime_from, "sheet": sheet, "genes": genes}
    values = {k: getattr(base, k) if v is None else v for k, v in given.items()}
    return read_options(**values)
