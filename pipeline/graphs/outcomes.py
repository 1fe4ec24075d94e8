"""What one experiment reveals inside one chain component: the distribution of outcomes.

The DAGs of an (interventional) essential graph's class are the choices, per chain
component, of an acyclic moral orientation (AMO) of that connected chordal graph (see
`pipeline.graphs.counting`). An experiment that acts on a set S of variables adds an
intervention node F pointing at S. In the true DAG D, every edge of a component with
exactly one end in S (a *cut* edge) becomes directed: ``u -> s`` makes the collider
``F -> s <- u``, and ``s -> u`` follows from ``F -> s - u`` by Meek's rule 1. Meek's
rules R1-R4 then orient what follows [1]_. Chain components can be treated one at a
time: restricted to a component C, the essential graph after the experiment is the
essential graph of D[C] under the targets S & C alone [2]_, and the rules never reach
across components (in a valid chain graph no rule has its witnesses outside C).

The outcome (the new essential graph of C) depends on D only through the directions of
the cut edges, and the DAGs that share them are exactly the new class. Under the uniform
distribution on the class, an outcome therefore has probability (its class size) / (the
class size of C), and its new chain components are again independent problems.

**Exact distribution.** Condition on the parent set of one acted-on vertex v at a time.
In a chordal graph every clique K of v's neighbours is v's parent set in some AMO (a
lexicographic breadth-first search may start with K, then v [3]_), and orienting the
edges at v as K says and closing under Meek's rules gives the essential graph of that
case [4]_, [2]_. The leaves of this tree are the outcomes of acting on each vertex of S
alone; when S holds two adjacent vertices the edge between them is not a cut edge, so
each leaf is mapped to the closure of its cut edges and equal outcomes are merged. The
number of closures is bounded by a budget; past it the distribution is estimated.

**Sampled distribution.** DAGs of C drawn uniformly by clique-picking [3]_ (the same
draws for every S, so that experiments are compared on common draws); each draw's cut
edges give its outcome, computed once per distinct outcome.

>>> from pipeline.graphs.counting import AMOCounter
>>> path = AMOCounter([{1}, {0, 2}, {1}], ["A", "B", "C"])   # A - B - C
>>> dist = ComponentOutcomes(path).distribution(frozenset({0, 1, 2}), frozenset({1}))
>>> [(round(o.prob, 3), o.oriented, o.size) for o in dist.outcomes]
[(0.333, 2, 1), (0.333, 2, 1), (0.333, 2, 1)]

References
----------
1. C. Meek (1995). Causal inference and causal explanation with background knowledge. UAI.
2. A. Hauser, P. Buhlmann (2014). Two optimal strategies for active learning of causal
   models from interventional data. International Journal of Approximate Reasoning 55,
   926-939.
3. M. Wienobst, M. Bannach, M. Liskiewicz (2021). Polynomial-time algorithms for counting
   and sampling Markov equivalent DAGs. AAAI 35, 12198-12206.
4. Y.-B. He, Z. Geng (2008). Active learning of causal networks with intervention
   experiments and optimal designs. JMLR 9, 2523-2547.
"""

from __future__ import annotations

import math
import random
from collections import Counter, deque

from pipeline.graphs.counting import AMOCounter
from pipeline.graphs.sampling import _sample_order
from pipeline.records import record

__all__ = ["Outcome", "OutcomeDistribution", "ComponentOutcomes", "meek_arcs"]

Arc = tuple[int, int]


@record(frozen=True)
class Outcome:
    """One possible result of an experiment inside a component.

    `prob` is its probability under the uniform distribution on the class (exact, or
    the share of draws); `oriented` the edges of the component it directs; `size` its
    class size; `pieces` its chain components of two or more nodes.
    """

    prob: float
    oriented: int
    size: int
    pieces: tuple[frozenset, ...]


