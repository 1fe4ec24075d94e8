"""``orienteer sweep``: the learner of a run folder at several alphas, from its test store."""

from __future__ import annotations

import argparse

from pipeline.errors import InputError

HELP = ("rerun the learner of a learn folder at several significance levels from its store "
        "and show which edges are stable")

#: Levels swept when --alpha is not given (as `pipeline.analyses.sweep.DEFAULT_ALPHAS`).
DEFAULT_ALPHAS = ("0.001", "0.005", "0.01", "0.05")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("dir", nargs="?", metavar="DIR",
                        help="the --out folder of a learn run (result.json, tests.sqlite)")
    parser.add_argument("--alpha", nargs="+", default=list(DEFAULT_ALPHAS), metavar="A",
                        help="significance levels, space- or comma-separated (default "
                             + " ".join(DEFAULT_ALPHAS) + ")")


def run(args: argparse.Namespace) -> int:
    if not args.dir:
        raise InputError("DIR: missing; name the --out folder of a learn run")
    from pathlib import Path

    from pipeline.analyses.sweep import sweep
    from pipeline.fileio import write_text
    from pipeline.progress import Progress
    from pipeline.results.files import refresh_report
    from pipeline.terminal import Terminal, escape

    folder = Path(args.dir)
    with Progress() as bars:
        result = sweep(folder, args.alpha, progress=bars)
    console = Terminal()
    result.print(console)
    write_text(folder / "sweep.csv", result.to_csv())
    write_text(folder / "sweep.json", result.to_json())
    report = refresh_report(folder)
    console.print(f"wrote {escape(str(folder / 'sweep.csv'))} and sweep.json; "
                  f"[bold]report:[/bold] {escape(str(report.resolve()))}")
    return 0
