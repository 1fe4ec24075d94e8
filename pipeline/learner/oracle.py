"""A tester that answers from d-separation in a known DAG: the oracle of the learner.

Under the causal Markov and faithfulness conditions, a conditional independence holds
in the data iff the corresponding d-separation holds in the true graph [1]_. This
tester answers every test from d-separation in the *augmented* graph of a known DAG
(one intervention node per non-reference regime [2]_, [3]_), as the data would:

* ``ci(x, y, S)`` is ``X _||_ Y | S u F`` with ``F`` all intervention nodes, since every
  test among measured variables conditions on the regime;
* ``invariance(k, x, S)`` is ``F_k _||_ X | S u (F minus F_k)``, since it compares regime
  ``k`` with the reference only.

A separation gives ``p = 1`` and statistic 0, a connection ``p = 0`` and statistic
infinity. The learner driven by this tester must return exactly the true interventional
essential graph (completeness of PC with Meek's rules [1]_, [4]_). d-separation is
networkx's (``nx.is_d_separator``), an implementation outside this project.

>>> import networkx as nx
>>> from pipeline.design import Design, Regime
>>> d = Design(("A", "B"), (Regime("ctrl", reference=True), Regime("kd", ("A",))))
>>> t = DSeparationTester(nx.DiGraph([("A", "B")]), d)
>>> float(t.invariance("kd", np.array([1]), np.zeros((1, 1), dtype=int)).pvalue[0])
1.0

References
----------
.. [1] Spirtes, P., Glymour, C. & Scheines, R. (2000). *Causation, Prediction, and
   Search*, 2nd ed. MIT Press.
.. [2] Yang, K. D., Katcoff, A. & Uhler, C. (2018). Characterizing and learning
   equivalence classes of causal DAGs under interventions. *ICML*.
.. [3] Kocaoglu, M., Jaber, A., Shanmugam, K. & Bareinboim, E. (2019). Characterization
   and learning of causal graphs with latent variables from soft interventions. *NeurIPS*.
.. [4] Meek, C. (1995). Causal inference and causal explanation with background
   knowledge. *UAI*, 403-410.
"""

from __future__ import annotations

import networkx as nx
import numpy as np

from pipeline.design import Design
from pipeline.graphs.augmented import augmented_graph
from pipeline.graphs.pdag import InterventionNode
from pipeline.independence.base import TestResults

__all__ = ["DSeparationTester"]

_d_separated = getattr(nx, "is_d_separator", None) or nx.d_separated


class DSeparationTester:
    """Answer the learner's tests by d-separation in the true augmented graph.

    Parameters
    ----------
    dag : nx.DiGraph
        The true DAG over exactly the variables of `design`.
    design : Design
        Variables and regimes; intervention nodes point at
        ``design.intervention_targets()``.

    Attributes
    ----------
    augmented : nx.DiGraph
        The augmented graph the answers come from.
    calls : int
        Number of batched calls answered.
    tests : int
        Number of single tests answered (repeats included).

    Raises
    ------
    ValueError
        If `dag` is not acyclic or its nodes are not the design's variables.
    """

    def __init__(self, dag: nx.DiGraph, design: Design) -> None:
        if set(dag.nodes) != set(design.variables):
            extra = sorted(map(str, set(dag.nodes) - set(design.variables)))
            missing = sorted(map(str, set(design.variables) - set(dag.nodes)))
            raise ValueError(f"dag should have exactly the design's variables as nodes; "
                             f"extra: {extra}, missing: {missing}")
        self.design = design
        self.augmented = augmented_graph(dag, design.intervention_targets())
        self.f_nodes = frozenset(design.intervention_nodes())
        self.calls = 0
        self.tests = 0
        self._cache: dict[tuple, bool] = {}

    def ci(self, x: np.ndarray, y: np.ndarray, cond: np.ndarray) -> TestResults:
        """``X_i _||_ Y_i | S_i u F`` for each row i."""
        names = self.design.variables
        sep = [self._separated(names[a], names[b], {names[s] for s in row}, self.f_nodes)
               for a, b, row in zip(np.asarray(x).tolist(), np.asarray(y).tolist(),
                                    np.asarray(cond).tolist(), strict=True)]
        return self._results(sep)

    def invariance(self, regime: str, x: np.ndarray, cond: np.ndarray) -> TestResults:
        """``F_regime _||_ X_i | S_i u (F minus F_regime)`` for each row i."""
        f = InterventionNode(regime)
        if f not in self.f_nodes:
            raise ValueError(f"regime should be a non-reference regime of the design; "
                             f"got {regime!r}")
        names = self.design.variables
        others = self.f_nodes - {f}
        sep = [self._separated(f, names[a], {names[s] for s in row}, others)
               for a, row in zip(np.asarray(x).tolist(), np.asarray(cond).tolist(), strict=True)]
        return self._results(sep)

    def _separated(self, a, b, cond: set, extra: frozenset) -> bool:
        z = frozenset(cond) | extra
        key = (frozenset((a, b)), z)
        hit = self._cache.get(key)
        if hit is None:
            hit = bool(_d_separated(self.augmented, {a}, {b}, set(z)))
            self._cache[key] = hit
        return hit

    def _results(self, sep: list[bool]) -> TestResults:
        self.calls += 1
        self.tests += len(sep)
        s = np.asarray(sep, dtype=bool)
        return TestResults(statistic=np.where(s, 0.0, np.inf), pvalue=np.where(s, 1.0, 0.0))
