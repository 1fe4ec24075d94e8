"""Experiment planning: which variables to act on next to orient what is still undirected.

Given an (interventional) essential graph G, every DAG of its class is taken as equally
likely (the uniform distribution on the class, the usual assumption when nothing favours
one DAG [2]_). An *experiment* acts on a set T of at most K variables. Its score is
computed over the class: the expected and the worst-case number of edges it newly
orients, the expected and the worst-case number of DAGs left (the class size of the
essential graph after it), and the chance that it leaves a single DAG. Chain components
are independent under the uniform distribution and an experiment acts on each one
separately (`pipeline.graphs.outcomes`), so the scores are combined from exact outcome
distributions per component (sums of expectations, products of class sizes); a
component too large for the exact tree is scored on uniform draws, with standard
errors. The graph's current targets need not be known: G alone fixes the class and what
a new experiment can add.

A *plan* of M experiments is fixed before any result comes in. The greedy plan adds, at
each step, the experiment with the largest expected number of newly oriented edges given
the experiments already chosen (the expectation over the class and over the outcomes of
the earlier steps); ties go to the smaller expected class size, then to fewer targets.
When every distribution is exact and the number of M-sets of experiments is small, the
best M-set is found by trying them all.

Lower bounds (the worst case over the class, to orient everything). An AMO may start
with any maximal clique Q of a chain component, and then only experiments that separate
two vertices of Q (act on exactly one of them) can orient the edge between them [1]_,
[3]_. So a component whose largest clique has w vertices needs w - 1 single-target
experiments; since a single target lies in one component, single-target plans need the
sum of w - 1 over components [1]_. Experiments with any number of targets need
ceil(log2 w) (a separating system of a w-set), the largest over components [1]_, [3]_;
with at most K targets each, also ceil(sum(w - 1) / K), since at least w - 1 vertices of
each largest clique must be acted on. Conversely p - 1 single-target experiments always
identify a DAG on p variables [1]_.

>>> from pipeline.graphs.pdag import PDAG
>>> g = PDAG(["A", "B", "C"]); g.add_undirected("A", "B"); g.add_undirected("B", "C")
>>> p = plan_experiments(g)
>>> p.ranking[0].targets, p.ranking[0].expected_oriented, p.ranking[0].p_identified
(('B',), 2.0, 1.0)

References
----------
1. F. Eberhardt, C. Glymour, R. Scheines (2005). On the number of experiments sufficient
   and in the worst case necessary to identify all causal relations among N variables.
   UAI, 178-184.
2. A. Hauser, P. Buhlmann (2014). Two optimal strategies for active learning of causal
   models from interventional data. International Journal of Approximate Reasoning 55,
   926-939.
3. A. Hauser, P. Buhlmann (2012). Characterization and greedy learning of interventional
   Markov equivalence classes of directed acyclic graphs. JMLR 13, 2409-2464.
"""

from __future__ import annotations

import itertools
import math
import random
from collections.abc import Hashable, Iterable, Sequence
from dataclasses import field

from pipeline.graphs.counting import AMOCounter, chain_components, clique_tree
from pipeline.graphs.outcomes import ComponentOutcomes
from pipeline.graphs.pdag import PDAG
from pipeline.graphs.validity import essential_graph_problems
from pipeline.records import record

__all__ = ["ExperimentScore", "PlanStep", "Plan", "LowerBounds", "Planner",
           "candidate_experiments", "plan_experiments"]

Node = Hashable

#: Most M-sets of experiments tried for an exact plan.
EXACT_SETS = 2000
#: Most outcome states kept per component between plan steps (then drawn).
MAX_STATES = 2000


@record(frozen=True)
class ExperimentScore:
    """The score of one experiment (its targets), given the experiments before it.

    ``expected_oriented`` and ``worst_oriented`` count edges it newly orients;
    ``expected_class_size``, ``worst_class_size`` and ``p_identified`` describe the class
    left after it (and the experiments before it). The ``se_*`` are standard errors (0
    when ``exact``); with draws the worst cases are the worst among them.
    """

    targets: tuple
    expected_oriented: float
    expected_class_size: float
    worst_class_size: int
    p_identified: float
    worst_oriented: int
    se_oriented: float = 0.0
    se_class_size: float = 0.0
    se_identified: float = 0.0
    exact: bool = True

    def sort_key(self) -> tuple:
        return (-self.expected_oriented, self.expected_class_size, len(self.targets))


