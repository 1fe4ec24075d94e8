"""Scores of a learned partially directed graph against a true one.

The structural Hamming distance (SHD) between two partially directed graphs on the
same nodes counts the edits that turn one into the other, one per pair of nodes: a
missing or extra adjacency counts one, and an adjacency present in both whose marks
differ (directed against undirected, or directed the other way) counts one
(Tsamardinos, Brown & Aliferis 2006). Beside it, precision and recall of the adjacencies
and of the directed edges are common practice.

>>> from pipeline.graphs.pdag import PDAG
>>> a = PDAG("ABC"); a.add_directed("A", "B"); a.add_undirected("B", "C")
>>> b = PDAG("ABC"); b.add_directed("A", "B"); b.add_directed("C", "B")
>>> shd(a, b)
1

References
----------
1. I. Tsamardinos, L. E. Brown, C. F. Aliferis (2006). The max-min hill-climbing Bayesian
   network structure learning algorithm. Machine Learning 65(1), 31-78.
"""

from __future__ import annotations

import networkx as nx

from pipeline.graphs.pdag import PDAG
from pipeline.results.scores import Comparison, Scores

__all__ = ["Scores", "Comparison", "shd", "score", "result_targets", "score_result",
           "truth_targets", "compare_result"]


def _check_same_nodes(a: PDAG, b: PDAG) -> None:
    if set(a.nodes) != set(b.nodes):
        only_a = sorted(map(str, set(a.nodes) - set(b.nodes)))
        only_b = sorted(map(str, set(b.nodes) - set(a.nodes)))
        raise ValueError(f"graphs should have the same nodes (only in the first: {only_a}; "
                         f"only in the second: {only_b})")


def _mark(g: PDAG, u, v) -> str | None:
    """The mark of the pair {u, v} read from u's side: '->', '<-', '-' or None."""
    if g.has_directed(u, v):
        return "->"
    if g.has_directed(v, u):
        return "<-"
    if g.has_undirected(u, v):
        return "-"
    return None


def _pairs(g: PDAG) -> set[frozenset]:
    return {frozenset(e) for e in g.skeleton().edges}


def shd(a: PDAG, b: PDAG) -> int:
    """Structural Hamming distance between two partially directed graphs.

    Parameters
    ----------
    a, b : PDAG
        Graphs on the same node set.

    Returns
    -------
    int
        One per pair adjacent in exactly one graph, plus one per pair adjacent in both
        whose edge differs (directed against undirected, or opposite directions).

    Raises
    ------
    ValueError
        If the node sets differ.
    """
    _check_same_nodes(a, b)
    pa, pb = _pairs(a), _pairs(b)
    distance = len(pa ^ pb)
    for pair in pa & pb:
        u, v = tuple(pair)
        if _mark(a, u, v) != _mark(b, u, v):
            distance += 1
    return distance


def _ratio(num: int, den: int) -> float | None:
    return num / den if den else None


def score(learned: PDAG, truth: PDAG) -> Scores:
    """SHD, adjacency and orientation precision and recall of `learned` against `truth`.

    Parameters
    ----------
    learned, truth : PDAG
        Graphs on the same node set; `truth` is usually the true essential graph.

    Returns
    -------
    Scores

    Raises
    ------
    ValueError
        If the node sets differ.
    """
    _check_same_nodes(learned, truth)
    pl, pt = _pairs(learned), _pairs(truth)
    dl, dt = set(learned.directed_edges()), set(truth.directed_edges())
    shared_adj = len(pl & pt)
    shared_dir = len(dl & dt)
    return Scores(
        shd=shd(learned, truth),
        adjacency_precision=_ratio(shared_adj, len(pl)),
        adjacency_recall=_ratio(shared_adj, len(pt)),
        orientation_precision=_ratio(shared_dir, len(dl)),
        orientation_recall=_ratio(shared_dir, len(dt)),
        learned_edges=len(pl), true_edges=len(pt), shared_adjacencies=shared_adj,
        learned_directed=len(dl), true_directed=len(dt), shared_directed=shared_dir,
    )


