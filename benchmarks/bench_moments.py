"""Benchmark: streaming sufficient statistics of a large CSV against plain pandas.read_csv.

Generates CSV files of 100,000 and 1,000,000 rows x 100 variables (5 regimes) under
benchmarks/_work/, then, each in a fresh process, times `read_inputs` (parse, statistics,
fingerprint, checks) and `pandas.read_csv` of the same file (median of 3 runs) and records
the peak resident memory. Goals: time within 1.3x of pandas.read_csv; peak memory under
1 GiB and flat from 100k to 1M rows. Prints a table and appends it to
benchmarks/RESULTS.md.

Run from the repository root:  python benchmarks/bench_moments.py  [--rows 100000 1000000]
"""

from __future__ import annotations

import argparse
import datetime as _dt
import json
import os
import shutil
import statistics
import subprocess
import sys
from pathlib import Path

from _common import append_results, machine

HERE = Path(__file__).resolve().parent
WORK = HERE / "_work"
P = 100
REGIMES = ("ctrl", "kd_V0", "kd_V1", "kd_V2", "kd_V3")

_CHILD = r"""
import json, resource, sys, time
method, data, regimes = sys.argv[1:4]
if method == "pandas":
    import pandas as pd
    t, c = time.perf_counter(), time.process_time()
    frame = pd.read_csv(data)
    seconds, cpu = time.perf_counter() - t, time.process_time() - c
    rows = len(frame)
else:
    from pipeline.intake.read import read_inputs
    t, c = time.perf_counter(), time.process_time()
    intake = read_inputs([data], regimes)
    seconds, cpu = time.perf_counter() - t, time.process_time() - c
    rows = int(intake.moments.count.sum())
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
print(json.dumps({"seconds": seconds, "cpu": cpu, "peak": peak, "rows": rows}))
"""


def generate(rows: int, seed: int = 0) -> tuple[Path, Path]:
    """Write ``data_<rows>.csv`` (values with 5 significant digits) and ``regimes.csv``."""
    import numpy as np
    import pyarrow as pa
    import pyarrow.csv as pacsv

    WORK.mkdir(parents=True, exist_ok=True)
    path = WORK / f"data_{rows}.csv"
    regimes = WORK / "regimes.csv"
    regimes.write_text("regime,targets\n" + "".join(
        f"{r},{'' if r == 'ctrl' else r[3:]}\n" for r in REGIMES), encoding="utf-8")
    if path.exists():
        return path, regimes
    rng = np.random.default_rng(seed)
    mix = rng.standard_normal((P, P)) / np.sqrt(P)
    names = [f"V{j}" for j in range(P)] + ["regime"]
    schema = pa.schema([(n, pa.float64()) for n in names[:-1]] + [("regime", pa.string())])
    tmp = path.with_suffix(".tmp")
    with pacsv.CSVWriter(str(tmp), schema) as writer:
        for start in range(0, rows, 100_000):
            m = min(100_000, rows - start)
            x = rng.standard_normal((m, P)) @ mix + 5.0
            x = np.round(x, 4)
            labels = np.array(REGIMES)[rng.integers(0, len(REGIMES), m)]
            cols = [pa.array(x[:, j]) for j in range(P)] + [pa.array(labels)]
            writer.write_table(pa.Table.from_arrays(cols, schema=schema))
    os.replace(tmp, path)
    return path, regimes


def run_child(method: str, data: Path, regimes: Path) -> dict:
    env = {**os.environ, "PYTHONPATH": str(HERE.parent)}
    done = subprocess.run([sys.executable, "-c", _CHILD, method, str(data), str(regimes)],
                          capture_output=True, text=True, env=env, check=True)
    return json.loads(done.stdout.strip().splitlines()[-1])


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, nargs="+", default=[100_000, 1_000_000])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--keep", action="store_true", help="keep the generated files")
    parser.add_argument("--no-record", action="store_true",
                        help="print only; do not append to RESULTS.md")
    args = parser.parse_args(argv)

    lines = ["| rows | file MB | pandas.read_csv s | read_inputs s | ratio (wall) | "
             "ratio (CPU) | pandas peak MiB | read_inputs peak MiB |",
             "|---:|---:|---:|---:|---:|---:|---:|---:|"]
    for rows in args.rows:
        data, regimes = generate(rows)
        runs = {"pandas": [], "intake": []}
        for _ in range(args.repeats):
            for method in ("pandas", "intake"):  # interleaved: both see the same load
                runs[method].append(run_child(method, data, regimes))
        t_pd = statistics.median(r["seconds"] for r in runs["pandas"])
        t_in = statistics.median(r["seconds"] for r in runs["intake"])
        c_pd = statistics.median(r["cpu"] for r in runs["pandas"])
        c_in = statistics.median(r["cpu"] for r in runs["intake"])
        m_pd = max(r["peak"] for r in runs["pandas"]) / 2**20
        m_in = max(r["peak"] for r in runs["intake"]) / 2**20
        assert all(r["rows"] == rows for v in runs.values() for r in v)
        lines.append(f"| {rows:,} | {data.stat().st_size / 1e6:.0f} | {t_pd:.2f} | {t_in:.2f} | "
                     f"{t_in / t_pd:.2f} | {c_in / c_pd:.2f} | {m_pd:.0f} | {m_in:.0f} |")
        print(lines[-1], flush=True)
    if not args.keep:
        shutil.rmtree(WORK, ignore_errors=True)

    command = "python benchmarks/bench_moments.py " + " ".join(argv if argv is not None
                                                                  else sys.argv[1:])
    section = [f"## Sufficient statistics of a CSV ({P} variables): read_inputs vs pandas.read_csv",
               "", f"- date: {_dt.datetime.now(_dt.UTC).strftime('%Y-%m-%d %H:%M UTC')}",
               f"- machine: {machine()}; load average at start {os.getloadavg()[0]:.1f} "
               f"(other work on the machine inflates wall times; CPU = process time)",
               f"- command: `{command.strip()}`",
               f"- median of {args.repeats} runs, each in a fresh process; peak = peak resident "
               f"memory of that process (max over runs)", "", *lines, "",
               "Peak memory of read_inputs holds at most two chunks of rows (one being parsed, "
               "one being reduced), so it stops growing once a file has two chunks "
               "(2 x 100,000 rows by default); pandas.read_csv holds the whole table.", ""]
    text = "\n".join(section)
    print("\n" + text)
    if args.no_record:
        return 0
    append_results(text)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
