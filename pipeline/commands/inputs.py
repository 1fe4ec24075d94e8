"""The input options that every command reading measurements shares (check, learn, ...)."""

from __future__ import annotations

import argparse
from typing import TYPE_CHECKING

from pipeline.errors import InputError
from pipeline.records import record

if TYPE_CHECKING:  # the parser is built without the numerical stack
    from pipeline.intake.reading import ReadOptions

__all__ = ["add_input_arguments", "MeasurementInputs", "measurement_inputs"]


def add_input_arguments(parser: argparse.ArgumentParser) -> None:
    """DATA..., --regimes, --regime-column, --ignore-columns, --drop-missing, --reference,
    and how to read the files: --decimal, --regime-from, --sheet, --genes."""
    parser.add_argument("data", nargs="*", metavar="DATA",
                        help="measurement files, read as one table: .csv, .tsv/.tab/.txt "
                             "(tab-separated), also gzip-compressed (.csv.gz, .tsv.gz), "
                             ".parquet, .xlsx, .h5ad")
    parser.add_argument("--regimes", metavar="REGIMES", help="regimes.csv: regime,targets[,known]")
    parser.add_argument("--regime-column", default="regime", metavar="NAME",
                        help="column of the measurements (obs column of .h5ad) that labels the "
                             "regime (default regime)")
    parser.add_argument("--ignore-columns", default="", metavar="A,B",
                        help="non-numeric or unwanted columns to leave out")
    parser.add_argument("--drop-missing", action="store_true",
                        help="drop rows with missing or non-finite values (and say how many)")
    parser.add_argument("--reference", metavar="REGIME",
                        help="the reference regime when no regime has empty targets")
    parser.add_argument("--decimal", default=".", metavar="MARK",
                        help="decimal mark of numbers written as text: . (default) or , "
                             "(1,25; columns then separated by ';' or tabs)")
    parser.add_argument("--regime-from", default="column", metavar="SOURCE",
                        help="column (default: the regime column) or filename (no regime "
                             "column; each file is one regime named by its file name)")
    parser.add_argument("--sheet", metavar="NAME",
                        help="the worksheet of .xlsx workbooks that have several")
    parser.add_argument("--genes", metavar="FILE",
                        help="text file naming the variables to analyse, one per line (the "
                             "genes of an .h5ad file)")


@record(frozen=True)
class MeasurementInputs:
    """The shared input options, checked.

    `options` are keywords of `read_inputs` and of every API function that reads
    measurements (`learn`, `check`, `validate`), reading options included.
    """

    data: list[str]
    regimes: str
    regime_column: str
    ignore_columns: tuple[str, ...]
    drop_missing: bool
    reference: str | None
    reading: ReadOptions

    @property
    def options(self) -> dict:
        r = self.reading
        return {"regime_column": self.regime_column, "ignore_columns": self.ignore_columns,
                "drop_missing": self.drop_missing, "reference": self.reference,
                "decimal": r.decimal, "regime_from": r.regime_from, "sheet": r.sheet,
                "genes": r.genes}


def measurement_inputs(args: argparse.Namespace) -> MeasurementInputs:
    """Check the shared options (values may come from a --config file) and return them."""
    data = [args.data] if isinstance(args.data, str) else list(args.data or [])
    if not data:
        raise InputError("DATA: no measurement file given; name one or more measurement files "
                         "(.csv, .tsv, .csv.gz, .parquet, .xlsx, .h5ad)")
    if not args.regimes:
        raise InputError("--regimes: missing; name the regimes file (columns regime,targets)")
    ignore = args.ignore_columns
    if isinstance(ignore, str):  # "A,B" on the command line, a list in a config file
        ignore = ignore.split(",")
    from pipeline.intake.reading import read_options

    reading = read_options(decimal=getattr(args, "decimal", "."),
                           regime_from=getattr(args, "regime_from", "column"),
                           sheet=getattr(args, "sheet", None),
                           genes=getattr(args, "genes", None))
    return MeasurementInputs(data, str(args.regimes), args.regime_column,
                             tuple(str(c).strip() for c in ignore if str(c).strip()),
                             bool(args.drop_missing), args.reference, reading)
