"""``orienteer validate``: does the learned graph predict experiments it never saw?"""

from __future__ import annotations

import argparse

from pipeline.commands.inputs import add_input_arguments, measurement_inputs
from pipeline.errors import InputError
from pipeline.options import COLLIDER_RULES, TARGET_MODES, TESTS

HELP = ("hold out each perturbation in turn, learn without it and score the predicted "
        "movers against the observed ones, beside two baselines")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_input_arguments(parser)
    parser.add_argument("--out", metavar="DIR",
                        help="output folder (validation.csv, validation.json, tests.sqlite; "
                             "the report of a learn run there gains a section)")
    parser.add_argument("--holdout", metavar="R1,R2",
                        help="regimes to hold out, one at a time (default: every "
                             "perturbation regime)")
    parser.add_argument("--holdout-all", action="store_true",
                        help="hold out every perturbation regime, one at a time")
    parser.add_argument("--min-shift", type=float, default=0.2, metavar="SD",
                        help="smallest effect of an observed mover: mean shift in reference "
                             "sd, or sd ratio beyond 1 + SD (default 0.2)")
    parser.add_argument("--class-samples", type=int, default=1000, metavar="N",
                        help="DAGs drawn from each learned class to score the variables; "
                             "smaller classes are listed exactly (default 1000)")
    parser.add_argument("--alpha", type=float, default=0.01,
                        help="significance level of every test (default 0.01)")
    parser.add_argument("--max-condition-size", type=int, default=None, metavar="K",
                        help="largest conditioning set tried (default: no limit)")
    parser.add_argument("--targets", default="declared", metavar="|".join(TARGET_MODES),
                        help="take declared targets as given, or learn them (default declared)")
    parser.add_argument("--test", default="gaussian", metavar="|".join(TESTS),
                        help="gaussian (default) or rank (within-regime rank correlations)")
    parser.add_argument("--collider-rule", default="majority", metavar="|".join(COLLIDER_RULES),
                        help="how unshielded triples become colliders (default majority)")
    parser.add_argument("--seed", type=int, default=None, metavar="S",
                        help="seed of the DAG draws (default: drawn and recorded)")


def run(args: argparse.Namespace) -> int:
    inputs = measurement_inputs(args)
    if not args.out:
        raise InputError("--out: missing; name the folder for validation.csv and "
                         "validation.json (the folder of a learn run adds a report section)")
    holdout = args.holdout
    if isinstance(holdout, (list, tuple)):  # a list in a config file
        holdout = ",".join(map(str, holdout))
    if holdout is not None and not str(holdout).strip():
        raise InputError("--holdout: empty; name regimes (R1,R2) or use --holdout-all")
    from pathlib import Path

    from pipeline.stats.fingerprint import hash_in_background

    hash_in_background([*inputs.data, inputs.regimes], out=args.out)  # meanwhile: imports
    from pipeline.analyses.validate import validate
    from pipeline.progress import Progress
    from pipeline.terminal import Terminal, escape

    console = Terminal()
    with Progress() as bars:
        result = validate(inputs.data, inputs.regimes, out=args.out, holdout=holdout,
                          holdout_all=bool(args.holdout_all), alpha=args.alpha,
                          min_shift=args.min_shift, max_condition_size=args.max_condition_size,
                          targets=args.targets, test=args.test,
                          collider_rule=args.collider_rule, class_samples=args.class_samples,
                          seed=args.seed, progress=bars, **inputs.options)
    result.print(console)
    files = result.run.get("files", {})
    console.print(f"results in {escape(str(Path(args.out)))}/: {', '.join(files)}")
    if result.run.get("report"):
        console.print(f"[bold]report:[/bold] {escape(str(Path(result.run['report']).resolve()))}")
    elif result.run.get("report_note"):
        console.print(escape(result.run["report_note"]))
    return 0
