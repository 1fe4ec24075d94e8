"""``orienteer learn``: learn the interventional essential graph with per-edge evidence."""

from __future__ import annotations

import argparse
from pathlib import Path

from pipeline.commands.inputs import add_input_arguments, measurement_inputs
from pipeline.errors import InputError
from pipeline.options import COLLIDER_RULES, TARGET_MODES, TESTS

HELP = "learn the causal graph from control and perturbation experiments, with the evidence"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_input_arguments(parser)
    parser.add_argument("--out", metavar="DIR",
                        help="output folder (result files and the test store tests.sqlite)")
    parser.add_argument("--alpha", type=float, default=0.01,
                        help="significance level of every test (default 0.01)")
    parser.add_argument("--max-condition-size", type=int, default=None, metavar="K",
                        help="largest conditioning set tried (default: no limit)")
    parser.add_argument("--targets", default="declared", metavar="|".join(TARGET_MODES),
                        help="take declared targets as given, or learn them all from the data "
                             "(regimes with known=no are always learned; default declared)")
    parser.add_argument("--bootstrap", type=int, default=0, metavar="B",
                        help="bootstrap resamples of the rows within each regime, each "
                             "relearned: adjacency and orientation frequencies of every edge "
                             "(default 0: none)")
    parser.add_argument("--seed", type=int, default=None, metavar="S",
                        help="seed of the bootstrap (default: a fresh one, recorded in "
                             "result.json)")
    parser.add_argument("--jobs", type=int, default=1, metavar="N",
                        help="processes relearning the bootstrap resamples (default 1; the "
                             "result does not depend on it)")
    parser.add_argument("--engine", default="local", help=argparse.SUPPRESS)
    parser.add_argument("--scheduler", metavar="ADDRESS", help=argparse.SUPPRESS)
    parser.add_argument("--picture", action="store_true",
                        help="also write graph.png, a picture of the graph for slides")
    parser.add_argument("--test", default="gaussian", metavar="|".join(TESTS),
                        help="gaussian (default) or rank (within-regime rank correlations)")
    parser.add_argument("--collider-rule", default="majority", metavar="|".join(COLLIDER_RULES),
                        help="how unshielded triples become colliders (default majority)")


def _check_unsupported(args: argparse.Namespace) -> None:
    """Options the contract names but this version cannot honour: refuse, don't ignore."""
    if args.bootstrap is not None and int(args.bootstrap) < 0:
        raise InputError(f"--bootstrap {args.bootstrap}: expected a whole number >= 0")
    if args.seed is not None and int(args.seed) < 0:
        raise InputError(f"--seed {args.seed}: expected a whole number >= 0")
    if args.engine not in ("local", "dask"):
        raise InputError(f"--engine {args.engine}: expected local or dask")
    if args.engine == "dask":
        raise InputError("--engine dask: the Dask engine is not available yet; use --engine "
                         "local")
    if args.scheduler:
        raise InputError(f"--scheduler {args.scheduler}: needs --engine dask, which is not "
                         f"available yet; leave --scheduler out")
    if args.jobs is not None and int(args.jobs) < 1:
        raise InputError(f"--jobs {args.jobs}: expected a whole number >= 1")


def run(args: argparse.Namespace) -> int:
    inputs = measurement_inputs(args)
    if not args.out:
        raise InputError("--out: missing; name the folder for the result files")
    _check_unsupported(args)
    from pipeline.stats.fingerprint import hash_in_background

    hash_in_background([*inputs.data, inputs.regimes], out=args.out)  # meanwhile: imports
    from pipeline.progress import Progress
    from pipeline.terminal import Terminal
    from pipeline.workflow import learn

    console = Terminal()
    with Progress() as bars:
        result = learn(inputs.data, inputs.regimes, out=args.out, alpha=args.alpha,
                       max_condition_size=args.max_condition_size, targets=args.targets,
                       test=args.test, collider_rule=args.collider_rule, seed=args.seed,
                       bootstrap=args.bootstrap or 0, jobs=args.jobs or 1,
                       picture=bool(args.picture), progress=bars,
                       **inputs.options)
    if result.run.get("notice"):
        from pipeline.terminal import escape

        console.print(f"[yellow]note:[/yellow] {escape(result.run['notice'])}", wrap=False)
    result.print(console)
    print_files(Path(args.out), console)
    return 0


def print_files(out: Path, console) -> None:
    """Where the files are, and the report's path."""
    from pipeline.results.files import BOOTSTRAP_FILE, RESULT_FILES
    from pipeline.terminal import escape
    from pipeline.workflow import STORE_NAME

    present = [n for n in (*RESULT_FILES, BOOTSTRAP_FILE, STORE_NAME) if (out / n).is_file()]
    console.print(f"results in {escape(str(out))}/: {', '.join(present)}")
    console.print(f"[bold]report:[/bold] {escape(str((out / 'report.html').resolve()))}")
