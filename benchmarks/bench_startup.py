"""Benchmark: how fast the command line answers, and a rerun against a cold run, as a user sees it.

Every figure is the wall time of a fresh ``orienteer`` process (``python -m pipeline``),
start-up and imports included, median of several runs:

1. ``orienteer --version``, ``orienteer --help`` and ``orienteer learn --help`` (goal:
   under 0.3 s: the parser is built without importing the numerical stack);
2. ``orienteer learn`` on a 132,000-row, 30-variable CSV file (simulated: a control and
   21 single-target knockdowns of 6,000 rows), cold into a fresh folder, then again into
   the same folder at a new alpha (statistics and earlier tests from ``tests.sqlite``;
   goal: at least 5 times faster than the cold run);
3. the same rerun on a terminal, through util-linux ``script`` when it is installed (progress
   bars and colours are on; ``script`` itself adds a few milliseconds);
4. ``orienteer sweep`` of that folder at four alphas (its tests stored by a first sweep).

The package's bytecode is compiled first (``compileall``), as installing a package does,
so that no timed process compiles the package's sources; ``--no-bytecode`` times a checkout
where Python writes no bytecode instead (the package's ``__pycache__`` folders removed and
``PYTHONDONTWRITEBYTECODE=1``: every process compiles the package's sources). The section
says which was timed.

Run from the repository root::

    python benchmarks/bench_startup.py
    python benchmarks/bench_startup.py --runs 3 --no-append
    python benchmarks/bench_startup.py --no-bytecode
"""

from __future__ import annotations

import argparse
import compileall
import datetime
import os
import shlex
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from _common import load_average, machine, publish

import pipeline
from pipeline.simulation import simulate

ORIENTEER = [sys.executable, "-m", "pipeline"]
PACKAGE = Path(pipeline.__file__).parent
#: The environment of the timed processes.
ENV = dict(os.environ)


def wall(args: list[str]) -> float:
    """Seconds of one ``orienteer`` process; raises if it fails."""
    started = time.perf_counter()
    subprocess.run(ORIENTEER + args, check=True, stdout=subprocess.DEVNULL,
                   stderr=subprocess.DEVNULL, env=ENV)
    return time.perf_counter() - started


def wall_on_terminal(args: list[str]) -> float:
    """Seconds of one ``orienteer`` process on a pseudo-terminal (util-linux ``script``)."""
    return wall_on_terminal_of(ORIENTEER + args)


def wall_on_terminal_of(command: list[str]) -> float:
    """Seconds of `command` run on a pseudo-terminal by ``script`` (raises if it fails)."""
    started = time.perf_counter()
    subprocess.run(["script", "-qec", shlex.join(command), "/dev/null"], check=True,
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=ENV)
    return time.perf_counter() - started


def prepare_bytecode(compiled: bool) -> str:
    """Compile the package's bytecode, or remove it and have no process write it; say which."""
    if compiled:
        compileall.compile_dir(PACKAGE, quiet=1)
        return "compiled before timing (as installing the package does)"
    for folder in PACKAGE.rglob("__pycache__"):
        shutil.rmtree(folder)
    ENV["PYTHONDONTWRITEBYTECODE"] = "1"
    return "none (PYTHONDONTWRITEBYTECODE=1): every process compiles the package's sources"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=5, help="runs per figure (median)")
    parser.add_argument("--no-append", action="store_true", help="print only")
    parser.add_argument("--no-bytecode", action="store_true",
                        help="time a checkout without the package's bytecode (compiled at "
                             "every start)")
    args = parser.parse_args(argv)
    bytecode = prepare_bytecode(not args.no_bytecode)
    load = load_average()
    rows = []
    for words in (["--version"], ["--help"], ["learn", "--help"]):
        times = [wall(words) for _ in range(args.runs)]
        rows.append((f"`orienteer {' '.join(words)}`", statistics.median(times), ""))
    with tempfile.TemporaryDirectory(prefix="orienteer-startup-") as tmp:
        tmp = Path(tmp)
        sim = simulate(nodes=30, degree=2.0, regimes=21, samples=6000, seed=3)
        sim.save(tmp / "data")
        data, regimes = tmp / "data" / "data.csv", tmp / "data" / "regimes.csv"
        mb = data.stat().st_size / 2**20
        cold, rerun, terminal = [], [], []
        on_terminal = shutil.which("script") is not None
        for i in range(args.runs):
            out = tmp / f"out{i}"
            base = ["learn", str(data), "--regimes", str(regimes), "--out", str(out)]
            cold.append(wall(base + ["--alpha", "0.01"]))
            rerun.append(wall(base + ["--alpha", f"{0.005 / (i + 1):.6f}"]))
            if on_terminal:
                terminal.append(wall_on_terminal(base + ["--alpha", f"{0.004 / (i + 1):.6f}"]))
        c, r = statistics.median(cold), statistics.median(rerun)
        rows.append((f"cold `learn`, {len(sim.data):,} rows x 30 variables ({mb:.0f} MB)", c,
                     ""))
        rows.append(("rerun into the same `--out` at a new alpha", r, f"{c / r:.1f}x faster"))
        levels = ["--alpha", "0.001", "0.005", "0.01", "0.05"]
        wall(["sweep", str(tmp / "out0"), *levels])  # stores the tests of the four levels
        swept = statistics.median(wall(["sweep", str(tmp / "out0"), *levels])
                                  for _ in range(args.runs))
        rows.append(("`sweep` of that folder at 4 alphas (tests in the store)", swept, ""))
        if terminal:
            t = statistics.median(terminal)
            alone = statistics.median(
                [wall_on_terminal_of(["true"]) for _ in range(args.runs)])
            rows.append(("the same rerun on a terminal (`script`)", t,
                         f"of which `script` itself: {alone:.3f} s"))
    when = datetime.datetime.now().strftime("%Y-%m-%d %H:%M")
    command = " ".join(["python benchmarks/bench_startup.py", *sys.argv[1:]])
    lines = [f"## bench_startup: the command line as a user times it ({when})", "",
             f"- machine: {machine('numpy')}; load average at start: {load}",
             f"- command: `{command}`",
             f"- wall time of a fresh process, start-up included; median of {args.runs} runs",
             f"- the package's bytecode: {bytecode}",
             "", "| what | median wall s | |", "|---|---|---|"]
    lines += [f"| {what} | {t:.3f} | {note} |" for what, t, note in rows]
    text = "\n".join(lines) + "\n"
    publish(text, append=not args.no_append)
    return 0


if __name__ == "__main__":
    sys.exit(main())
