"""``orienteer check``: validate the inputs and check the perturbations before learning."""

from __future__ import annotations

import argparse
import math
import sys

from rich import box
from rich.console import Console
from rich.markup import escape
from rich.table import Table

from pipeline.commands.inputs import add_input_arguments, measurement_inputs
from pipeline.evidence.check import MOVED, CheckResult, check
from pipeline.evidence.formatting import format_p

HELP = "check the inputs and whether each perturbation moved its targets, before learning"

#: Response-matrix columns shown in the terminal; response.csv has them all.
MAX_COLUMNS = 60


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_input_arguments(parser)
    parser.add_argument("--out", metavar="DIR", help="also write check.json and response.csv here")
    parser.add_argument("--alpha", type=float, default=0.01,
                        help="level of the target, response and control tests (default 0.01)")


def run(args: argparse.Namespace) -> int:
    inputs = measurement_inputs(args)
    result = check(inputs.data, inputs.regimes, alpha=float(args.alpha),
                   progress=sys.stderr.isatty(), **inputs.options)
    print_result(result, Console())
    if args.out:
        for path in result.write(args.out).values():
            Console().print(f"wrote {path}")
    return 0


def print_result(result: CheckResult, console: Console) -> None:
    """Print the check as rich tables (plain text when stdout is not a terminal)."""
    d = result.design
    console.print(f"[bold]Input check[/bold]: {sum(result.samples.values())} samples, "
                  f"{len(d.variables)} variables, {len(d.regimes)} regimes; alpha = "
                  f"{result.alpha:g}")
    if result.dropped_rows:
        console.print(f"{result.dropped_rows} rows with missing values dropped")

    t = Table(title="Samples per regime")
    for col in ("regime", "samples", "targets", "known", "role"):
        t.add_column(col, justify="right" if col == "samples" else "left")
    for r in d.regimes:
        t.add_row(r.name, str(result.samples.get(r.name, 0)), ";".join(r.targets) or "-",
                  "yes" if r.known else "no", "reference" if r.reference else "intervention")
    console.print(t)

    if result.targets:
        t = Table(title="Declared targets: did the intervention move them?")
        for col in ("regime", "target", "shift (sd)", "p-value", "verdict"):
            t.add_column(col, justify="right" if col in ("shift (sd)", "p-value") else "left")
        for c in result.targets:
            colour = "green" if c.verdict == MOVED else ("red" if c.known else "yellow")
            name = c.target if c.known else f"{c.target} (hint)"
            t.add_row(c.regime, name, _fmt(c.shift), format_p(c.pvalue),
                      f"[{colour}]{c.verdict}[/{colour}]")
        console.print(t)

    _print_response(result, console)

    if result.controls is None:
        console.print("Control batches: one control regime, nothing to compare")
    else:
        c = result.controls
        t = Table(title="Control batches: each against the pooled others "
                        "(Bonferroni over variables)")
        for col in ("control", "samples", "smallest adjusted p", "differs in"):
            t.add_column(col)
        differing = c.differing
        for i, name in enumerate(c.regimes):
            bad = differing[name]
            t.add_row(name, str(result.samples.get(name, 0)), format_p(float(c.adjusted[i].min())),
                      f"[red]{', '.join(bad)}[/red]" if bad else "[green]-[/green]")
        console.print(t)
        verdict = "[green]agree[/green]" if c.agree else "[red]differ[/red]"
        console.print(f"Control batches {verdict}")

    if result.warnings:
        console.print("[bold yellow]Warnings[/bold yellow]")
        for w in result.warnings:
            console.print(f"[yellow]-[/yellow] {escape(w)}", highlight=False)
    else:
        console.print("No warnings.")


def _print_response(result: CheckResult, console: Console) -> None:
    """The response matrix, split into column blocks that fit the console width."""
    resp = result.response
    names = list(resp.variables[:MAX_COLUMNS])
    title = ("Response matrix: standardized shift against the reference "
             f"(* p <= {result.alpha:g})")
    if len(resp.variables) > MAX_COLUMNS:
        title += f"; first {MAX_COLUMNS} of {len(resp.variables)} variables (all in response.csv)"
    console.print(title)
    first = max([len("regime")] + [len(r) for r in resp.regimes])
    widths = [max(len(v), 5) for v in names]
    room = max(console.width - first - 2, 8)
    blocks, block, used = [], [], 0
    for j, w in enumerate(widths):
        if block and used + w + 3 > room:
            blocks.append(block)
            block, used = [], 0
        block.append(j)
        used += w + 3
    if block:
        blocks.append(block)
    for block in blocks:
        t = Table(box=box.SIMPLE_HEAD, padding=(0, 1), pad_edge=False)
        t.add_column("regime", no_wrap=True, min_width=first)
        for j in block:
            t.add_column(names[j], justify="right", no_wrap=True, min_width=widths[j])
        for i, name in enumerate(resp.regimes):
            cells = []
            for j in block:
                s, p = resp.shift[i, j], resp.pvalue[i, j]
                if p <= result.alpha:
                    colour = "blue" if s < 0 else "red"
                    cells.append(f"[{colour}]{_short(s)}*[/{colour}]")
                else:
                    cells.append(f"[dim]{_short(s)} [/dim]")
            t.add_row(name, *cells)
        console.print(t)


def _short(x: float) -> str:
    if not math.isfinite(x):
        return "inf" if x > 0 else ("-inf" if x < 0 else "nan")
    return f"{x:+.1f}" if abs(x) < 100 else f"{x:+.0e}"


def _fmt(x: float) -> str:
    if not math.isfinite(x):
        return "inf" if x > 0 else ("-inf" if x < 0 else "nan")
    return f"{x:+.2f}"