def result_targets(record) -> tuple[dict[str, list[str]], list[str]]:
    """The targets a result was learned under: ``(non-reference regime -> targets, reference)``.

    Declared targets of regimes with ``known`` true; the detected targets of the others.
    The reference targets are those of the reference regimes (normally none).
    """
    targets: dict[str, list[str]] = {}
    reference: list[str] = []
    for r in record.regimes:
        chosen = list(r.targets) if r.known else list(r.detected_targets)
        if r.reference:
            reference.extend(t for t in chosen if t not in reference)
        else:
            targets[r.name] = chosen
    return targets, reference


def score_result(record, dag: nx.DiGraph) -> tuple[Scores, PDAG]:
    """Score a ``result.json`` (a `ResultRecord`) against the true DAG under its regimes.

    The truth is the interventional essential graph of `dag` under the targets of
    `result_targets`, so a perfect learner scores an SHD of 0 even where the experiments
    leave edges undirected.

    Returns
    -------
    (Scores, PDAG)
        The scores and the true essential graph (over the result's nodes).

    Raises
    ------
    ValueError
        If `dag` names a node that is not in the result.
    """
    full = _full_dag(record, dag)
    targets, reference = result_targets(record)
    truth = _essential(record, full, targets, reference)
    return score(record.graph(), truth), truth


def _full_dag(record, dag: nx.DiGraph) -> nx.DiGraph:
    extra = sorted(map(str, set(dag.nodes) - set(record.nodes)))
    if extra:
        raise ValueError(f"the true DAG has nodes that the result lacks: {', '.join(extra)}")
    full = nx.DiGraph()
    full.add_nodes_from(record.nodes)
    full.add_edges_from(dag.edges)
    return full


def _essential(record, full: nx.DiGraph, targets, reference) -> PDAG:
    """The essential graph of `full` under the targets, over the result's node order."""
    from pipeline.graphs.essential import essential_graph

    truth = essential_graph(full, targets, reference).graph
    ordered = PDAG(record.nodes)
    for u, v in truth.directed_edges():
        ordered.add_directed(u, v)
    for u, v in truth.undirected_edges():
        ordered.add_undirected(u, v)
    return ordered


def truth_targets(record, truth_regimes=None) -> tuple[dict[str, list[str]], list[str]]:
    """The targets that really acted, per regime of the result: ``(targets, reference)``.

    Parameters
    ----------
    record : ResultRecord
    truth_regimes : sequence of Regime, optional
        The actual targets (``truth_regimes.csv`` of ``simulate``). None: the declared
        targets of every regime of the result (whatever the learner detected), so every
        run on the same regimes file meets the same yardstick.

    Raises
    ------
    ValueError
        If a regime of the result has no row in `truth_regimes`.
    """
    if truth_regimes is None:
        actual = {r.name: list(r.targets) for r in record.regimes}
    else:
        actual = {r.name: list(r.targets) for r in truth_regimes}
        missing = [r.name for r in record.regimes if r.name not in actual]
        if missing:
            raise ValueError(f"regime(s) {', '.join(missing)} of the result have no row in "
                             f"the true regimes")
    targets: dict[str, list[str]] = {}
    reference: list[str] = []
    for r in record.regimes:
        if r.reference:
            reference.extend(t for t in actual[r.name] if t not in reference)
        else:
            targets[r.name] = actual[r.name]
    return targets, reference


def compare_result(record, dag: nx.DiGraph, truth_regimes=None) -> Comparison:
    """Score a result on fixed yardsticks: the true DAG and its true essential graph.

    Parameters
    ----------
    record : ResultRecord
    dag : nx.DiGraph
        The true DAG.
    truth_regimes : sequence of Regime, optional
        The targets that really acted (see `truth_targets`).

    Returns
    -------
    Comparison
        Scores against the true DAG itself (every true edge directed), against the
        essential graph of the DAG under the true targets (the same for every run on
        these regimes, whatever its settings), and, as before, against the essential
        graph under the targets the result was learned with.

    Raises
    ------
    ValueError
        If `dag` names a node the result lacks, or a regime has no true targets.
    """
    full = _full_dag(record, dag)
    learned = record.graph()
    own = _essential(record, full, *result_targets(record))
    fixed = _essential(record, full, *truth_targets(record, truth_regimes))
    as_dag = PDAG(record.nodes)
    for u, v in full.edges:
        as_dag.add_directed(u, v)
    return Comparison(design=score(learned, own), true_design=score(learned, fixed),
                      dag=score(learned, as_dag), true_targets=truth_regimes is not None)