@record(frozen=True)
class PlanStep:
    """One experiment of a plan, scored given the steps before it."""

    step: int
    score: ExperimentScore

    @property
    def targets(self) -> tuple:
        return self.score.targets


@record(frozen=True)
class LowerBounds:
    """Experiments needed in the worst case to orient every edge (see the module text)."""

    largest_clique: int
    single_target: int
    multi_target: int
    with_max_targets: int


@record
class Plan:
    """Ranking of next experiments, the plan of M steps and the lower bounds."""

    ranking: list[ExperimentScore]
    steps: list[PlanStep]
    method: str  # "exact" or "greedy"
    bounds: LowerBounds
    open_edges: int
    class_size: int
    candidates: list
    experiments_scored: int
    exact: bool
    notes: list[str] = field(default_factory=list)



@record
class _States:
    """A component's possible states after the chosen experiments: (probability, pieces).

    `draws` is 0 when the probabilities are exact, else the number of draws behind them.
    """

    items: list[tuple[float, tuple[frozenset, ...]]]
    exact: bool = True
    draws: int = 0


@record
class _Part:
    """One component's share of a score (means, standard errors, worst cases)."""

    gain: float
    se_gain: float
    size: float
    se_size: float
    worst_size: int
    worst_gain: int
    p_identified: float
    se_identified: float
    exact: bool


