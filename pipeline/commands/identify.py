"""``orienteer identify``: what a planned set of experiments identifies if the graph were known."""

from __future__ import annotations

import argparse
from pathlib import Path

from pipeline.errors import InputError, nearest_names

HELP = "show the essential graph and class size that the regimes' targets identify in a known DAG"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--dag", metavar="DAG", help="dag.csv: one directed edge per row "
                        "(columns source,target)")
    parser.add_argument("--regimes", metavar="REGIMES", help="regimes.csv: regime,targets[,known]")
    parser.add_argument("--out", metavar="FILE", help="write the result as JSON "
                        "(format orienteer.result/1) to FILE")
    parser.add_argument("--reference", metavar="REGIME",
                        help="the reference regime when no regime has empty targets")


def run(args: argparse.Namespace) -> int:
    if not args.dag:
        raise InputError("--dag: missing; name the known graph file (columns source,target)")
    if not args.regimes:
        raise InputError("--regimes: missing; name the regimes file (columns regime,targets)")
    from pipeline.analyses.identify import identify
    from pipeline.design import Design
    from pipeline.fileio import write_text
    from pipeline.intake.dag import read_dag_csv
    from pipeline.intake.regimes import read_regimes
    from pipeline.terminal import Terminal, escape

    regimes = read_regimes(args.regimes, variables=None, reference=args.reference)
    extra = [t for r in regimes for t in r.targets]
    dag = read_dag_csv(args.dag, extra_nodes=extra)
    design = Design(variables=tuple(str(n) for n in dag.nodes), regimes=tuple(regimes),
                    warnings=tuple(_targets_outside(dag, regimes)))
    result = identify(dag, design)
    path = None
    if args.out:  # written before printing, so a closed terminal pipe cannot lose it
        settings = {"dag": Path(args.dag).name, "regimes": Path(args.regimes).name}
        if args.reference:
            settings["reference"] = args.reference
        path = write_text(args.out, result.record(settings).to_json())
    console = Terminal()
    result.print(console)
    if path is not None:
        console.print(f"wrote {escape(str(path))}")
    return 0


def _targets_outside(dag, regimes) -> list[str]:
    """Warnings for targets that no edge of the DAG file names (a typo is the usual cause)."""
    named = {n for e in dag.edges for n in e}
    out = []
    for r in regimes:
        for t in r.targets:
            if t not in named:
                out.append(f"target '{t}' of regime '{r.name}' appears in no edge of the DAG "
                           f"file; it is taken as a variable with no edges"
                           f"{nearest_names(t, sorted(named))}")
    return out
