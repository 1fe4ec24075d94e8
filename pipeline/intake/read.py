"""Reading the inputs: measurement tables and regimes file to design and statistics.

:func:`read_inputs` is the single entry point of the intake. It checks the arguments,
reads the headers and the regimes file, streams every data file once in chunks into a
:class:`~pipeline.stats.accumulate.MomentAccumulator` (memory independent of the number
of rows), and checks the result (:mod:`pipeline.intake.checks`). Every problem of the
input raises :class:`~pipeline.errors.InputError` naming the file, line, column, regime
or variable at fault.

With ``test="rank"`` the statistics are those of the rank variant (Harris & Drton 2013;
`pipeline.stats.ranks.rank_moments`: normal scores anchored to the reference for the
invariance tests, rank correlations within each regime for the CI tests); ranks need all
rows at once, so that path holds the whole table in memory (8 bytes per cell). The
Gaussian path streams.

References
----------
1. N. Harris, M. Drton (2013). PC algorithm for nonparanormal graphical models.
   Journal of Machine Learning Research 14, 3365-3383.
"""

from __future__ import annotations

import dataclasses
import threading
from collections.abc import Sequence
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np

from pipeline.design import Design
from pipeline.errors import InputError, nearest_names
from pipeline.intake.checks import check_statistics
from pipeline.intake.record import Intake
from pipeline.intake.regimes import read_regimes
from pipeline.intake.tables import (
    ReadOptions,
    TableHeader,
    check_data_path,
    file_stem,
    iter_chunks,
    locate_row,
    read_header,
    reading_of,
    resolve_variables,
)
from pipeline.options import TESTS
from pipeline.stats.accumulate import MomentAccumulator
from pipeline.stats.fingerprint import _fingerprint, statistics_options
from pipeline.stats.moments import Moments

__all__ = ["Intake", "read_inputs", "TESTS"]



def _check_arguments(data, regimes, regime_column, ignore_columns, test, chunk_rows):
    if isinstance(data, (str, Path)):
        data = [data]
    data = list(data)
    if not data:
        raise InputError("DATA: no data file given; name one or more measurement files")
    if test not in TESTS:
        raise InputError(f"--test {test}: unknown test{nearest_names(str(test), TESTS)}; "
                         f"choose one of {', '.join(TESTS)}")
    if isinstance(chunk_rows, bool) or not isinstance(chunk_rows, (int, np.integer)) \
            or chunk_rows < 1:
        raise InputError(f"chunk_rows is {chunk_rows!r}; expected a positive integer")
    if not isinstance(regime_column, str) or not regime_column.strip():
        raise InputError(f"--regime-column {regime_column!r}: expected a column name")
    if isinstance(ignore_columns, str):
        ignore_columns = ignore_columns.split(",")
    ignore = [str(c).strip() for c in (ignore_columns or ()) if str(c).strip()]
    if regimes is None:
        raise InputError("--regimes: no regimes file given; pass --regimes REGIMES.csv")
    return [check_data_path(p) for p in data], Path(regimes), regime_column.strip(), ignore


def _progress(enabled: bool):
    if not enabled:
        return None
    from rich.console import Console
    from rich.progress import Progress

    return Progress(console=Console(stderr=True), transient=True)