@record(frozen=True)
class OutcomeDistribution:
    """The outcomes of one experiment inside one component, with their summaries.

    Means are over the uniform distribution on the class; with draws (``exact`` False)
    they are estimates, the ``se_*`` their standard errors, and the worst cases are the
    worst seen among the draws.
    """

    outcomes: tuple[Outcome, ...]
    exact: bool
    samples: int
    mean_oriented: float
    se_oriented: float
    mean_size: float
    se_size: float
    worst_size: int
    worst_oriented: int
    p_identified: float
    se_identified: float


def meek_arcs(adj: list[set[int]], piece: frozenset, arcs) -> frozenset:
    """Close `arcs` under Meek's rules R1-R4 inside the undirected chordal graph `piece`.

    `adj` gives each vertex's neighbours; the edges among `piece` not in `arcs` are
    undirected. Returns every arc of the closure. Only the surroundings of the given arcs
    are examined, so the cost grows with what the rules reach, not with the piece.
    """
    pa: dict[int, set[int]] = {}
    ch: dict[int, set[int]] = {}

    def und(x: int) -> list[int]:
        p, c = pa.get(x, ()), ch.get(x, ())
        return [y for y in adj[x] if y in piece and y not in p and y not in c]

    queue: deque[Arc] = deque()
    queued: set[frozenset] = set()

    def push_around(x: int, y: int) -> None:
        for z in (x, y):
            for w in und(z):
                e = frozenset((z, w))
                if e not in queued:
                    queued.add(e)
                    queue.append((z, w))
        kids = ch.get(y)
        if kids:  # R4: a - x -> y -> b makes a - b a candidate
            for a in und(x):
                for b in adj[a]:
                    if b in kids and b in piece and b not in pa.get(a, ()) \
                            and b not in ch.get(a, ()):
                        e = frozenset((a, b))
                        if e not in queued:
                            queued.add(e)
                            queue.append((a, b))

    def add(u: int, v: int) -> None:
        ch.setdefault(u, set()).add(v)
        pa.setdefault(v, set()).add(u)

    arcs = list(arcs)
    for u, v in arcs:
        add(u, v)
    for u, v in arcs:
        push_around(u, v)
    while queue:
        u, v = queue.popleft()
        queued.discard(frozenset((u, v)))
        if v in pa.get(u, ()) or v in ch.get(u, ()):
            continue
        if _forced(adj, pa, ch, u, v):
            add(u, v)
            push_around(u, v)
        elif _forced(adj, pa, ch, v, u):
            add(v, u)
            push_around(v, u)
    return frozenset((u, v) for u, kids in ch.items() for v in kids)


def _forced(adj, pa, ch, x: int, y: int) -> bool:
    """Does a Meek rule orient the undirected edge ``x - y`` as ``x -> y``?"""
    px, py = pa.get(x, set()), pa.get(y, set())
    ay = adj[y]
    if any(a not in ay for a in px):  # R1: a -> x - y, a and y non-adjacent
        return True
    if ch.get(x, set()) & py:  # R2: x -> b -> y
        return True
    ax, cx = adj[x], ch.get(x, set())
    both = [c for c in py if c in ax and c not in px and c not in cx]  # x - c -> y
    for i, c in enumerate(both):  # R3: two of them non-adjacent
        for d in both[i + 1:]:
            if d not in adj[c]:
                return True
    for c in py:  # R4: x - d -> c -> y, x adjacent to c, d and y non-adjacent
        if c in ax:
            for d in pa.get(c, ()):
                if d in ax and d not in px and d not in cx and d not in ay:
                    return True
    return False


class _OverBudget(Exception):
    pass


