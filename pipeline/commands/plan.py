"""``orienteer plan``: which experiments to run next to orient what is still undirected."""

from __future__ import annotations

import argparse

from pipeline.errors import InputError

HELP = ("rank the next experiments (up to K targets each) by the edges they would orient "
        "in a result's class, and plan M of them")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("result", nargs="?", metavar="RESULT",
                        help="result.json of learn or identify (or the folder holding it)")
    parser.add_argument("--candidates", metavar="A,B,...|FILE",
                        help="variables that can be acted on: a comma list or a file with one "
                             "name per line (default: every variable with an undirected edge)")
    parser.add_argument("--max-targets", type=int, default=1, metavar="K",
                        help="most variables acted on by one experiment (default 1)")
    parser.add_argument("--experiments", type=int, default=1, metavar="M",
                        help="experiments in the plan (default 1)")
    parser.add_argument("--out", metavar="DIR|FILE.json",
                        help="where to write plan.json: a folder, or a .json file "
                             "(default: plan.json beside RESULT)")
    parser.add_argument("--samples", type=int, default=200, metavar="N",
                        help="DAGs drawn per part of the class too large to list exactly "
                             "(default 200)")
    parser.add_argument("--seed", type=int, default=None, metavar="S",
                        help="seed of the draws (default: drawn and recorded in plan.json)")
    parser.add_argument("--top", type=int, default=50, metavar="N",
                        help="ranking rows kept in plan.json and the report (0: all; "
                             "default 50)")


def run(args: argparse.Namespace) -> int:
    if not args.result:
        raise InputError("RESULT: missing; name the result.json written by learn or identify")
    from pathlib import Path

    from pipeline.analyses.plan import plan
    from pipeline.terminal import Terminal, escape

    candidates = args.candidates
    if isinstance(candidates, (list, tuple)):  # a list in a config file
        candidates = ",".join(map(str, candidates))
    result = plan(args.result, candidates=candidates, max_targets=args.max_targets,
                  experiments=args.experiments, samples=args.samples, seed=args.seed,
                  top=args.top)
    source = Path(result.result)
    out = _out_path(args.out, source)
    path = result.write(out)  # written before printing: a closed pipe cannot lose it
    console = Terminal()
    result.print(console)
    console.print(f"wrote {escape(str(path))}")
    report = _refresh(path, source)
    if report is not None:
        console.print(f"[bold]report:[/bold] {escape(str(report.resolve()))}")
    return 0


def _out_path(out: str | None, source):
    from pathlib import Path

    if not out:
        return source.parent / "plan.json"
    p = Path(out)
    if p.suffix.lower() == ".json" and not p.is_dir():
        return p
    return p / "plan.json"


def _refresh(path, source):
    """Render the report again when plan.json sits beside the learn result it plans on."""
    import json

    if path.name != "plan.json" or source.name != "result.json":
        return None
    if path.parent.resolve() != source.parent.resolve():
        return None
    try:
        settings = json.loads(source.read_text(encoding="utf-8")).get("settings", {})
    except (OSError, json.JSONDecodeError, UnicodeDecodeError):
        return None
    if settings.get("command") == "identify":
        return None
    from pipeline.results.files import refresh_report

    return refresh_report(path.parent)
