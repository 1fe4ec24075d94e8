"""Parquet tables, read by record batches (typed columns: no cell is parsed from text)."""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from pathlib import Path

import numpy as np
import pandas as pd

from pipeline.errors import InputError
from pipeline.intake.formats.base import Chunk, ReadOptions, TableHeader, labels_of

__all__ = ["read_header", "iter_chunks", "locate_row"]


def read_header(path: Path, kind: str, compression: str | None,
                options: ReadOptions) -> TableHeader:
    """The column names from the file's schema."""
    import pyarrow.parquet as pq

    try:
        pf = pq.ParquetFile(path)
        columns = list(pf.schema_arrow.names)
        rows = pf.metadata.num_rows
    except Exception as exc:  # noqa: BLE001 - pyarrow raises several types for bad files
        raise InputError(f"data file {path}: is not a readable Parquet file ({exc})") \
            from None
    return TableHeader(path, kind, tuple(columns), rows=rows)


def locate_row(header: TableHeader, data_row: int) -> str:
    """``"row R"`` (1-based)."""
    return f"row {data_row + 1}"


def iter_chunks(header: TableHeader, variables: Sequence[str], regime_column: str | None,
                chunk_rows: int, options: ReadOptions) -> Iterator[Chunk]:
    """Yield record batches as chunks; a variable column that is not numeric is an error."""
    import pyarrow as pa
    import pyarrow.compute as pc
    import pyarrow.parquet as pq

    variables = list(variables)
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
    columns = variables if regime_column is None else [regime_column, *variables]
    start = 0
    for batch in pf.iter_batches(batch_size=chunk_rows, columns=columns):
        n = batch.num_rows
        values = np.empty((n, len(variables)))
        for j, v in enumerate(variables):
            col = batch.column(v)
            if not pa.types.is_floating(col.type):
                col = pc.cast(col, pa.float64())
            values[:, j] = col.to_numpy(zero_copy_only=False)
        if regime_column is None:
            labels, codes = [], None
        else:
            reg = pc.cast(batch.column(regime_column), pa.string())
            labels, codes = labels_of(pd.Series(reg.to_pandas(), dtype="category"))
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