def read_inputs(data: Sequence[str | Path], regimes: str | Path, *, regime_column: str = "regime",
                ignore_columns: Sequence[str] = (), drop_missing: bool = False,
                reference: str | None = None, test: str = "gaussian", chunk_rows: int = 100_000,
                progress: bool = False, fingerprint: str | None = None,
                decimal: str | None = None, regime_from: str | None = None,
                sheet: str | None = None,
                genes: str | Path | Sequence[str] | None = None) -> Intake:
    """Read measurement tables and the regimes file into a design and per-regime statistics.

    Parameters
    ----------
    data : sequence of str or Path
        Measurement files, read as one table: CSV (``.csv``), tab-separated (``.tsv``,
        ``.tab``, ``.txt``), either gzip-compressed (``.gz``), Parquet (``.parquet``),
        Excel (``.xlsx``), AnnData (``.h5ad``).
    regimes : str or Path
        The regimes file (see :mod:`pipeline.intake.regimes`).
    regime_column : str
        The data column that labels the regime of each row.
    ignore_columns : sequence of str
        Columns that are not measurements (a comma-separated string is accepted too).
    drop_missing : bool
        Drop rows with missing or non-finite values (with a warning) instead of failing.
    reference : str, optional
        The reference regime, when the regimes file has no control.
    test : {"gaussian", "rank"}
        ``"rank"``: statistics of the normal scores of the pooled ranks (loads all rows).
    chunk_rows : int
        Rows per chunk of the streaming pass.
    progress : bool
        Show a progress display on standard error.
    fingerprint : str, optional
        The inputs' fingerprint when the caller has already computed it
        (`pipeline.stats.fingerprint.fingerprint_inputs` with the same options); the raw
        bytes are then not hashed again.

    Returns
    -------
    Intake

    Raises
    ------
    InputError
        Any problem of the inputs; the message names the culprit and what to do.
    """
    # 1. arguments, headers, variables, regimes file
    reading = reading_of(decimal, regime_from, sheet, genes)
    paths, regimes_path, regime_column, ignore = _check_arguments(
        data, regimes, regime_column, ignore_columns, test, chunk_rows)
    by_name = reading.regime_from == "filename"
    if by_name:
        _check_stems(paths)
    headers = [read_header(p, reading) for p in paths]
    variables = resolve_variables(headers, None if by_name else regime_column, ignore,
                                  reading.genes)
    regs = read_regimes(regimes_path, variables=variables, reference=reference)
    names = [r.name for r in regs]
    index = {name: k for k, name in enumerate(names)}

    # the fingerprint hashes the raw bytes on one thread, the arithmetic of chunk i runs on
    # another while the parser reads chunk i + 1 (numpy, BLAS, hashlib and the parser
    # release the GIL)
    with ThreadPoolExecutor(max_workers=1) as hasher, \
            ThreadPoolExecutor(max_workers=1) as worker:
        stop = threading.Event()  # set on failure: the hasher gives up at its next block
        if fingerprint is None:
            fp = hasher.submit(_fingerprint, paths, regimes_path, statistics_options(
                regime_column=regime_column, ignore_columns=ignore, drop_missing=drop_missing,
                reference=reference, test=test, **_reading_keys(reading)), stop)
        # 2. one streaming pass over every file
        state = _Pass(variables, names, index, drop_missing, keep_rows=test == "rank",
                      by_name=by_name,
                      reference=[k for k, r in enumerate(regs) if r.reference])
        bar = _progress(progress)
        if bar is not None:
            bar.start()
        try:
            for header in headers:
                task = bar.add_task(f"reading {header.path.name}", total=None) if bar else None
                rows = 0
                pending = None
                try:
                    for chunk in iter_chunks(header, variables, regime_column, chunk_rows,
                                             reading):
                        if pending is not None:
                            pending.result()  # chunks are added in file order
                        pending = worker.submit(state.add, header, chunk)
                        rows += len(chunk.codes)
                        if bar is not None:
                            bar.advance(task, len(chunk.codes))
                finally:
                    if pending is not None:
                        pending.result()  # an error of an earlier chunk is reported first
                if rows == 0:
                    raise InputError(f"data file {header.path}: has a header but no data rows; "
                                     f"add the measurements or leave the file out")
        except BaseException:
            stop.set()
            raise
        finally:
            if bar is not None:
                bar.stop()
        if fingerprint is None:
            fingerprint = fp.result()

    # 3. missing values, regimes without data
    warnings = state.finish()
    empty = [names[k] for k in np.flatnonzero(state.counts() == 0)]
    if empty:
        after = " (after dropping rows with missing values)" if state.dropped else ""
        raise InputError(f"regime(s) {', '.join(empty)} of {regimes_path} have no rows in the "
                         f"data{after}; remove their rows from the regimes file or add their data")
    moments = state.moments()
    # 4. checks of the statistics
    warnings += check_statistics(moments)
    design = Design(variables=variables,
                    regimes=tuple(dataclasses.replace(r, samples=int(moments.count[k]))
                                  for k, r in enumerate(regs)),
                    warnings=tuple(warnings))
    return Intake(design, moments, fingerprint, state.dropped, list(warnings))


def _reading_keys(reading: ReadOptions) -> dict:
    """The reading options as keywords of `statistics_options`."""
    return {"decimal": reading.decimal, "regime_from": reading.regime_from,
            "sheet": reading.sheet, "genes": reading.genes}


