"""``orienteer compare``: score a result against a known DAG and its true essential graph."""

from __future__ import annotations

import argparse
from pathlib import Path

from pipeline.errors import InputError

HELP = ("score a result against a known DAG and its essential graph under the true targets: "
        "SHD, adjacency and orientation precision and recall")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("result", nargs="?", metavar="RESULT",
                        help="result.json of learn (or the folder holding it)")
    parser.add_argument("--truth-dag", metavar="DAG", help="the true DAG: dag.csv (source,target)")
    parser.add_argument("--truth-regimes", metavar="REGIMES",
                        help="the targets that really acted (regime,targets; e.g. "
                             "truth_regimes.csv of simulate); default: the declared targets")
    parser.add_argument("--json", action="store_true", help="print the scores as JSON")


def run(args: argparse.Namespace) -> int:
    if not args.result:
        raise InputError("RESULT: missing; name the result.json written by learn")
    if not args.truth_dag:
        raise InputError("--truth-dag: missing; name the true DAG file (columns source,target)")
    import json

    from pipeline.analyses.scoring import compare_result
    from pipeline.intake.dag import read_dag_csv
    from pipeline.results.schema import ResultRecord
    from pipeline.terminal import Terminal

    path = Path(args.result)
    if path.is_dir():
        path = path / "result.json"
    record = ResultRecord.read(path)
    dag = read_dag_csv(args.truth_dag, extra_nodes=record.nodes)
    truth = None
    if args.truth_regimes:
        from pipeline.intake.regimes import read_regimes

        truth = read_regimes(args.truth_regimes, variables=record.nodes,
                             reference=_reference(record))
        missing = [r.name for r in record.regimes if r.name not in {t.name for t in truth}]
        if missing:
            raise InputError(f"--truth-regimes {args.truth_regimes}: no row for regime(s) "
                             f"{', '.join(missing)} of {path}; add them (empty targets for a "
                             f"control)")
    try:
        comparison = compare_result(record, dag, truth)
    except ValueError as exc:
        raise InputError(f"--truth-dag {args.truth_dag}: {exc}; the DAG and the result must "
                         f"name the same variables") from None
    if args.json:
        out = {"result": str(path), "truth_dag": str(args.truth_dag),
               "truth_regimes": args.truth_regimes, **comparison.to_dict()}
        Terminal().write(json.dumps(out, indent=2, allow_nan=False) + "\n")
    else:
        comparison.print(Terminal(), title=f"{path} against {args.truth_dag}")
    return 0


def _reference(record) -> str | None:
    """The result's reference regime when it has targets (so reading needs its name)."""
    refs = [r for r in record.regimes if r.reference]
    return refs[0].name if len(refs) == 1 and refs[0].targets else None
