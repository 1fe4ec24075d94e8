"""Which perturbation next: rank candidate experiments on a result's class and plan M of them.

Reads a ``result.json`` of ``learn`` or ``identify``, takes its graph as the current
essential graph (edges that the learner flagged as collider conflicts count as open:
undirected), and scores every experiment of at most K candidate targets by what it
would orient, averaged over the DAGs of the class (`pipeline.graphs.planning`). The
graph alone fixes the class and what a new experiment adds, so the current targets
(``detected_targets`` of a learned result, ``targets`` of an identify result) are only
reported. A graph that is not a valid essential graph after the conflicts are opened is
refused: the class it should describe is not defined.

>>> from pipeline.results.schema import EdgeRecord, RegimeRecord, ResultRecord
>>> rec = ResultRecord(nodes=["A", "B", "C"], regimes=[RegimeRecord("ctrl", [], reference=True)],
...                    edges=[EdgeRecord("A", "B", "undirected"),
...                           EdgeRecord("B", "C", "undirected")], class_size=3)
>>> res = plan(rec, seed=1)
>>> res.plan[0].targets, res.plan[0].expected_oriented
(('B',), 2.0)
"""

from __future__ import annotations

import random
from collections.abc import Iterable
from pathlib import Path

from pipeline.errors import InputError, nearest_names
from pipeline.graphs.pdag import PDAG
from pipeline.graphs.planning import plan_experiments
from pipeline.graphs.validity import essential_graph_problems
from pipeline.results.plan import PlannedStep, PlanResult, RankedExperiment
from pipeline.results.schema import ResultRecord

__all__ = ["plan", "PlanResult"]

#: Default number of DAGs drawn per component whose exact outcome tree is too large.
SAMPLES = 200
#: Default ranking rows kept in plan.json and the report (0: all).
TOP = 50


def plan(result: str | Path | ResultRecord, candidates: str | Iterable[str] | None = None,
         max_targets: int = 1, experiments: int = 1, samples: int = SAMPLES,
         seed: int | None = None, top: int = TOP) -> PlanResult:
    """Rank the next experiments on the class of `result` and plan `experiments` of them.

    Parameters
    ----------
    result : path or ResultRecord
        A ``result.json`` of ``learn`` or ``identify`` (or the folder holding it).
    candidates : str or iterable of str, optional
        Variables that can be acted on: names, a comma list ``"A,B,C"`` or the path of a
        file with one name per line. Default: every variable with an undirected edge.
    max_targets : int
        Most variables one experiment acts on (K).
    experiments : int
        Experiments in the plan (M).
    samples : int
        DAGs drawn per chain component whose outcomes are too many to list exactly.
    seed : int, optional
        Seed of the draws; default: drawn and recorded in the settings.
    top : int
        Ranking rows kept (0: all).

    Returns
    -------
    PlanResult

    Raises
    ------
    InputError
        If `result` is not a result file, its graph is not a valid essential graph, a
        candidate is not a variable, or an option is out of range.
    """
    record, where = _load(result)
    max_targets = _positive("max_targets", max_targets, "--max-targets K")
    experiments = _positive("experiments", experiments, "--experiments M")
    samples = _positive("samples", samples, "--samples N", least=2)
    top = _positive("top", top, "--top N", least=0)
    if seed is None:
        seed = random.SystemRandom().randrange(2**31)
    elif not isinstance(seed, int) or isinstance(seed, bool):
        raise InputError(f"seed: got {seed!r}; expected a whole number (--seed S)")
    g, opened = _graph(record)
    problems = essential_graph_problems(g)
    if problems:
        raise InputError(f"{where}: the graph is not a valid essential graph"
                         f"{' after opening the conflict edges' if opened else ''}, so it "
                         f"describes no class of DAGs to plan on: {' '.join(problems[:3])} "
                         "Learn again (another --alpha or --collider-rule) to get a valid "
                         "graph.")
    names = _candidates(candidates, record.nodes)
    try:
        core = plan_experiments(g, names, max_targets, experiments, samples=samples, seed=seed)
    except ValueError as exc:
        raise InputError(f"candidates: {exc}") from None
    ranking = [_ranked(s) for s in (core.ranking if top == 0 else core.ranking[:top])]
    steps, total = [], 0.0
    for st in core.steps:
        s = st.score
        total += s.expected_oriented
        steps.append(PlannedStep(step=st.step, targets=tuple(map(str, s.targets)),
                                 expected_oriented=s.expected_oriented,
                                 cumulative_oriented=total,
                                 expected_class_size=s.expected_class_size,
                                 worst_class_size=s.worst_class_size,
                                 p_identified=s.p_identified,
                                 se_oriented=None if s.exact else s.se_oriented,
                                 exact=s.exact))
    notes = list(core.notes)
    if core.open_edges == 0:
        notes.append("every edge is already directed: the class holds one DAG")
    if opened:
        notes.append(f"{len(opened)} edge(s) that the learner flagged as collider conflicts "
                     "are counted as open (undirected)")
    b = core.bounds
    settings = {"max_targets": max_targets, "experiments": experiments, "samples": samples,
                "seed": seed, "top": top,
                "candidates": list(names) if names is not None else "every variable with an "
                                                                    "undirected edge"}
    return PlanResult(
        result=where, ranking=ranking, plan=steps,
        lower_bound_experiments=b.with_max_targets if max_targets > 1 else b.single_target,
        lower_bounds={"single_target": b.single_target, "multi_target": b.multi_target,
                      "with_max_targets": b.with_max_targets,
                      "largest_clique": b.largest_clique},
        method=core.method, exact=core.exact, nodes=len(record.nodes),
        edges=len(record.edges), open_edges=core.open_edges, class_size=core.class_size,
        experiments_scored=core.experiments_scored, conflicts_opened=opened,
        current_targets=_current_targets(record), notes=notes, settings=settings)


