"""Write AnnData (.h5ad) files with h5py, for the intake tests.

The layout follows the AnnData on-disk specification (from memory): the root group has
``encoding-type = "anndata"``; ``X`` is a dense dataset or a group (``csr_matrix`` /
``csc_matrix``, attribute ``shape``, datasets ``data``, ``indices``, ``indptr``);
``obs`` and ``var`` are ``dataframe`` groups whose attribute ``_index`` names the index
dataset and ``column-order`` lists the columns; a categorical column is a group with
``categories`` and ``codes``; a text column is a ``string-array`` dataset. The older
layout (before the encoding attributes) kept categories under ``obs/__categories`` and
pointed to them from the codes by an object reference.
"""

from pathlib import Path

import h5py
import numpy as np
from scipy import sparse

STR = h5py.string_dtype("utf-8")


def _enc(node, kind: str, version: str = "0.2.0") -> None:
    node.attrs["encoding-type"] = kind
    node.attrs["encoding-version"] = version


def _frame(f, name: str, index: list[str], columns: dict, labels: str) -> None:
    g = f.create_group(name)
    _enc(g, "dataframe")
    g.attrs["_index"] = "_index"
    g.attrs["column-order"] = np.array(list(columns), dtype=object).astype(STR) \
        if columns else np.zeros(0, dtype=STR)
    ds = g.create_dataset("_index", data=np.array(index, dtype=object), dtype=STR)
    _enc(ds, "string-array")
    for col, values in columns.items():
        values = np.asarray(values)
        if values.dtype.kind in "OUS" and labels == "categorical":
            cats, codes = np.unique(values.astype(str), return_inverse=True)
            c = g.create_group(col)
            _enc(c, "categorical")
            c.attrs["ordered"] = False
            c.create_dataset("categories", data=cats.astype(object), dtype=STR)
            c.create_dataset("codes", data=codes.astype(np.int8))
        elif values.dtype.kind in "OUS" and labels == "old":
            cats, codes = np.unique(values.astype(str), return_inverse=True)
            store = g.require_group("__categories")
            ref = store.create_dataset(col, data=cats.astype(object), dtype=STR)
            ds = g.create_dataset(col, data=codes.astype(np.int8))
            ds.attrs["categories"] = ref.ref
        elif values.dtype.kind in "OUS":
            ds = g.create_dataset(col, data=values.astype(str).astype(object), dtype=STR)
            _enc(ds, "string-array")
        else:
            ds = g.create_dataset(col, data=values)
            _enc(ds, "array")


def write_h5ad(path: Path, x: np.ndarray, genes: list[str], obs: dict, *,
               layout: str = "csr", labels: str = "categorical") -> Path:
    """Write cells x genes `x` with `obs` columns; `layout` dense, csr or csc; `labels`
    categorical, string (a string-array column) or old (the older categorical layout)."""
    n, p = x.shape
    with h5py.File(path, "w") as f:
        _enc(f, "anndata", "0.1.0")
        if layout == "dense":
            ds = f.create_dataset("X", data=x, chunks=(min(n, 64), p))
            _enc(ds, "array")
        else:
            m = sparse.csr_matrix(x) if layout == "csr" else sparse.csc_matrix(x)
            g = f.create_group("X")
            _enc(g, f"{layout}_matrix", "0.1.0")
            g.attrs["shape"] = np.array([n, p])
            g.create_dataset("data", data=m.data)
            g.create_dataset("indices", data=m.indices)
            g.create_dataset("indptr", data=m.indptr)
        _frame(f, "obs", [f"cell{i}" for i in range(n)], obs, labels)
        _frame(f, "var", list(genes), {}, labels)
    return path
