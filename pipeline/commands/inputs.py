"""The input options that every command reading measurements shares (check, learn, ...)."""

from __future__ import annotations

import argparse
from dataclasses import dataclass

from pipeline.errors import InputError

__all__ = ["add_input_arguments", "MeasurementInputs", "measurement_inputs"]


def add_input_arguments(parser: argparse.ArgumentParser) -> None:
    """DATA..., --regimes, --regime-column, --ignore-columns, --drop-missing, --reference."""
    parser.add_argument("data", nargs="*", metavar="DATA",
                        help="measurement files (CSV or Parquet), read as one table")
    parser.add_argument("--regimes", metavar="REGIMES", help="regimes.csv: regime,targets[,known]")
    parser.add_argument("--regime-column", default="regime", metavar="NAME",
                        help="column of the measurements that labels the regime (default regime)")
    parser.add_argument("--ignore-columns", default="", metavar="A,B",
                        help="non-numeric or unwanted columns to leave out")
    parser.add_argument("--drop-missing", action="store_true",
                        help="drop rows with missing or non-finite values (and say how many)")
    parser.add_argument("--reference", metavar="REGIME",
                        help="the reference regime when no regime has empty targets")


@dataclass(frozen=True)
class MeasurementInputs:
    """The shared input options, checked; `options` are keywords of `read_inputs` and kin."""

    data: list[str]
    regimes: str
    regime_column: str
    ignore_columns: tuple[str, ...]
    drop_missing: bool
    reference: str | None

    @property
    def options(self) -> dict:
        return {"regime_column": self.regime_column, "ignore_columns": self.ignore_columns,
                "drop_missing": self.drop_missing, "reference": self.reference}


def measurement_inputs(args: argparse.Namespace) -> MeasurementInputs:
    """Check the shared options (values may come from a --config file) and return them."""
    data = [args.data] if isinstance(args.data, str) else list(args.data or [])
    if not data:
        raise InputError("DATA: no measurement file given; name one or more CSV or Parquet files")
    if not args.regimes:
        raise InputError("--regimes: missing; name the regimes file (columns regime,targets)")
    ignore = args.ignore_columns
    if isinstance(ignore, str):  # "A,B" on the command line, a list in a config file
        ignore = ignore.split(",")
    return MeasurementInputs(data, str(args.regimes), args.regime_column,
                             tuple(str(c).strip() for c in ignore if str(c).strip()),
                             bool(args.drop_missing), args.reference)
