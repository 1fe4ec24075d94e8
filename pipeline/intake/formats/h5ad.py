"""AnnData files (``.h5ad``): cells by genes in HDF5, read with h5py in row blocks.

An ``.h5ad`` file holds the matrix ``X`` (cells in rows, genes in columns), the cell
annotations ``obs`` (one column names the regime: ``--regime-column``) and the gene
annotations ``var`` (its index names the genes). The file is read in backed mode: the
matrix is never loaded whole, only blocks of rows of the chosen genes (``--genes FILE``):

- dense ``X``: row blocks ``X[a:b, :]`` of at most ~64 MiB, the chosen columns kept;
- CSR ``X``: the row pointers, then for each block of rows (at most ~4 million stored
  entries) its entries, scattered into a dense block of the chosen genes;
- CSC ``X``: the chosen genes' columns are gathered once (memory: their stored entries
  only) and served in row blocks.

The layout follows the AnnData on-disk specification (``encoding-type`` attributes:
``csr_matrix``, ``csc_matrix``, ``dataframe``, ``categorical``, ``string-array``,
``nullable-*``), and also reads the older layout (``h5sparse_format``, categories by
reference under ``__categories``).
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path

import numpy as np

from pipeline.errors import InputError, nearest_names
from pipeline.intake.formats.base import Chunk, ReadOptions, TableHeader, encode_labels

__all__ = ["read_header", "iter_chunks", "locate_row", "MAX_GENES_WITHOUT_LIST"]

#: An .h5ad file with more genes than this needs --genes (the statistics grow as genes^2).
MAX_GENES_WITHOUT_LIST = 2000

_INSTALL = "pip install h5py"
_DENSE_BYTES = 64 << 20  # bytes of one dense row block read from X
_SPARSE_ENTRIES = 4 << 20  # stored entries of one sparse row block


@contextmanager
def _open(path: Path):
    try:
        import h5py
    except ImportError:
        raise InputError(f"data file {path}: reading .h5ad needs the h5py package; install "
                         f"it: {_INSTALL}") from None
    try:
        f = h5py.File(path, "r")
    except OSError as exc:
        raise InputError(f"data file {path}: is not a readable HDF5 (.h5ad) file ({exc})") \
            from None
    with f:
        yield f


def _attr(node, name: str, default=None):
    value = node.attrs.get(name, default)
    return value.decode() if isinstance(value, bytes) else value


def _decode(part) -> np.ndarray:
    """An array read from HDF5 as a 1-d array: text as str objects, numbers as they are."""
    arr = np.ravel(np.asarray(part))
    if arr.dtype.kind == "S":
        return np.char.decode(arr, "utf-8", "replace").astype(object)
    if arr.dtype.kind in "OU":
        return np.array([x.decode("utf-8", "replace") if isinstance(x, bytes) else str(x)
                         for x in arr], dtype=object)
    return arr


def _strings(ds, a: int | None = None, b: int | None = None) -> np.ndarray:
    """Rows a:b of a dataset of names, as str objects."""
    return _decode(ds[a:b] if ds.ndim else ds[()]).astype(str).astype(object)


def _frame_columns(group) -> tuple[str, list[str]]:
    """(index column name, other column names) of an ``obs``/``var`` dataframe group."""
    index = _attr(group, "_index", "_index")
    order = _attr(group, "column-order", None)
    if order is None:
        names = [k for k in group.keys() if k not in (index, "__categories")]
    else:
        names = [x.decode() if isinstance(x, bytes) else str(x) for x in np.ravel(order)]
    return index, names


def _index(f, path: Path, name: str) -> list[str]:
    """The index (names) of the ``obs`` or ``var`` dataframe."""
    node = f.get(name)
    if node is None:
        raise InputError(f"data file {path}: has no '{name}' table; it is not an AnnData file")
    if not hasattr(node, "keys"):  # very old layout: one compound dataset
        fields = node.dtype.names or ()
        key = "index" if "index" in fields else fields[0]
        return list(_decode(node[key]).astype(str))
    index, _ = _frame_columns(node)
    if index not in node and "index" in node:  # files that name it plainly
        index = "index"
    if index not in node:
        raise InputError(f"data file {path}: '{name}' has no index column '{index}'")
    return list(_strings(node[index]))


def _matrix(f, path: Path) -> tuple[str, tuple[int, int]]:
    """The layout of X (``dense``, ``csr`` or ``csc``) and its shape."""
    x = f.get("X")
    if x is None:
        raise InputError(f"data file {path}: has no matrix X; the measurements must be in X")
    if not hasattr(x, "keys"):
        if x.ndim != 2:
            raise InputError(f"data file {path}: X has {x.ndim} dimensions; expected cells "
                             f"by genes")
        return "dense", (int(x.shape[0]), int(x.shape[1]))
    kind = _attr(x, "encoding-type") or _attr(x, "h5sparse_format")
    kind = {"csr_matrix": "csr", "csc_matrix": "csc"}.get(kind, kind)
    shape = x.attrs.get("shape", x.attrs.get("h5sparse_shape"))
    if kind not in ("csr", "csc") or shape is None \
            or not all(k in x for k in ("data", "indices", "indptr")):
        raise InputError(f"data file {path}: X is stored in a layout this reader does not know "
                         f"(encoding {kind!r}); save it as a dense, CSR or CSC matrix")
    return kind, (int(shape[0]), int(shape[1]))


def read_header(path: Path, kind: str, compression: str | None,
                options: ReadOptions) -> TableHeader:
    """Gene names (``var`` index) as the columns; ``obs`` column names as the annotations."""
    with _open(path) as f:
        _, (n_obs, n_var) = _matrix(f, path)
        genes = _index(f, path, "var")
        obs = f.get("obs")
        if obs is None:
            raise InputError(f"data file {path}: has no 'obs' table; it is not an AnnData file")
        if hasattr(obs, "keys"):
            _, obs_columns = _frame_columns(obs)
        else:
            obs_columns = [c for c in (obs.dtype.names or ()) if c != "index"]
    if len(genes) != n_var:
        raise InputError(f"data file {path}: var names {len(genes)} genes but X has {n_var} "
                         f"columns; the file is damaged")
    return TableHeader(path, kind, tuple(genes), obs=tuple(obs_columns), rows=n_obs)


def locate_row(header: TableHeader, data_row: int) -> str:
    """``"cell C (obs name 'N')"``, C counted from 1."""
    try:
        with _open(header.path) as f:
            obs = f["obs"]
            if hasattr(obs, "keys"):
                index, _ = _frame_columns(obs)
                name = _strings(obs[index], data_row, data_row + 1)[0]
                return f"cell {data_row + 1} (obs name '{name}')"
    except (InputError, KeyError, IndexError, OSError):
        pass
    return f"cell {data_row + 1}"


class _Labels:
    """The regime column of ``obs``: labels and per-row codes, read block by block."""

    def __init__(self, f, header: TableHeader, column: str):
        obs = f["obs"]
        self.categories: list | None = None
        self.mask = None
        if not hasattr(obs, "keys"):  # very old layout, a compound dataset: read the field
            self.codes, self.values = None, _decode(obs[column])
            return
        node = obs[column]
        enc = _attr(node, "encoding-type")
        if hasattr(node, "keys"):
            if enc == "categorical" or ("categories" in node and "codes" in node):
                self.codes, self.categories = node["codes"], list(_decode(node["categories"][:]))
            elif "values" in node and "mask" in node:  # nullable-* arrays
                self.codes, self.values, self.mask = None, node["values"], node["mask"]
            else:
                raise InputError(f"data file {header.path}: obs column '{column}' is stored in "
                                 f"a layout this reader does not know (encoding {enc!r})")
        elif "categories" in node.attrs:  # older layout: codes, categories by reference
            self.codes = node
            self.categories = list(_decode(f[node.attrs["categories"]][:]))
        else:
            self.codes, self.values = None, node

    def block(self, a: int, b: int) -> tuple[list[str], np.ndarray]:
        if self.codes is not None:
            return encode_labels(self.categories, np.asarray(self.codes[a:b], dtype=np.int64))
        vals = _decode(self.values[a:b])
        if vals.dtype.kind == "O":
            missing = np.array([not isinstance(v, str) or not v.strip() for v in vals],
                               dtype=bool) if len(vals) else np.zeros(0, dtype=bool)
        elif vals.dtype.kind == "f":
            missing = np.isnan(vals)
        else:
            missing = np.zeros(len(vals), dtype=bool)
        if self.mask is not None:
            missing |= np.asarray(self.mask[a:b], dtype=bool)
        codes = np.full(len(vals), -1, dtype=np.int64)
        present = vals[~missing]
        if vals.dtype.kind == "O":
            present = present.astype(str)
        categories, inverse = np.unique(present, return_inverse=True)
        codes[~missing] = inverse.ravel()
        return encode_labels(list(categories), codes)


def iter_chunks(header: TableHeader, variables: Sequence[str], regime_column: str | None,
                chunk_rows: int, options: ReadOptions) -> Iterator[Chunk]:
    """Yield blocks of cells: the chosen genes' values (float64) and the regime labels."""
    where = {g: j for j, g in enumerate(header.columns)}
    cols = np.array([where[v] for v in variables], dtype=np.int64)
    with _open(header.path) as f:
        layout, (n_obs, n_var) = _matrix(f, header.path)
        if regime_column is not None and regime_column not in header.obs:
            raise InputError(f"data file {header.path}: obs has no column '{regime_column}'"
                             f"{nearest_names(regime_column, header.obs)}; obs columns: "
                             f"{', '.join(header.obs) or '(none)'}; name the regime column "
                             f"with --regime-column NAME")
        labels = _Labels(f, header, regime_column) if regime_column is not None else None
        x = f["X"]
        if layout == "dense":
            blocks = _dense(x, cols, n_obs, n_var, chunk_rows)
        elif layout == "csr":
            blocks = _csr(x, cols, n_obs, n_var, chunk_rows)
        else:
            blocks = _csc(x, cols, n_obs, chunk_rows)
        for a, b, values in blocks:
            if labels is None:
                yield Chunk(a, [], None, values)
            else:
                names, codes = labels.block(a, b)
                yield Chunk(a, names, codes, values)


