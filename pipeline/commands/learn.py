"""``orienteer learn``: learn the interventional essential graph with per-edge evidence."""

from __future__ import annotations

import argparse
from pathlib import Path

from rich.console import Console
from rich.markup import escape
from rich.table import Table

from pipeline.commands.inputs import add_input_arguments, measurement_inputs
from pipeline.errors import InputError
from pipeline.evidence.formatting import format_p
from pipeline.evidence.result import LearnResult
from pipeline.progress import Progress
from pipeline.workflow import COLLIDER_RULES, STORE_NAME, TARGET_MODES, TESTS, learn

HELP = "learn the causal graph from control and perturbation experiments, with the evidence"

ENGINES = ("local", "dask")
#: Edges listed in the closing table; edges.csv and report.html have them all.
MAX_ROWS = 40


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
                        help="bootstrap resamples for edge stability (not available yet: 0)")
    parser.add_argument("--seed", type=int, default=None, metavar="S",
                        help="seed of the random number generator")
    parser.add_argument("--jobs", type=int, default=1, metavar="N",
                        help="parallel workers (1 for now)")
    parser.add_argument("--engine", default="local", metavar="|".join(ENGINES),
                        help="where to compute: local (default) or dask (not available yet)")
    parser.add_argument("--scheduler", metavar="ADDRESS",
                        help="address of a running Dask scheduler (with --engine dask)")
    parser.add_argument("--test", default="gaussian", metavar="|".join(TESTS),
                        help="gaussian (default) or rank (normal scores of pooled ranks)")
    parser.add_argument("--collider-rule", default="majority", metavar="|".join(COLLIDER_RULES),
                        help="how unshielded triples become colliders (default majority)")


def _check_unsupported(args: argparse.Namespace) -> None:
    """Options the contract names but this version cannot honour: refuse, don't ignore."""
    if args.bootstrap is not None and int(args.bootstrap) > 0:
        raise InputError(f"--bootstrap {args.bootstrap}: the bootstrap is not supported yet; "
                         f"leave it at 0")
    if args.bootstrap is not None and int(args.bootstrap) < 0:
        raise InputError(f"--bootstrap {args.bootstrap}: expected a whole number >= 0")
    if args.engine not in ENGINES:
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
    console = Console()
    with Progress() as bars:
        result = learn(inputs.data, inputs.regimes, out=args.out, alpha=args.alpha,
                       max_condition_size=args.max_condition_size, targets=args.targets,
                       test=args.test, collider_rule=args.collider_rule, seed=args.seed,
                       progress=bars, **inputs.options)
    print_result(result, console)
    print_files(Path(args.out), console)
    return 0


def print_result(result: LearnResult, console: Console) -> None:
    """The closing summary: counts, edge table, regimes, conflicts, warnings."""
    g = result.graph
    n_dir = sum(1 for _ in g.directed_edges())
    n_und = sum(1 for _ in g.undirected_edges())
    s = result.settings
    console.print(f"[bold]Learned graph[/bold]: {len(result.design.variables)} variables, "
                  f"{n_dir + n_und} edges ({n_dir} directed, {n_und} undirected); "
                  f"DAGs in the class: {result.class_size}; alpha = {s['alpha']:g}",
                  highlight=False)
    if not result.valid:
        console.print("[red]not a valid essential graph:[/red] "
                      + escape("; ".join(result.learned.problems)))
    edges = result.edge_records
    t = Table(title="Edges" + (f" (first {MAX_ROWS} of {len(edges)}; all in edges.csv)"
                               if len(edges) > MAX_ROWS else ""))
    for col in ("edge", "rule", "via", "p adjacency", "p orientation"):
        t.add_column(col, justify="right" if col.startswith("p ") else "left")
    for e in edges[:MAX_ROWS]:
        arrow = "->" if e.orientation == "directed" else "--"
        name = f"{e.source} {arrow} {e.target}" + (" [red](conflict)[/red]" if e.conflict else "")
        t.add_row(name if e.conflict else escape(name), escape(e.rule),
                  escape(", ".join(e.via) or "-"), _p(e.p_adjacency), _p(e.p_orientation))
    console.print(t)

    t = Table(title="Regimes: declared and detected targets")
    for col in ("regime", "samples", "declared", "known", "detected"):
        t.add_column(col, justify="right" if col == "samples" else "left")
    for r in result.design.regimes:
        detected = ("(reference)" if r.reference
                    else ";".join(result.learned.targets.get(r.name, ())) or "-")
        t.add_row(escape(r.name), str(r.samples), escape(";".join(r.targets) or "-"),
                  "yes" if r.known else "no", escape(detected))
    console.print(t)
    off = [f for f in result.learned.findings if f.status == "off-target"]
    for f in off:
        console.print(f"[yellow]off-target[/yellow]: {escape(f.regime)} acts on "
                      f"{escape(f.variable)} (p = {_p(f.pvalue)})", highlight=False)
    for c in result.learned.conflicts:
        console.print(f"[yellow]conflict[/yellow]: {escape(c.source)} -- {escape(c.target)} "
                      f"(colliders direct it both ways; left undirected)", highlight=False)
    levels = ", ".join(f"{k}: {v}" for k, v in sorted(result.learned.tests_per_level.items()))
    console.print(f"tests per conditioning-set size: {levels}", highlight=False)
    if result.run.get("computed") is not None:
        console.print(f"tests computed: {result.run['computed']}, reused from the store: "
                      f"{result.run.get('reused', 0)}"
                      + ("; statistics read from the store (no data file parsed)"
                         if result.run.get("from_store") else ""), highlight=False)
    if result.warnings:
        console.print("[bold yellow]Warnings[/bold yellow]")
        for w in result.warnings:
            console.print(f"[yellow]-[/yellow] {escape(w)}", highlight=False)


def print_files(out: Path, console: Console) -> None:
    console.print(f"results in {escape(str(out))}/: result.json, edges.csv, removed.csv, "
                  f"graph.graphml, report.html, {STORE_NAME}", highlight=False)
    console.print(f"[bold]report:[/bold] {escape(str((out / 'report.html').resolve()))}",
                  highlight=False)


def _p(v: float | None) -> str:
    return format_p(v)
