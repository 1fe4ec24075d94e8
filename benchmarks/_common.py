"""What every benchmark script shares: the machine line, the load, appending to RESULTS.md."""

from __future__ import annotations

import importlib
import os
import platform
import statistics
import time
from pathlib import Path

RESULTS = Path(__file__).resolve().parent / "RESULTS.md"


def machine(*libraries: str) -> str:
    """``x86_64, 2 cores, 23.5 GiB memory, Python 3.11.7, numpy 2.4.6`` (the named libraries)."""
    mem = "?"
    try:
        for line in Path("/proc/meminfo").read_text().splitlines():
            if line.startswith("MemTotal"):
                mem = f"{int(line.split()[1]) / 2**20:.1f} GiB"
    except OSError:
        pass
    versions = "".join(f", {name} {importlib.import_module(name).__version__}"
                       for name in libraries)
    return (f"{platform.machine()}, {os.cpu_count()} cores, {mem} memory, "
            f"Python {platform.python_version()}{versions}")


def load_average() -> str:
    """The 1, 5 and 15 minute load averages (other work on the machine slows wall times)."""
    try:
        return ", ".join(f"{v:.2f}" for v in os.getloadavg())
    except OSError:
        return "unknown"


def append_results(text: str) -> Path:
    """Append a section to RESULTS.md (created with its title if missing)."""
    if not RESULTS.exists():
        RESULTS.write_text("# Benchmark results\n", encoding="utf-8")
    with open(RESULTS, "a", encoding="utf-8") as fh:
        fh.write("\n" + text.rstrip("\n") + "\n")
    return RESULTS


def publish(text: str, append: bool = True) -> None:
    """Print a benchmark's section and, unless told not to, append it to RESULTS.md."""
    print(text)
    if append:
        print(f"appended to {append_results(text).name}")


def median_time(fn, runs: int) -> tuple[float, object]:
    """Median wall seconds of `runs` calls of ``fn()``, and the last call's result."""
    times, out = [], None
    for _ in range(runs):
        t = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times), out
