"""``orienteer simulate``: synthetic data from a random linear Gaussian SEM with interventions."""

from __future__ import annotations

import argparse

from pipeline.errors import InputError
from pipeline.options import SIMULATION_KINDS

HELP = "write synthetic control and perturbation data from a random linear Gaussian model"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--out", metavar="DIR",
                        help="folder for data.csv, regimes.csv, truth_dag.csv, truth_regimes.csv")
    parser.add_argument("--nodes", type=int, default=10, help="number of variables (default 10)")
    parser.add_argument("--degree", type=float, default=2.0,
                        help="expected number of neighbours per variable (default 2)")
    parser.add_argument("--perturbations", type=int, default=5, metavar="N",
                        help="number of interventional regimes (default 5)")
    # the contract's first name for it, kept working (every other --regimes is a file)
    parser.add_argument("--regimes", type=int, dest="perturbations", help=argparse.SUPPRESS)
    parser.add_argument("--targets-per-regime", type=int, default=1,
                        help="variables acted on per regime (default 1)")
    parser.add_argument("--samples", type=int, default=1000,
                        help="rows per regime, controls included (default 1000)")
    parser.add_argument("--kind", choices=SIMULATION_KINDS, default="knockdown",
                        help="kind of intervention (default knockdown)")
    parser.add_argument("--strength", type=float, default=1.0,
                        help="intervention strength, in observational standard deviations "
                             "(default 1)")
    parser.add_argument("--off-target", type=float, default=0.0, metavar="Q",
                        help="probability that an experiment also hits one extra, undeclared "
                             "variable (default 0)")
    parser.add_argument("--controls", type=int, default=1,
                        help="number of control regimes (default 1)")
    parser.add_argument("--seed", type=int, default=None, help="random seed (default: fresh)")


def run(args: argparse.Namespace) -> int:
    if not args.out:
        raise InputError("--out: missing; name the folder to write the simulated files into")
    from pipeline.simulation import simulate
    from pipeline.terminal import Table, Terminal, escape

    sim = simulate(nodes=args.nodes, degree=args.degree, regimes=args.perturbations,
                   targets_per_regime=args.targets_per_regime, samples=args.samples,
                   kind=args.kind, strength=args.strength, off_target=args.off_target,
                   seed=args.seed, controls=args.controls)
    paths = sim.save(args.out)
    console = Terminal()
    table = Table(title=f"simulated {len(sim.data)} rows, {args.nodes} variables, "
                        f"{sim.truth_dag.number_of_edges()} edges")
    table.add_column("regime")
    table.add_column("declared targets")
    table.add_column("actual targets")
    for (_, dec), (_, act) in zip(sim.regimes.iterrows(), sim.truth_regimes.iterrows(),
                                  strict=True):
        cells = [escape(dec["regime"]), escape(dec["targets"] or "(control)"),
                 escape(act["targets"] or "(control)")]
        if dec["targets"] != act["targets"]:  # an off-target action: shown in yellow
            cells = [f"[yellow]{c}[/yellow]" for c in cells]
        table.add_row(*cells)
    console.print(table)
    for path in paths.values():
        console.print(f"wrote {escape(str(path))}")
    return 0
