"""Readers of measurement files, one module per format, chosen by the file name.

| file name | kind | reader |
| --- | --- | --- |
| ``.csv`` (``,``; ``;`` when the header has no comma) | ``csv`` | :mod:`.text` |
| ``.tsv``, ``.tab`` (tab-separated) | ``tsv`` | :mod:`.text` |
| ``.txt`` (tab, comma or semicolon, from the header) | ``txt`` | :mod:`.text` |
| any of these + ``.gz`` (gzip, streamed) | as above | :mod:`.text` |
| ``.parquet`` | ``parquet`` | :mod:`.parquet` |
| ``.xlsx`` (a worksheet; ``--sheet``) | ``xlsx`` | :mod:`.excel` |
| ``.h5ad`` (AnnData, read with h5py in row blocks) | ``h5ad`` | :mod:`.h5ad` |

Each reader follows :class:`~pipeline.intake.formats.base.Reader`.
"""

from __future__ import annotations

import importlib
from pathlib import Path
from types import ModuleType

__all__ = ["SUFFIXES", "KIND_NAMES", "detect", "file_stem", "reader"]

#: Accepted file name endings: (kind, compression).
SUFFIXES: dict[str, tuple[str, str | None]] = {
    ".csv": ("csv", None), ".tsv": ("tsv", None), ".tab": ("tsv", None), ".txt": ("txt", None),
    ".csv.gz": ("csv", "gzip"), ".tsv.gz": ("tsv", "gzip"), ".tab.gz": ("tsv", "gzip"),
    ".txt.gz": ("txt", "gzip"), ".parquet": ("parquet", None), ".xlsx": ("xlsx", None),
    ".h5ad": ("h5ad", None),
}

#: Plain names of the formats, for messages.
KIND_NAMES = "CSV (.csv), tab-separated (.tsv, .tab, .txt), these gzip-compressed " \
             "(.csv.gz, .tsv.gz), Parquet (.parquet), Excel (.xlsx) or AnnData (.h5ad)"

_MODULES = {"csv": "text", "tsv": "text", "txt": "text", "parquet": "parquet", "xlsx": "excel",
            "h5ad": "h5ad"}


def _ending(path: Path) -> str:
    name = path.name.lower()
    suffixes = Path(name).suffixes
    if len(suffixes) >= 2 and suffixes[-1] == ".gz":
        return "".join(suffixes[-2:])
    return suffixes[-1] if suffixes else ""


def detect(path: str | Path) -> tuple[str, str | None] | None:
    """The (kind, compression) of a data file from its name; None if the name is not known.

    >>> detect("plate1.csv.gz")
    ('csv', 'gzip')
    >>> detect("cells.H5AD")
    ('h5ad', None)
    """
    return SUFFIXES.get(_ending(Path(path)))


def file_stem(path: str | Path) -> str:
    """The file name without its format ending: the regime name with ``--regime-from filename``.

    >>> file_stem("data/ko_GATA1.csv.gz")
    'ko_GATA1'
    """
    p = Path(path)
    ending = _ending(p)
    return p.name[: len(p.name) - len(ending)] if ending in SUFFIXES else p.stem


def reader(kind: str) -> ModuleType:
    """The reader module of a kind (imported on first use)."""
    return importlib.import_module(f"pipeline.intake.formats.{_MODULES[kind]}")
