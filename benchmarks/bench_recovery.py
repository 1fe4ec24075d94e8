"""Benchmark: recovery of the interventional essential graph on outside data.

The data come from `tests/generator.py`, written apart from the package's simulator.
Every run learns with the public API (`pipeline.learn` on the written CSV files, alpha
0.01, declared targets) and is scored against the TRUE interventional essential graph
of the true DAG under the true targets: structural Hamming distance, adjacency and
orientation precision and recall.

Scenarios (p = 10, expected degree 4, weights uniform on +-[0.5, 1.5] with random signs,
one control plus 6 single-target regimes with distinct targets, 1000 rows per regime):

- A: Gaussian noise, kinds cycling do / shift / variance (the acceptance scenario);
- B: as A with centred exponential noise;
- C: as A with t3 noise;
- D: Gaussian, kinds cycling do-matched / variance (targets whose marginal mean, and for
  do-matched also sd, do not move: the "failed-target" cases);
- S: the sign-flip case (`sign_flip_case`, A -> B -> C plus A -> C, a control and
  do(B)): the share of runs that keep the edge A - C.

Besides the scores: the share of runs whose result is not a valid essential graph
(``result.valid`` False or class size 0), the declared targets the learner dropped
(the input check found they did not move) and the spurious off-target flags.

Run from the repository root::

    python benchmarks/bench_recovery.py                 # all scenarios, seeds 0..9
    python benchmarks/bench_recovery.py --scenario A --seeds 10
    python benchmarks/bench_recovery.py --quick         # 2 seeds, a smoke run
"""

from __future__ import annotations

import argparse
import datetime
import statistics
import sys
import tempfile
import time
from pathlib import Path
from types import SimpleNamespace

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))  # for `tests.generator`

from _common import load_average, machine, publish  # noqa: E402

from tests.generator import generate, sign_flip_case  # noqa: E402


def project() -> SimpleNamespace:
    """The project functions this benchmark uses, from wherever they live now.

    Modules are moving: the scoring functions may be in ``pipeline.analyses.scoring``
    (new) or ``pipeline.evidence.scoring`` (old). The new path is tried first.
    """
    try:
        from pipeline.analyses.scoring import score
    except ImportError:
        from pipeline.evidence.scoring import score
    from pipeline import learn
    from pipeline.graphs.essential import essential_graph

    return SimpleNamespace(learn=learn, score=score, essential_graph=essential_graph)


P, DEGREE, REGIMES, ROWS = 10, 4.0, 6, 1000
SCENARIOS = {
    "A": ("gaussian", ("do", "shift", "variance")),
    "B": ("exponential", ("do", "shift", "variance")),
    "C": ("t3", ("do", "shift", "variance")),
    "D": ("gaussian", ("do-matched", "variance")),
}
TITLES = {"A": "Gaussian, do/shift/variance", "B": "exponential, do/shift/variance",
          "C": "t3, do/shift/variance", "D": "Gaussian, do-matched/variance",
          "S": "sign-flip case, control + do(B)"}


def run_one(api: SimpleNamespace, g, work: Path, alpha: float) -> dict:
    """Learn from `g` written to `work` and score against the true essential graph."""
    paths = g.write(work)
    started = time.perf_counter()
    result = api.learn([paths["data"]], paths["regimes"], alpha=alpha)
    seconds = time.perf_counter() - started
    truth = api.essential_graph(g.dag, g.interventional_targets()).graph
    s = api.score(result.graph, truth)
    failed = result.check.failed_targets() if result.check is not None else {}
    off = sum("not a declared target" in w for w in result.warnings)
    valid = bool(result.valid) and int(result.class_size) > 0
    return {"shd": s.shd, "adj_p": s.adjacency_precision, "adj_r": s.adjacency_recall,
            "ori_p": s.orientation_precision, "ori_r": s.orientation_recall,
            "true_edges": s.true_edges, "invalid": not valid,
            "dropped": sum(len(v) for v in failed.values()), "offtarget": off,
            "declared": sum(len(s.declared_targets) for s in g.specs),
            "graph": result.graph, "seconds": seconds}


def _mean(values) -> float | None:
    vals = [v for v in values if v is not None]
    return statistics.fmean(vals) if vals else None


def _f(v: float | None, digits: int = 3) -> str:
    return "n/a" if v is None else f"{v:.{digits}f}"


