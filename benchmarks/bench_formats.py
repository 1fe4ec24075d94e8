"""Benchmark: peak memory and time of `read_inputs` on large files of the other formats.

Generates under benchmarks/_work/ (once; reused afterwards):

- ``big.csv.gz``: a gzip-compressed CSV of about 200 MB (100 variables, 5 regimes);
- ``cells_csr.h5ad`` and ``cells_csc.h5ad``: AnnData files of 100,000 cells x 2,000 genes,
  sparse (about 10 % of the entries stored, float32), with the regime in ``obs``;
  ``genes.txt`` chooses 200 of the genes.

Then, each in a fresh process, runs `read_inputs` on each file and records the wall time
and the peak resident memory (``VmHWM``), next to the peak of the same process after its
imports. Goal: peak memory bounded (a few hundred MiB), independent of
the file size; the matrix is never loaded whole. Prints a table and appends it to
benchmarks/RESULTS.md.

Run from the repository root:  python benchmarks/bench_formats.py  [--gzip-mb 200]
"""

from __future__ import annotations

import argparse
import datetime as _dt
import json
import os
import subprocess
import sys
from pathlib import Path

from _common import append_results, load_average, machine

HERE = Path(__file__).resolve().parent
WORK = HERE / "_work"
REGIMES = ("ctrl", "kd_V0", "kd_V1", "kd_V2", "kd_V3")
CELLS, GENES, CHOSEN = 100_000, 2_000, 200

# peak RSS from VmHWM: unlike ru_maxrss it starts afresh at exec (not the parent's peak)
_CHILD = r"""
import json, sys, time
def hwm():
    for line in open("/proc/self/status"):
        if line.startswith("VmHWM"):
            return int(line.split()[1]) * 1024
from pipeline.intake import read_inputs
data, regimes, genes, column = sys.argv[1:5]
base = hwm()
t = time.perf_counter()
intake = read_inputs([data], regimes, genes=genes or None, regime_column=column)
seconds = time.perf_counter() - t
peak = hwm()
print(json.dumps({"seconds": seconds, "peak": peak, "base": base,
                  "rows": int(intake.moments.count.sum()),
                  "variables": len(intake.moments.variables)}))
"""


def _regimes_file(prefix: str) -> Path:
    path = WORK / f"regimes_{prefix}.csv"
    path.write_text("regime,targets\n" + "".join(
        f"{r},{'' if r == 'ctrl' else prefix + r[4:]}\n" for r in REGIMES), encoding="utf-8")
    return path


def make_gzip(megabytes: float, seed: int = 0) -> Path:
    """A gzip CSV of about `megabytes` MB: 100 variables V0..V99 and a regime column."""
    import numpy as np
    import pyarrow as pa
    import pyarrow.csv as pacsv

    WORK.mkdir(parents=True, exist_ok=True)
    path = WORK / f"big_{int(megabytes)}MB.csv.gz"
    if path.exists():
        return path
    rng = np.random.default_rng(seed)
    p = 100
    mix = rng.standard_normal((p, p)) / np.sqrt(p)
    names = [f"V{j}" for j in range(p)]
    schema = pa.schema([(n, pa.float64()) for n in names] + [("regime", pa.string())])
    tmp = path.with_suffix(".tmp")
    with pa.output_stream(str(tmp), compression="gzip") as stream, \
            pacsv.CSVWriter(stream, schema) as writer:
        while tmp.stat().st_size < megabytes * 1e6:  # compressed bytes written so far
            m = 50_000
            x = np.round(rng.standard_normal((m, p)) @ mix + 5.0, 4)
            labels = np.array(REGIMES)[rng.integers(0, len(REGIMES), m)]
            cols = [pa.array(x[:, j]) for j in range(p)] + [pa.array(labels)]
            writer.write_table(pa.Table.from_arrays(cols, schema=schema))
    os.replace(tmp, path)
    return path


