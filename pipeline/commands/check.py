"""``orienteer check``: validate the inputs and check the perturbations before learning."""

from __future__ import annotations

import argparse
import sys

from pipeline.commands.inputs import add_input_arguments, measurement_inputs
from pipeline.options import TESTS

HELP = "check the inputs and whether each perturbation moved its targets, before learning"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_input_arguments(parser)
    parser.add_argument("--out", metavar="DIR", help="also write check.json and response.csv here")
    parser.add_argument("--alpha", type=float, default=0.01,
                        help="level of the target, response and control tests (default 0.01)")
    parser.add_argument("--test", default="gaussian", metavar="|".join(TESTS),
                        help="gaussian (default) or rank (within-regime ranks)")


def run(args: argparse.Namespace) -> int:
    inputs = measurement_inputs(args)
    from pipeline.analyses.check import check
    from pipeline.terminal import Terminal, escape

    result = check(inputs.data, inputs.regimes, alpha=args.alpha, test=args.test,
                   progress=sys.stderr.isatty(), **inputs.options)
    console = Terminal()
    result.print(console)
    if args.out:
        for path in result.write(args.out).values():
            console.print(f"wrote {escape(str(path))}")
    return 0