class Planner:
    """Scores experiments on the class of the essential graph `g`.

    Parameters
    ----------
    g : PDAG
        A valid essential graph (`pipeline.graphs.validity`).
    samples : int
        Uniform draws per component whose exact outcome tree is too large.
    seed : int
        Seed of the draws.
    budget : int
        Most Meek closures spent on one exact outcome distribution.

    Raises
    ------
    ValueError
        If `g` is not a valid essential graph or `samples` is below 2.
    """

    def __init__(self, g: PDAG, *, samples: int = 200, seed: int = 0,
                 budget: int = 3000) -> None:
        if not isinstance(g, PDAG):
            raise TypeError(f"g should be a PDAG, got {type(g).__name__}")
        if not isinstance(samples, int) or samples < 2:
            raise ValueError(f"samples should be an integer of at least 2, got {samples!r}")
        problems = essential_graph_problems(g)
        if problems:
            raise ValueError("g is not a valid essential graph: " + " ".join(problems))
        self.graph = g
        self.components: list[ComponentOutcomes] = []
        self.where: dict[Node, tuple[int, int]] = {}
        for comp in chain_components(g):
            if len(comp) < 2:
                continue
            ci = len(self.components)
            counter = AMOCounter.of_component(g, comp)
            self.components.append(ComponentOutcomes(counter, samples=samples,
                                                     seed=derived_seed(seed, ci), budget=budget))
            self.where.update((n, (ci, i)) for i, n in enumerate(comp))
        self.rng = random.Random(derived_seed(seed, -1))

    # -- states -----------------------------------------------------------------------
    def initial(self) -> dict[int, _States]:
        """Every component as it is now (nothing acted on yet)."""
        return {ci: _States([(1.0, (frozenset(range(len(c.adj))),))])
                for ci, c in enumerate(self.components)}

    def split(self, targets: Iterable[Node]) -> dict[int, frozenset]:
        """The targets per component they fall in (as component vertex numbers)."""
        out: dict[int, set[int]] = {}
        for t in targets:
            if t in self.where:
                ci, v = self.where[t]
                out.setdefault(ci, set()).add(v)
        return {ci: frozenset(vs) for ci, vs in out.items()}

    def apply(self, states: dict[int, _States], targets: Iterable[Node]) -> dict[int, _States]:
        """The states after one more experiment acting on `targets`."""
        new = dict(states)
        for ci, acted in self.split(targets).items():
            new[ci] = self._apply_one(ci, states[ci], acted)
        return new

    def _apply_one(self, ci: int, st: _States, acted: frozenset) -> _States:
        comp = self.components[ci]
        merged: dict[tuple, float] = {}
        exact, draws = st.exact, st.draws
        for p, pieces in st.items:
            choices = []
            for piece in pieces:
                a = acted & piece
                if a and a != piece:
                    dist = comp.distribution(piece, a)
                    if not dist.exact:
                        exact, draws = False, max(draws, dist.samples)
                    choices.append([(o.prob, o.pieces) for o in dist.outcomes])
                else:
                    choices.append([(1.0, (piece,))])
            for combo in itertools.product(*choices):
                q = p
                out: list[frozenset] = []
                for prob, ps in combo:
                    q *= prob
                    out.extend(ps)
                key = tuple(sorted(out, key=min))
                merged[key] = merged.get(key, 0.0) + q
        items = [(q, k) for k, q in merged.items()]
        if len(items) > MAX_STATES:  # keep a draw of the states, by probability
            drawn = self.rng.choices(range(len(items)), [q for q, _ in items], k=MAX_STATES)
            counts: dict[int, int] = {}
            for i in drawn:
                counts[i] = counts.get(i, 0) + 1
            items = [(m / MAX_STATES, items[i][1]) for i, m in sorted(counts.items())]
            exact, draws = False, MAX_STATES
        return _States(items, exact, draws)

    def oriented(self, states: dict[int, _States]) -> float:
        """Expected number of edges of the components directed in `states`."""
        total = 0.0
        for ci, st in states.items():
            comp = self.components[ci]
            edges = comp.edges(frozenset(range(len(comp.adj))))
            total += sum(p * (edges - sum(comp.edges(x) for x in pieces))
                         for p, pieces in st.items)
        return total

    # -- scores -----------------------------------------------------------------------
    def part(self, ci: int, st: _States, acted: frozenset | None) -> _Part:
        """Component `ci`'s share of the score of acting on `acted` (None: nothing)."""
        comp = self.components[ci]
        exact = st.exact
        rows = []
        for p, pieces in st.items:
            gain = se_gain = 0.0
            size, rel_size, worst_size, worst_gain = 1.0, 0.0, 1, 0
            pid, rel_pid = 1.0, 0.0
            for piece in pieces:
                a = acted & piece if acted else frozenset()
                if a and a != piece:
                    d = comp.distribution(piece, a)
                    exact = exact and d.exact
                    gain += d.mean_oriented
                    se_gain += d.se_oriented
                    size *= d.mean_size
                    rel_size += d.se_size / d.mean_size
                    worst_size *= d.worst_size
                    worst_gain += d.worst_oriented
                    pid *= d.p_identified
                    rel_pid += d.se_identified / d.p_identified if d.p_identified else 0.0
                else:
                    n = comp.size(piece)
                    size *= n
                    worst_size *= n
                    pid = 0.0
            rows.append((p, gain, se_gain, size, size * rel_size, worst_size, worst_gain,
                         pid, pid * rel_pid))
        mean = [sum(r[0] * r[k] for r in rows) for k in range(1, 9)]
        if st.draws:  # the states are draws: add the spread of the means between them
            for k in (0, 2, 6):  # gain, size, identified; their errors sit at k + 1
                var = sum(r[0] * (r[k + 1] - mean[k]) ** 2 for r in rows)
                mean[k + 1] += math.sqrt(var / max(st.draws - 1, 1))
        return _Part(gain=mean[0], se_gain=mean[1], size=mean[2], se_size=mean[3],
                     worst_size=max(r[5] for r in rows), worst_gain=min(r[6] for r in rows),
                     p_identified=mean[6], se_identified=mean[7], exact=exact)

    def score(self, targets: Sequence[Node], states: dict[int, _States] | None = None,
              base: dict[int, _Part] | None = None) -> ExperimentScore:
        """Score the experiment acting on `targets`, after the experiments of `states`.

        `base` may hold each component's untouched share (`part` with None), to reuse.
        """
        if states is None:
            states = self.initial()
        split = self.split(targets)
        parts = []
        for ci, st in states.items():
            if ci in split:
                parts.append(self.part(ci, st, split[ci]))
            elif base is not None:
                parts.append(base[ci])
            else:
                parts.append(self.part(ci, st, None))
        return _combine(tuple(targets), parts)

    def rank(self, experiments: Sequence[Sequence[Node]],
             states: dict[int, _States] | None = None) -> list[ExperimentScore]:
        """Score every experiment after the experiments of `states`; best first."""
        if states is None:
            states = self.initial()
        base = {ci: self.part(ci, st, None) for ci, st in states.items()}
        scores = [self.score(t, states, base) for t in experiments]
        order = sorted(range(len(scores)), key=lambda i: (*scores[i].sort_key(), i))
        return [scores[i] for i in order]

    # -- bounds -----------------------------------------------------------------------
    def bounds(self, max_targets: int = 1) -> LowerBounds:
        """Lower bounds on the experiments needed in the worst case (module text)."""
        ws = []
        for comp in self.components:
            cliques, _ = clique_tree(comp.adj, frozenset(range(len(comp.adj))))
            ws.append(max(len(q) for q in cliques))
        single = sum(w - 1 for w in ws)
        multi = max((math.ceil(math.log2(w)) for w in ws), default=0)
        return LowerBounds(largest_clique=max(ws, default=1), single_target=single,
                           multi_target=multi,
                           with_max_targets=max(multi, math.ceil(single / max_targets)))