def make_h5ad(layout: str, seed: int = 1) -> Path:
    """100,000 cells x 2,000 genes, ~10 % stored, float32, written with h5py in row blocks."""
    import h5py
    import numpy as np
    from scipy import sparse

    WORK.mkdir(parents=True, exist_ok=True)
    path = WORK / f"cells_{layout}.h5ad"
    if path.exists():
        return path
    rng = np.random.default_rng(seed)
    blocks = []
    for start in range(0, CELLS, 10_000):
        m = min(10_000, CELLS - start)
        blocks.append(sparse.random(m, GENES, density=0.1, format="csr", dtype=np.float32,
                                    random_state=rng, data_rvs=lambda k: rng.gamma(2.0, 1.0, k)))
    x = sparse.vstack(blocks, format=layout)
    labels = rng.integers(0, len(REGIMES), CELLS).astype(np.int8)
    tmp = path.with_suffix(".tmp")
    text = h5py.string_dtype("utf-8")
    with h5py.File(tmp, "w") as f:
        f.attrs["encoding-type"], f.attrs["encoding-version"] = "anndata", "0.1.0"
        g = f.create_group("X")
        g.attrs["encoding-type"], g.attrs["encoding-version"] = f"{layout}_matrix", "0.1.0"
        g.attrs["shape"] = np.array([CELLS, GENES])
        for name in ("data", "indices", "indptr"):
            g.create_dataset(name, data=getattr(x, name), chunks=True)
        for table, index, cols in (("obs", [f"c{i}" for i in range(CELLS)], ["regime"]),
                                   ("var", [f"G{j}" for j in range(GENES)], [])):
            t = f.create_group(table)
            t.attrs["encoding-type"], t.attrs["encoding-version"] = "dataframe", "0.2.0"
            t.attrs["_index"] = "_index"
            t.attrs["column-order"] = np.array(cols, dtype=object).astype(text) if cols \
                else np.zeros(0, dtype=text)
            t.create_dataset("_index", data=np.array(index, dtype=object), dtype=text)
        c = f["obs"].create_group("regime")
        c.attrs["encoding-type"], c.attrs["encoding-version"] = "categorical", "0.2.0"
        c.attrs["ordered"] = False
        c.create_dataset("categories", data=np.array(REGIMES, dtype=object), dtype=text)
        c.create_dataset("codes", data=labels)
    os.replace(tmp, path)
    return path


def run_child(data: Path, regimes: Path, genes: str, column: str = "regime") -> dict:
    env = {**os.environ, "PYTHONPATH": str(HERE.parent)}
    done = subprocess.run([sys.executable, "-c", _CHILD, str(data), str(regimes), genes, column],
                          capture_output=True, text=True, env=env, check=True)
    return json.loads(done.stdout)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--gzip-mb", type=float, default=200.0)
    args = parser.parse_args()
    genes = WORK / "genes.txt"
    rows = []
    gz = make_gzip(args.gzip_mb)
    rows.append(("gzip CSV, 100 variables", gz, run_child(gz, _regimes_file("V"), "")))
    chosen = [f"G{j}" for j in range(0, GENES, GENES // CHOSEN)]
    genes.write_text("\n".join(chosen) + "\n", encoding="utf-8")
    h5_regimes = WORK / "regimes_G.csv"
    h5_regimes.write_text("regime,targets\n" + "".join(
        f"{r},{'' if r == 'ctrl' else chosen[int(r[4:])]}\n" for r in REGIMES), encoding="utf-8")
    for layout in ("csr", "csc"):
        path = make_h5ad(layout)
        rows.append((f"h5ad {layout.upper()} {CELLS:,} x {GENES:,}, {CHOSEN} genes", path,
                     run_child(path, h5_regimes, str(genes))))
    mib = 2 ** 20
    lines = ["| file | size MB | rows | variables | seconds | peak RSS after imports MiB | "
             "peak RSS MiB |", "| --- | ---: | ---: | ---: | ---: | ---: | ---: |"]
    for label, path, r in rows:
        lines.append(f"| {label} | {path.stat().st_size / 1e6:.0f} | {r['rows']:,} | "
                     f"{r['variables']} | {r['seconds']:.1f} | {r['base'] / mib:.0f} | "
                     f"{r['peak'] / mib:.0f} |")
    table = "\n".join(lines)
    print(table)
    section = [f"## Peak memory of read_inputs on gzip CSV and AnnData files ({_dt.date.today()})",
               "", f"Machine: {machine('numpy', 'pandas', 'h5py')}; load average before: "
               f"{load_average()}.", "",
               f"Command: `.venv/bin/python benchmarks/bench_formats.py --gzip-mb "
               f"{args.gzip_mb:g}`", "", table, "",
               "Each row runs in a fresh process. The gzip file is decompressed as a stream; "
               "the .h5ad matrix is read in row blocks (CSR) or as the chosen genes' columns "
               "(CSC), never whole."]
    append_results("\n".join(section))


if __name__ == "__main__":
    main()
