"""``orienteer demo``: run ``check`` and ``learn`` on the bundled demo data."""

from __future__ import annotations

import argparse
from pathlib import Path

import pipeline
from pipeline.errors import InputError

HELP = "run check and learn on the bundled demo data and print where the report is"

DEFAULT_OUT = "orienteer-demo"


def demo_folder() -> Path:
    """The demo data folder ``data/demo`` of the source tree."""
    folder = Path(pipeline.__file__).resolve().parents[1] / "data" / "demo"
    needed = [folder / "measurements.csv", folder / "regimes.csv"]
    missing = [p for p in needed if not p.is_file()]
    if missing:
        raise InputError(f"demo data: {', '.join(str(p) for p in missing)} not found (looked in "
                         f"{folder}); the demo needs a source checkout of Orienteer with "
                         f"data/demo/")
    return folder


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--out", default=DEFAULT_OUT, metavar="DIR",
                        help=f"output folder (default {DEFAULT_OUT}/)")


def run(args: argparse.Namespace) -> int:
    from pipeline.analyses.check import check
    from pipeline.commands.learn import print_files
    from pipeline.progress import Progress
    from pipeline.terminal import Terminal
    from pipeline.workflow import learn

    folder = demo_folder()
    out = Path(args.out or DEFAULT_OUT)
    data, regimes = folder / "measurements.csv", folder / "regimes.csv"
    console = Terminal()
    console.section("[bold]1. check the inputs[/bold]")
    check([data], regimes).print(console)
    console.section("[bold]2. learn the graph[/bold]")
    with Progress() as bars:
        result = learn([data], regimes, out=out, progress=bars, picture=True)
    result.print(console)
    truth = folder / "truth_dag.csv"
    if truth.is_file():
        from pipeline.analyses.scoring import compare_result
        from pipeline.intake.dag import read_dag_csv
        from pipeline.intake.regimes import read_regimes

        console.section("[bold]3. against the true circuit (known for invented data)[/bold]")
        record = result.record()
        actual = folder / "truth_regimes.csv"
        truth_regimes = (read_regimes(actual, variables=record.nodes) if actual.is_file()
                         else None)
        compare_result(record, read_dag_csv(truth, extra_nodes=record.nodes),
                       truth_regimes).print(console)
    print_files(out, console)
    return 0
