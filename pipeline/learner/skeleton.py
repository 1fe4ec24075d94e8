"""The skeleton among measured variables, by the PC-stable algorithm.

The skeleton of a DAG is its set of adjacencies. Under the causal Markov and
faithfulness conditions two variables are adjacent iff no set of other variables makes
them conditionally independent; the PC algorithm [1]_ searches such separating sets
among the current neighbours of each pair, level by level (sets of size 0, 1, 2, ...).
PC-stable [2]_ takes the neighbours at the start of each level, so the result does not
depend on the order of the variables.

Every test here is asked *given the regime*: the tester stratifies by regime, which
amounts to conditioning on every intervention node of the augmented graph [3]_, [4]_.
Intervention nodes are sources, so this never opens a path, and two measured variables
are non-adjacent in the augmented graph iff some ``S`` of measured variables gives
``X _||_ Y | S u F``. Conditioning sets therefore hold measured variables only.

The tests of one level are gathered into arrays and asked in one batched call (or a
few chunks), so a caching wrapper around the tester sees each test once.
Within a level an edge goes if *any* of its tests has ``p > alpha``; the separating set
recorded is the one with the largest p (ties: the first in lexicographic order of
variable positions), the strongest evidence of the separation.

>>> import networkx as nx
>>> from pipeline.design import Design, Regime
>>> from pipeline.learner.oracle import DSeparationTester
>>> d = Design(("A", "B", "C"), (Regime("ctrl", reference=True),))
>>> t = DSeparationTester(nx.DiGraph([("A", "B"), ("B", "C")]), d)
>>> sk = learn_skeleton(t, d.variables, alpha=0.01)
>>> sk.neighbours(1), sk.separations[(0, 2)].cond
([0, 2], (1,))

References
----------
.. [1] Spirtes, P., Glymour, C. & Scheines, R. (2000). *Causation, Prediction, and
   Search*, 2nd ed. MIT Press.
.. [2] Colombo, D. & Maathuis, M. H. (2014). Order-independent constraint-based causal
   structure learning. *Journal of Machine Learning Research* 15, 3741-3782.
.. [3] Yang, K. D., Katcoff, A. & Uhler, C. (2018). Characterizing and learning
   equivalence classes of causal DAGs under interventions. *ICML*.
.. [4] Kocaoglu, M., Jaber, A., Shanmugam, K. & Bareinboim, E. (2019). Characterization
   and learning of causal graphs with latent variables from soft interventions. *NeurIPS*.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import field
from itertools import chain, combinations

import numpy as np

from pipeline.independence.base import Tester, TestResults
from pipeline.records import record

__all__ = ["Separation", "Skeleton", "learn_skeleton"]

Progress = Callable[[str, int, int], None]

CHUNK = 200_000  # tests per call to the tester


@record(frozen=True)
class Separation:
    """The test that separated a pair: conditioning set (variable positions) and result."""

    cond: tuple[int, ...]
    pvalue: float
    statistic: float
    notes: tuple[str, ...] = ()

    @property
    def level(self) -> int:
        return len(self.cond)


@record
class Skeleton:
    """Adjacencies among measured variables, with the evidence of each decision.

    `adjacency` is a symmetric (p, p) boolean matrix; `separations` maps a removed pair
    ``(i, j)`` with ``i < j`` to its `Separation`; `support` maps a kept pair to
    ``(largest p, number of tests)``; `tests_per_level` counts the tests asked per
    conditioning-set size.
    """

    adjacency: np.ndarray
    separations: dict[tuple[int, int], Separation] = field(default_factory=dict)
    support: dict[tuple[int, int], tuple[float | None, int]] = field(default_factory=dict)
    tests_per_level: dict[int, int] = field(default_factory=dict)

    def neighbours(self, i: int) -> list[int]:
        """Positions adjacent to `i`, ascending."""
        return np.flatnonzero(self.adjacency[i]).tolist()


def learn_skeleton(
    tester: Tester,
    variables: Sequence[str],
    *,
    alpha: float,
    max_condition_size: int | None = None,
    regimes: Sequence[str] = (),
    progress: Progress | None = None,
) -> Skeleton:
    """Learn the adjacencies among measured variables by PC-stable.

    Parameters
    ----------
    tester : Tester
        Answers batched ``X _||_ Y | S`` given the regime.
    variables : sequence of str
        The measured variables; positions index the tester's variables.
    alpha : float
        An adjacency goes when a test gives ``p > alpha``.
    max_condition_size : int or None
        Largest conditioning set tried (None: no limit).
    regimes : sequence of str
        Regime names in the order of the columns of ``TestResults.left_out`` (for notes).
    progress : callable or None
        Called as ``progress("level l", done, total)`` after each batch.

    Returns
    -------
    Skeleton
    """
    p = len(variables)
    adj = np.ones((p, p), dtype=bool)
    np.fill_diagonal(adj, False)
    sk = Skeleton(adjacency=adj)
    best: dict[tuple[int, int], tuple[float, int]] = {}  # largest p and tests, per kept pair

    level = 0
    while max_condition_size is None or level <= max_condition_size:
        # Step 1: the adjacencies at the start of the level (PC-stable).
        nbrs = _neighbour_lists(adj)
        pairs: list[tuple[int, int]] = []
        rows_pair: list[int] = []
        rows_cond: list[tuple[int, ...]] = []
        if level == 0:  # every adjacent pair, one empty set each
            ii, jj = np.nonzero(np.triu(adj, 1))
            pairs = list(zip(ii.tolist(), jj.tolist(), strict=True))
            rows_pair = list(range(len(pairs)))
            rows_cond = [()] * len(pairs)
        for i in range(p if level else 0):
            for j in nbrs[i]:
                if j <= i:
                    continue
                sets = candidate_sets(nbrs[i], nbrs[j], i, j, level)
                if not sets:
                    continue
                k = len(pairs)
                pairs.append((i, j))
                rows_pair.extend([k] * len(sets))
                rows_cond.extend(sets)
        if not pairs:
            break  # no pair has enough adjacencies: done

        # Step 2: every test of the level, batched.
        pid = np.fromiter(rows_pair, dtype=np.intp, count=len(rows_pair))
        pa = np.fromiter(chain.from_iterable(pairs), dtype=np.intp,
                         count=2 * len(pairs)).reshape(len(pairs), 2)
        x, y = pa[pid, 0], pa[pid, 1]
        cond = np.fromiter(chain.from_iterable(rows_cond), dtype=np.intp,
                           count=len(rows_cond) * level).reshape(len(rows_cond), level)
        res = run_batched(lambda a, b, c: tester.ci(a, b, c), x, y, cond,
                          label=f"level {level}", progress=progress)
        sk.tests_per_level[level] = sk.tests_per_level.get(level, 0) + len(pid)

        # Step 3: remove a pair if any of its tests has p > alpha; keep the best evidence.
        pv = np.asarray(res.pvalue, dtype=float)
        sep = pv > alpha
        chosen = best_rows(pid, pv, sep, len(pairs))
        counts = np.bincount(pid, minlength=len(pairs))
        maxp = np.full(len(pairs), -np.inf)
        np.maximum.at(maxp, pid, np.where(np.isnan(pv), -np.inf, pv))
        # (python lists: indexing numpy scalars one by one costs more than the loop)
        gone = chosen >= 0
        ri, rj = pa[gone, 0], pa[gone, 1]
        adj[ri, rj] = adj[rj, ri] = False
        pv_l = pv.tolist()
        st_l = np.asarray(res.statistic, dtype=float).tolist()
        plain = res.left_out is None
        for pair, r, mp, n in zip(pairs, chosen.tolist(), maxp.tolist(), counts.tolist(),
                                  strict=True):
            if r >= 0:
                sk.separations[pair] = Separation(
                    rows_cond[r], pv_l[r], st_l[r],
                    () if plain else left_out_notes(res, r, regimes))
                best.pop(pair, None)
            else:
                old_p, old_n = best.get(pair, (-np.inf, 0))
                best[pair] = (max(old_p, mp), old_n + n)
        level += 1

    ii, jj = np.nonzero(np.triu(adj, 1))
    for pair in zip(ii.tolist(), jj.tolist(), strict=True):
        mp, n = best.get(pair, (-np.inf, 0))
        sk.support[pair] = (None if n == 0 or mp == -np.inf else mp, n)
    return sk


def _neighbour_lists(adj: np.ndarray) -> list[list[int]]:
    """Positions adjacent to each node, ascending (one pass over the matrix)."""
    ii, jj = np.nonzero(adj)
    bounds = [0, *np.cumsum(np.bincount(ii, minlength=adj.shape[0])).tolist()]
    flat = jj.tolist()
    return [flat[a:b] for a, b in zip(bounds[:-1], bounds[1:], strict=True)]


def candidate_sets(nb_i: list[int], nb_j: list[int], i: int, j: int,
                   level: int) -> list[tuple[int, ...]]:
    """Sets of size `level` from ``adj(i) \\ {j}`` or ``adj(j) \\ {i}``, without repeats."""
    if level == 0:
        return [()]
    a = [v for v in nb_i if v != j]
    b = [v for v in nb_j if v != i]
    out: list[tuple[int, ...]] = []
    if len(a) >= level:
        out.extend(combinations(a, level))
    if len(b) >= level:
        if out:
            seen = set(out)
            out.extend(s for s in combinations(b, level) if s not in seen)
        else:
            out.extend(combinations(b, level))
    return out


def subsets_up_to(pool: Sequence[int], max_size: int | None) -> list[tuple[int, ...]]:
    """All subsets of `pool` (sorted) of size at most `max_size`, smallest first."""
    pool = sorted(pool)
    top = len(pool) if max_size is None else min(len(pool), max_size)
    out: list[tuple[int, ...]] = []
    for size in range(top + 1):
        out.extend(combinations(pool, size))
    return out


def best_rows(pid: np.ndarray, pv: np.ndarray, sep: np.ndarray, n_groups: int) -> np.ndarray:
    """Per group, the row with the largest p among rows with `sep` true (-1 if none).

    Ties go to the earliest row.
    """
    chosen = np.full(n_groups, -1, dtype=np.intp)
    rows = np.flatnonzero(sep)
    if rows.size:
        # sort by group, then by decreasing p, then by row (lexsort: last key first)
        order = np.lexsort((rows, -pv[rows], pid[rows]))
        r = rows[order]
        first = np.ones(r.size, dtype=bool)
        first[1:] = pid[r[1:]] != pid[r[:-1]]
        chosen[pid[r[first]]] = r[first]
    return chosen


def run_batched(call: Callable[[np.ndarray, np.ndarray, np.ndarray], TestResults],
                x: np.ndarray, y: np.ndarray, cond: np.ndarray, *, label: str,
                progress: Progress | None = None, chunk: int = CHUNK) -> TestResults:
    """Ask ``call(x, y, cond)`` in chunks of at most `chunk` rows and join the results."""
    m = len(x)
    if m <= chunk:
        res = call(x, y, cond)
        if progress is not None:
            progress(label, m, m)
        return res
    stats, pvals, left = [], [], []
    for start in range(0, m, chunk):
        stop = min(m, start + chunk)
        r = call(x[start:stop], y[start:stop], cond[start:stop])
        stats.append(np.asarray(r.statistic, dtype=float))
        pvals.append(np.asarray(r.pvalue, dtype=float))
        left.append(r.left_out)
        if progress is not None:
            progress(label, stop, m)
    left_out = None
    if any(lo is not None for lo in left):
        k = next(lo.shape[1] for lo in left if lo is not None)
        left_out = np.concatenate([
            lo if lo is not None else np.zeros((len(s), k), dtype=bool)
            for lo, s in zip(left, stats, strict=True)])
    return TestResults(np.concatenate(stats), np.concatenate(pvals), left_out)


def left_out_notes(res: TestResults, row: int, regimes: Sequence[str]) -> tuple[str, ...]:
    """A note naming the regimes that test `row` left out, if any."""
    if res.left_out is None:
        return ()
    mask = np.asarray(res.left_out[row], dtype=bool)
    if not mask.any():
        return ()
    idx = np.flatnonzero(mask)
    names = [regimes[i] if i < len(regimes) else str(i) for i in idx]
    return (f"regimes left out (a variable constant within them): {', '.join(names)}",)
