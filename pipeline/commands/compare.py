"""``orienteer compare``: score a result against a known DAG under the same regimes."""

from __future__ import annotations

import argparse
import json
from pathlib import Path

from rich.console import Console
from rich.markup import escape
from rich.table import Table

from pipeline.errors import InputError
from pipeline.evidence.schema import ResultRecord
from pipeline.evidence.scoring import Scores, score_result

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
    path = Path(args.result)
    if path.is_dir():
        path = path / "result.json"
    record = ResultRecord.read(path)
    from pipeline.intake.dag import read_dag_csv

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
        print_scores(scores, Console(), title=f"{path} against {args.truth_dag}")
    return 0


def print_scores(scores: Scores, console: Console, title: str = "") -> None:
    """A rich table of the scores."""
    def f(v: float | None) -> str:
        return "n/a" if v is None else f"{v:.3f}"

    t = Table(title=escape("Scores against the true interventional essential graph"
                           + (f": {title}" if title else "")))
    t.add_column("score")
    t.add_column("value", justify="right")
    t.add_column("counts", justify="right")
    t.add_row("structural Hamming distance", str(scores.shd), "")
    t.add_row("adjacency precision", f(scores.adjacency_precision),
              f"{scores.shared_adjacencies} / {scores.learned_edges}")
    t.add_row("adjacency recall", f(scores.adjacency_recall),
              f"{scores.shared_adjacencies} / {scores.true_edges}")
    t.add_row("orientation precision", f(scores.orientation_precision),
              f"{scores.shared_directed} / {scores.learned_directed}")
    t.add_row("orientation recall", f(scores.orientation_recall),
              f"{scores.shared_directed} / {scores.true_directed}")
    console.print(t)