def _combine(targets: tuple, parts: list[_Part]) -> ExperimentScore:
    """Components are independent: gains add, class sizes and chances multiply."""
    size, rel_size, worst, pid, rel_pid = 1.0, 0.0, 1, 1.0, 0.0
    for p in parts:
        size *= p.size
        rel_size += p.se_size / p.size
        worst *= p.worst_size
        pid *= p.p_identified
        rel_pid += p.se_identified / p.p_identified if p.p_identified else 0.0
    return ExperimentScore(
        targets=targets, expected_oriented=sum(p.gain for p in parts),
        expected_class_size=size, worst_class_size=worst, p_identified=pid,
        worst_oriented=sum(p.worst_gain for p in parts),
        se_oriented=sum(p.se_gain for p in parts), se_class_size=size * rel_size,
        se_identified=pid * rel_pid, exact=all(p.exact for p in parts))


def derived_seed(seed: int, k: int) -> int:
    """A seed for part `k` derived from `seed` (the same on every run and platform)."""
    return random.Random(f"{seed}/{k}").randrange(2**32)


def candidate_experiments(g: PDAG, candidates: Sequence[Node], max_targets: int) -> list[tuple]:
    """Experiments of 1..`max_targets` candidates, each set once, in candidate order.

    Sets of two or more keep only candidates with an undirected edge (the others add
    nothing to any experiment).
    """
    useful = [c for c in candidates if g.neighbors(c)]
    out = [(c,) for c in candidates]
    for k in range(2, max_targets + 1):
        out.extend(itertools.combinations(useful, k))
    return out