def run_scenario(api, name: str, seeds: list[int], alpha: float) -> dict:
    runs = []
    with tempfile.TemporaryDirectory(prefix="orienteer-recovery-") as tmp:
        for seed in seeds:
            if name == "S":
                g = sign_flip_case(ROWS, seed=seed)
            else:
                noise, kinds = SCENARIOS[name]
                g = generate(P, DEGREE, n=ROWS, noise=noise, n_regimes=REGIMES, kinds=kinds,
                             seed=seed)
            runs.append(run_one(api, g, Path(tmp) / f"{name}{seed}", alpha))
    out = {"name": name, "runs": len(runs),
           "shd_mean": _mean(r["shd"] for r in runs),
           "shd_median": statistics.median(r["shd"] for r in runs),
           "adj_p": _mean(r["adj_p"] for r in runs), "adj_r": _mean(r["adj_r"] for r in runs),
           "ori_p": _mean(r["ori_p"] for r in runs), "ori_r": _mean(r["ori_r"] for r in runs),
           "true_edges": _mean(r["true_edges"] for r in runs),
           "invalid": sum(r["invalid"] for r in runs) / len(runs),
           "dropped": sum(r["dropped"] for r in runs),
           "declared": sum(r["declared"] for r in runs),
           "offtarget": sum(r["offtarget"] for r in runs),
           "seconds": _mean(r["seconds"] for r in runs)}
    if name == "S":
        out["kept"] = sum(r["graph"].skeleton().has_edge("A", "C") for r in runs)
    return out


def table(rows: list[dict]) -> list[str]:
    lines = ["| scenario | runs | mean SHD | median SHD | true edges | adj. precision "
             "| adj. recall | orient. precision | orient. recall | invalid share "
             "| targets dropped | off-target flags | s/run |",
             "|---|---|---|---|---|---|---|---|---|---|---|---|---|"]
    for r in rows:
        lines.append(
            f"| {r['name']}: {TITLES[r['name']]} | {r['runs']} | {r['shd_mean']:.2f} "
            f"| {r['shd_median']:g} | {r['true_edges']:.1f} | {_f(r['adj_p'])} "
            f"| {_f(r['adj_r'])} | {_f(r['ori_p'])} | {_f(r['ori_r'])} | {r['invalid']:.2f} "
            f"| {r['dropped']} / {r['declared']} | {r['offtarget']} | {r['seconds']:.2f} |")
    return lines


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, default=10, help="seeds 0..N-1 (default 10)")
    parser.add_argument("--scenario", nargs="+", choices=[*SCENARIOS, "S"],
                        default=[*SCENARIOS, "S"])
    parser.add_argument("--alpha", type=float, default=0.01)
    parser.add_argument("--quick", action="store_true", help="2 seeds: a smoke run")
    parser.add_argument("--no-append", action="store_true", help="print only")
    args = parser.parse_args(argv)
    seeds = list(range(2 if args.quick else args.seeds))
    load = load_average()
    api = project()
    rows = []
    for name in args.scenario:
        rows.append(run_scenario(api, name, seeds, args.alpha))
        print(f"scenario {name} done", file=sys.stderr)
    when = datetime.datetime.now().strftime("%Y-%m-%d %H:%M")
    command = " ".join(["python benchmarks/bench_recovery.py", *sys.argv[1:]])
    notes = []
    for r in rows:
        if r["name"] == "S":
            notes.append(f"- sign-flip case: the edge A - C kept in {r['kept']} of {r['runs']} "
                         f"runs")
    block = [
        f"## bench_recovery: essential graph recovery on outside data ({when})",
        "",
        f"- machine: {machine('numpy')}; load average at start: {load}",
        f"- command: `{command}`",
        f"- data: tests/generator.py; p = {P}, expected degree {DEGREE:g}, weights "
        f"+-[0.5, 1.5] mixed signs, control + {REGIMES} single-target regimes (distinct "
        f"targets), {ROWS} rows per regime; seeds {seeds[0]}..{seeds[-1]}; learn with alpha "
        f"{args.alpha:g}, declared targets; scored against the true interventional essential "
        f"graph under the true targets (precision/recall: mean over runs where defined)",
        "",
        *table(rows),
        "",
        *notes,
    ]
    text = "\n".join(block)
    publish(text, append=not args.no_append)
    return 0


if __name__ == "__main__":
    sys.exit(main())
