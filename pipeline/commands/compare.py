"""``orienteer compare``: score a result against a known DAG under the same regimes."""

from __future__ import annotations

import argparse
from pathlib import Path

from pipeline.errors import InputError

HELP = "score a result against a known DAG: SHD, adjacency and orientation precision and recall"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("result", nargs="?", metavar="RESULT",
                        help="result.json of learn (or the folder holding it)")
    parser.add_argument("--truth-dag", metavar="DAG", help="the true DAG: dag.csv (source,target)")
    parser.add_argument("--json", action="store_true", help="print the scores as JSON")


def run(args: argparse.Namespace) -> int:
    if not args.result:
        raise InputError("RESULT: missing; name the result.json written by learn")
    if not args.truth_dag:
        raise InputError("--truth-dag: missing; name the true DAG file (columns source,target)")
    import json

    from rich.console import Console

    from pipeline.analyses.scoring import score_result
    from pipeline.intake.dag import read_dag_csv
    from pipeline.results.schema import ResultRecord

    path = Path(args.result)
    if path.is_dir():
        path = path / "result.json"
    record = ResultRecord.read(path)
    dag = read_dag_csv(args.truth_dag, extra_nodes=record.nodes)
    try:
        scores, _ = score_result(record, dag)
    except ValueError as exc:
        raise InputError(f"--truth-dag {args.truth_dag}: {exc}; the DAG and the result must "
                         f"name the same variables") from None
    if args.json:
        out = {"result": str(path), "truth_dag": str(args.truth_dag), **scores.to_dict()}
        print(json.dumps(out, indent=2, allow_nan=False))
    else:
        scores.print(Console(), title=f"{path} against {args.truth_dag}")
    return 0