def plan_experiments(g: PDAG, candidates: Sequence[Node] | None = None, max_targets: int = 1,
                     experiments: int = 1, *, samples: int = 200, seed: int = 0,
                     budget: int = 3000, max_experiments: int = 50_000) -> Plan:
    """Rank the next experiments on the class of `g` and plan `experiments` of them.

    Parameters
    ----------
    g : PDAG
        A valid essential graph.
    candidates : sequence of nodes, optional
        Variables that can be acted on; default: every node with an undirected edge.
    max_targets : int
        Most variables acted on by one experiment (K).
    experiments : int
        Experiments in the plan (M).
    samples, seed, budget
        See `Planner`.
    max_experiments : int
        Most candidate experiments scored; more is an error (name fewer candidates).

    Returns
    -------
    Plan
        The ranking (every candidate experiment, best first), the plan, the bounds.

    Raises
    ------
    ValueError
        If `g` is not a valid essential graph, a candidate is not a node of `g`, `K` or
        `M` is below 1, or there are more than `max_experiments` candidate experiments.
    """
    for name, value in (("max_targets", max_targets), ("experiments", experiments)):
        if not isinstance(value, int) or isinstance(value, bool) or value < 1:
            raise ValueError(f"{name} should be a positive integer, got {value!r}")
    if candidates is None:
        candidates = [n for n in g.nodes if g.neighbors(n)]
    candidates = list(dict.fromkeys(candidates))
    missing = [c for c in candidates if c not in g]
    if missing:
        raise ValueError(f"candidates {missing!r} are not nodes of g")
    exps = candidate_experiments(g, candidates, max_targets)
    if len(exps) > max_experiments:
        raise ValueError(f"{len(exps):,} candidate experiments (sets of up to {max_targets} "
                         f"of {len(candidates)} candidates) exceed {max_experiments:,}; "
                         "name fewer candidates or fewer targets per experiment")
    planner = Planner(g, samples=samples, seed=seed, budget=budget)
    start = planner.initial()
    ranking = planner.rank(exps, start)
    notes: list[str] = []
    steps = _steps(planner, exps, experiments, start, ranking, None, notes)
    method = "greedy"
    if (1 < experiments <= len(exps) and all(s.exact for s in ranking)
            and math.comb(len(exps), experiments) <= EXACT_SETS):
        best, total = _best_set(planner, exps, experiments, start)
        if sum(s.score.expected_oriented for s in steps) < total - 1e-9:
            notes = []
            steps = _steps(planner, exps, experiments, start, ranking, best, notes)
        method = "exact"  # the greedy plan, when it reaches the best total, is optimal too
    if method == "exact" and not all(s.score.exact for s in steps):
        method = "greedy"
    bounds = planner.bounds(max_targets)
    return Plan(ranking=ranking, steps=steps, method=method, bounds=bounds,
                open_edges=sum(1 for _ in g.undirected_edges()),
                class_size=_class_size(planner), candidates=candidates,
                experiments_scored=len(exps),
                exact=all(s.exact for s in ranking) and all(s.score.exact for s in steps),
                notes=notes)


def _class_size(planner: Planner) -> int:
    out = 1
    for comp in planner.components:
        out *= comp.size(frozenset(range(len(comp.adj))))
    return out


def _best_set(planner: Planner, exps: list[tuple], m: int,
              start: dict) -> tuple[list[tuple], float]:
    """The M-set with the largest expected number of oriented edges (then smaller class)."""
    best, best_key = None, None
    prefix: dict[tuple, dict] = {(): start}
    for combo in itertools.combinations(range(len(exps)), m):
        states = prefix.get(combo[:-1])
        if states is None:
            states = start
            for i in combo[:-1]:
                states = planner.apply(states, exps[i])
            prefix = {(): start, combo[:-1]: states}
        final = planner.apply(states, exps[combo[-1]])
        size = math.prod(planner.part(ci, st, None).size for ci, st in final.items())
        key = (-round(planner.oriented(final), 9), size)
        if best_key is None or key < best_key:
            best, best_key = combo, key
    return [exps[i] for i in best], -best_key[0]


def _steps(planner: Planner, exps: list[tuple], m: int, start: dict,
           ranking: list[ExperimentScore], chosen: list[tuple] | None,
           notes: list[str]) -> list[PlanStep]:
    """The plan's steps: greedy over all experiments, or greedy order within `chosen`."""
    steps: list[PlanStep] = []
    states = start
    pool = list(chosen) if chosen is not None else list(exps)
    for k in range(1, m + 1):
        if not pool:
            break
        scores = ranking if k == 1 and chosen is None else planner.rank(pool, states)
        best = scores[0]
        if best.expected_oriented <= 1e-12:
            notes.append(f"no candidate experiment orients anything more after step {k - 1}; "
                         "the plan stops there")
            break
        steps.append(PlanStep(step=k, score=best))
        pool.remove(best.targets)
        states = planner.apply(states, best.targets)
    return steps