def _dense(x, cols, n_obs, n_var, chunk_rows):
    step = max(1, min(chunk_rows, _DENSE_BYTES // max(1, n_var * x.dtype.itemsize)))
    for a in range(0, n_obs, step):
        b = min(n_obs, a + step)
        yield a, b, np.asarray(x[a:b])[:, cols].astype(np.float64)


def _csr(x, cols, n_obs, n_var, chunk_rows):
    indptr = np.asarray(x["indptr"][:], dtype=np.int64)
    pick = np.full(n_var, -1, dtype=np.int32)  # gene column -> position among the chosen
    pick[cols] = np.arange(len(cols), dtype=np.int32)
    step = max(1, min(chunk_rows, _DENSE_BYTES // max(1, 8 * len(cols))))
    a = 0
    while a < n_obs:
        # as many rows as fit in the block and in the entry budget (at least one row)
        b = int(np.searchsorted(indptr, indptr[a] + _SPARSE_ENTRIES, side="right")) - 1
        b = max(a + 1, min(n_obs, a + step, b))
        lo, hi = int(indptr[a]), int(indptr[b])
        target = pick[x["indices"][lo:hi]]  # indices as stored (int32 mostly)
        kept = np.flatnonzero(target >= 0)
        data = x["data"][lo:hi][kept].astype(np.float64)
        rows = np.searchsorted(indptr[a + 1:b + 1] - lo, kept, side="right")
        out = np.zeros((b - a, len(cols)))
        np.add.at(out, (rows, target[kept]), data)  # duplicate entries add up
        yield a, b, out
        a = b


def _csc(x, cols, n_obs, chunk_rows):
    from scipy import sparse

    indptr = np.asarray(x["indptr"][:], dtype=np.int64)
    parts_i, parts_d, counts = [], [], []
    for j in cols:  # only the chosen genes' stored entries are read
        lo, hi = int(indptr[j]), int(indptr[j + 1])
        parts_i.append(np.asarray(x["indices"][lo:hi], dtype=np.int64))
        parts_d.append(np.asarray(x["data"][lo:hi], dtype=np.float64))
        counts.append(hi - lo)
    ptr = np.concatenate([[0], np.cumsum(counts)])
    chosen = sparse.csc_matrix((np.concatenate(parts_d) if parts_d else np.zeros(0),
                                np.concatenate(parts_i) if parts_i else np.zeros(0, np.int64),
                                ptr), shape=(n_obs, len(cols)))
    chosen.sum_duplicates()
    rows = chosen.tocsr()
    del chosen, parts_i, parts_d
    step = max(1, min(chunk_rows, _DENSE_BYTES // max(1, 8 * len(cols))))
    for a in range(0, n_obs, step):
        b = min(n_obs, a + step)
        yield a, b, rows[a:b].toarray()