def _ranked(s) -> RankedExperiment:
    return RankedExperiment(
        targets=tuple(map(str, s.targets)), expected_oriented=s.expected_oriented,
        expected_class_size=s.expected_class_size, worst_class_size=s.worst_class_size,
        p_identified=s.p_identified, worst_oriented=s.worst_oriented,
        se_oriented=None if s.exact else s.se_oriented,
        se_class_size=None if s.exact else s.se_class_size,
        se_identified=None if s.exact else s.se_identified, exact=s.exact)


def _load(result) -> tuple[ResultRecord, str | None]:
    if isinstance(result, ResultRecord):
        return result, None
    if not isinstance(result, (str, Path)):
        raise InputError(f"result: got {type(result).__name__}; expected the path of a "
                         "result.json (or a ResultRecord)")
    path = Path(result)
    if path.is_dir():
        path = path / "result.json"
    return ResultRecord.read(path), str(path)


def _graph(record: ResultRecord) -> tuple[PDAG, list[tuple[str, str]]]:
    """The result's graph with the conflict edges undirected, and those edges."""
    g = PDAG(record.nodes)
    opened = []
    for e in record.edges:
        if e.orientation == "directed" and not e.conflict:
            g.add_directed(e.source, e.target)
        else:
            g.add_undirected(e.source, e.target)
        if e.conflict:
            opened.append((e.source, e.target))
    return g, opened


def _candidates(candidates, nodes: list[str]) -> list[str] | None:
    if candidates is None:
        return None
    where = "candidates"
    if isinstance(candidates, (str, Path)):
        text = str(candidates)
        path = Path(text)
        if path.is_file():
            where = f"candidates file {path}"
            try:
                lines = path.read_text(encoding="utf-8-sig").splitlines()
            except (OSError, UnicodeDecodeError) as exc:
                raise InputError(f"{where}: cannot be read ({exc})") from None
            names = [ln.strip() for ln in lines if ln.strip() and not ln.strip().startswith("#")]
        else:
            names = [n.strip() for n in text.split(",") if n.strip()]
    else:
        names = [str(n).strip() for n in candidates]
    if not names:
        raise InputError(f"{where}: no names given; list variables (A,B,C) or a file with "
                         "one name per line, or leave it out to consider every variable")
    known = set(nodes)
    for n in names:
        if n not in known:
            raise InputError(f"{where}: '{n}' is not a variable of the result"
                             f"{nearest_names(n, nodes)}")
    return list(dict.fromkeys(names))


def _positive(name: str, value, option: str, least: int = 1) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < least:
        raise InputError(f"{name}: got {value!r}; expected a whole number of at least "
                         f"{least} ({option})")
    return value


def _current_targets(record: ResultRecord) -> dict[str, list[str]]:
    """Per non-reference regime, the targets its intervention node points at now."""
    learned = record.settings.get("command") != "identify"
    ref: set[str] = set()
    for r in record.regimes:
        if r.reference:
            ref.update(r.targets)
    out = {}
    for r in record.regimes:
        if r.reference:
            continue
        out[r.name] = sorted(r.detected_targets if learned else set(r.targets) ^ ref)
    return out