def _check_stems(paths: Sequence[Path]) -> None:
    """With the regime taken from the file name, two files may not share a name."""
    seen: dict[str, Path] = {}
    for p in paths:
        stem = file_stem(p)
        if stem in seen:
            raise InputError(f"--regime-from filename: data files {seen[stem]} and {p} have the "
                             f"same name '{stem}', so they would be one regime; rename one, or "
                             f"put a regime column in the files")
        seen[stem] = p


class _Pass:
    """State of the streaming pass: accumulator, missing-value counts, kept rows."""

    def __init__(self, variables, names, index, drop_missing, keep_rows, by_name=False,
                 reference=()):
        self.by_name = by_name
        self.reference = list(reference)
        self.variables, self.names, self.index = variables, names, index
        self.drop_missing = drop_missing
        self.acc = MomentAccumulator(variables, names)
        self.missing = np.zeros(len(variables), dtype=np.int64)
        self.missing_label = 0
        self.first_missing: str | None = None
        self.dropped = 0
        self.keep_rows = keep_rows
        self.kept: list[tuple[np.ndarray, np.ndarray]] = []

    def add(self, header: TableHeader, chunk) -> None:
        # map the chunk's labels to regime codes; an unknown label is an error
        lookup = np.array([self.index.get(lab, -2) for lab in chunk.labels] + [-1],
                          dtype=np.int64)
        codes = lookup[chunk.codes]
        unknown = [lab for lab in chunk.labels if lab not in self.index]
        if unknown:
            first = int(np.flatnonzero(codes == -2)[0])
            if self.by_name:
                raise InputError(
                    f"data file {header.path}: its regime (--regime-from filename) is "
                    f"'{unknown[0]}', which has no row in the regimes file"
                    f"{nearest_names(unknown[0], self.names)}; add a row for it or rename "
                    f"the file")
            raise InputError(
                f"data file {header.path}, {locate_row(header, chunk.start + first)}: regime "
                f"'{unknown[0]}' has no row in the regimes file"
                f"{nearest_names(unknown[0], self.names)}"
                + (f" (also unknown: {', '.join(unknown[1:6])})" if len(unknown) > 1 else "")
                + "; add a row for it to the regimes file or fix the label")
        values = chunk.values
        bad_cells = ~np.isfinite(values)
        bad_rows = bad_cells.any(axis=1) | (codes < 0)
        if bad_rows.any():
            self.missing += bad_cells.sum(axis=0)
            self.missing_label += int((codes < 0).sum())
            if self.first_missing is None:
                i = int(np.flatnonzero(bad_rows)[0])
                self.first_missing = f"{header.path}, {locate_row(header, chunk.start + i)}"
            keep = ~bad_rows
            self.dropped += int(bad_rows.sum())
            codes, values = codes[keep], values[keep]
        if self.first_missing is not None and not self.drop_missing:
            return  # an error is pending: count on, skip the arithmetic
        if self.keep_rows:
            self.kept.append((codes, values))
        else:
            self.acc.update(codes, values)

    def finish(self) -> list[str]:
        if self.first_missing is None:
            return []
        counts = [f"{v} {int(c)}" for v, c in zip(self.variables, self.missing, strict=True) if c]
        if self.missing_label:
            counts.append(f"regime label {self.missing_label}")
        if not self.drop_missing:
            self.dropped = 0
            raise InputError(f"missing or non-finite values (cells per column: "
                             f"{', '.join(counts)}; first at {self.first_missing}); fill them "
                             f"in, or pass --drop-missing to drop those rows")
        return [f"dropped {self.dropped} rows with missing or non-finite values "
                f"(cells per column: {', '.join(counts)}; first at {self.first_missing})"]

    def counts(self) -> np.ndarray:
        """Rows kept per regime so far."""
        if self.keep_rows:
            return np.bincount(np.concatenate([c for c, _ in self.kept] + [np.zeros(0, int)]),
                               minlength=len(self.names))
        return self.acc.count

    def moments(self) -> Moments:
        if self.keep_rows:
            p = len(self.variables)
            codes = np.concatenate([c for c, _ in self.kept]) if self.kept \
                else np.zeros(0, dtype=np.int64)
            values = np.concatenate([v for _, v in self.kept]) if self.kept \
                else np.zeros((0, p))
            self.kept = []
            from pipeline.stats.ranks import rank_moments  # scipy: only for --test rank

            return rank_moments(codes, values, self.variables, self.names, self.reference)
        return self.acc.result()