class ComponentOutcomes:
    """Outcome distributions of experiments inside one chain component.

    Parameters
    ----------
    counter : AMOCounter
        The component (vertices 0..n-1, see `pipeline.graphs.counting`); its counts of
        induced subgraphs are shared by every distribution.
    samples : int
        Draws when the exact tree exceeds `budget` closures.
    seed : int
        Seed of the draws; each piece gets its own generator derived from it.
    budget : int
        Most Meek closures spent on one exact distribution.
    """

    def __init__(self, counter: AMOCounter, *, samples: int = 200, seed: int = 0,
                 budget: int = 3000) -> None:
        self.counter = counter
        self.adj = counter.adj
        self.samples = samples
        self.seed = seed
        self.budget = budget
        self._memo: dict[tuple[frozenset, frozenset], OutcomeDistribution] = {}
        self._draws: dict[frozenset, list[list[int]]] = {}

    def size(self, piece: frozenset) -> int:
        """Number of AMOs of the connected induced subgraph on `piece`."""
        return self.counter.count(piece)

    def edges(self, piece: frozenset) -> int:
        """Number of edges among `piece`."""
        return sum(len(self.adj[v] & piece) for v in piece) // 2

    def distribution(self, piece: frozenset, acted: frozenset) -> OutcomeDistribution:
        """The outcomes of acting on `acted` (a subset of `piece`) in the component `piece`."""
        key = (piece, acted)
        hit = self._memo.get(key)
        if hit is None:
            if not acted or acted >= piece:  # nothing is cut: nothing is learned
                outs = {frozenset(): 1}
                hit = self._summarize(piece, self._outcomes(piece, outs), True, 0)
            else:
                try:
                    hit = self._summarize(piece, self._exact(piece, acted), True, 0)
                except _OverBudget:
                    hit = self._sampled(piece, acted)
            self._memo[key] = hit
        return hit

    # -- exact: condition on the parent sets of the acted-on vertices -----------------
    def _exact(self, piece: frozenset, acted: frozenset) -> list[tuple[frozenset, int]]:
        adj = self.adj
        spent = [0]
        leaves: list[frozenset] = []

        def open_at(v: int, arcs: frozenset) -> list[int]:
            return sorted(w for w in adj[v] & piece
                          if (v, w) not in arcs and (w, v) not in arcs)

        def expand(arcs: frozenset, todo: list[int]) -> None:
            while todo and not open_at(todo[0], arcs):
                todo = todo[1:]
            if not todo:
                leaves.append(arcs)
                return
            v, rest = todo[0], todo[1:]
            nb = open_at(v, arcs)
            for k in _cliques(nb, adj):
                spent[0] += 1
                if spent[0] > self.budget:
                    raise _OverBudget
                ks = set(k)
                new = list(arcs) + [(u, v) if u in ks else (v, u) for u in nb]
                expand(meek_arcs(adj, piece, new), rest)

        expand(frozenset(), sorted(acted))
        inside = any(adj[v] & acted for v in acted)
        if not inside:  # every edge at an acted-on vertex is cut: the leaves are the outcomes
            outs = dict.fromkeys(leaves, 1)
        else:
            outs = {}
            for leaf in leaves:
                cut = frozenset(a for a in leaf if (a[0] in acted) != (a[1] in acted))
                if cut not in outs:
                    outs[cut] = 1
            outs = {meek_arcs(adj, piece, cut): 1 for cut in outs}
        return self._outcomes(piece, outs)

    def _outcomes(self, piece: frozenset, outs: dict[frozenset, int]) -> list[tuple]:
        """``(arcs, multiplicity, size, pieces)`` per distinct outcome."""
        rows = []
        for arcs, mult in outs.items():
            pieces = self._pieces(piece, arcs)
            size = 1
            for p in pieces:
                size *= self.size(p)
            rows.append((arcs, mult, size, pieces))
        return rows

    def _pieces(self, piece: frozenset, arcs: frozenset) -> tuple[frozenset, ...]:
        """The chain components (two or more nodes) left undirected by `arcs`."""
        adj = self.adj
        touched = {v for a in arcs for v in a}
        seen: set[int] = set()
        out = []
        for s in sorted(piece):
            if s in seen:
                continue
            seen.add(s)
            comp, stack = [s], [s]
            while stack:
                x = stack.pop()
                for w in adj[x] & piece:
                    if w not in seen and (x not in touched or
                                          ((x, w) not in arcs and (w, x) not in arcs)):
                        seen.add(w)
                        comp.append(w)
                        stack.append(w)
            if len(comp) > 1:
                out.append(frozenset(comp))
        return tuple(out)

    def _summarize(self, piece: frozenset, rows: list[tuple], exact: bool,
                   samples: int) -> OutcomeDistribution:
        total_edges = self.edges(piece)
        if exact:
            n = self.size(piece)
            if sum(r[2] for r in rows) != n:
                raise AssertionError("outcome class sizes do not add up to the class size")
            weights = [r[2] for r in rows]
            denom = n
        else:
            weights = [r[1] for r in rows]
            denom = samples
        outs = tuple(Outcome(prob=w / denom, oriented=len(arcs), size=size, pieces=pieces)
                     for (arcs, _, size, pieces), w in zip(rows, weights, strict=True))
        mo = _mean([o.oriented for o in outs], weights, denom)
        ms = _mean([o.size for o in outs], weights, denom)
        pid = _mean([1 if o.oriented == total_edges else 0 for o in outs], weights, denom)
        if exact:
            se = (0.0, 0.0, 0.0)
        else:
            se = tuple(_se([f(o) for o in outs], weights, denom, m) for f, m in (
                (lambda o: o.oriented, mo), (lambda o: o.size, ms),
                (lambda o: 1 if o.oriented == total_edges else 0, pid)))
        return OutcomeDistribution(
            outcomes=outs, exact=exact, samples=samples, mean_oriented=mo, se_oriented=se[0],
            mean_size=ms, se_size=se[1], worst_size=max(o.size for o in outs),
            worst_oriented=min(o.oriented for o in outs), p_identified=pid,
            se_identified=se[2])

    # -- sampled ------------------------------------------------------------------------
    def _sampled(self, piece: frozenset, acted: frozenset) -> OutcomeDistribution:
        draws = self._draws.get(piece)
        if draws is None:
            rng = random.Random(f"{self.seed}:{sorted(piece)}")
            self.counter.count(piece)  # fills the memo the draws read
            draws = []
            for _ in range(self.samples):
                order = _sample_order(self.counter, piece, rng)
                rank = dict.fromkeys(order, 0)
                for i, v in enumerate(order):
                    rank[v] = i
                draws.append(rank)
            self._draws[piece] = draws
        adj = self.adj
        cut = [(u, w) for u in acted for w in adj[u] & piece if w not in acted]
        keys = Counter(frozenset((u, w) if rank[u] < rank[w] else (w, u) for u, w in cut)
                       for rank in draws)
        outs = {meek_arcs(adj, piece, k): m for k, m in keys.items()}
        return self._summarize(piece, self._outcomes(piece, outs), False, len(draws))


def _cliques(nodes: list[int], adj: list[set[int]]):
    """Every clique (the empty one included) of the graph induced on `nodes`."""
    def grow(clique: tuple, cands: list[int]):
        yield clique
        for i, v in enumerate(cands):
            yield from grow(clique + (v,), [w for w in cands[i + 1:] if w in adj[v]])
    return grow((), nodes)


def _mean(values: list, weights: list, denom: int) -> float:
    """Weighted mean with integer weights, exact until the last division."""
    return _ratio(sum(v * w for v, w in zip(values, weights, strict=True)), denom)


def _se(values: list, weights: list, denom: int, mean: float) -> float:
    """Standard error of a mean over `denom` equally weighted draws."""
    if denom < 2:
        return math.inf
    ss = sum(w * (float(v) - mean) ** 2 for v, w in zip(values, weights, strict=True))
    return math.sqrt(ss / (denom - 1) / denom)


def _ratio(a: int, b: int) -> float:
    try:
        return a / b
    except OverflowError:
        return math.inf
