"""Synthetic perturbation experiments from a linear Gaussian structural equation model.

A linear Gaussian structural equation model (SEM) sets every variable to an intercept plus
a weighted sum of its parents in a directed acyclic graph plus independent Gaussian noise,
``X = c + B X + E`` with ``E ~ N(0, diag(omega))`` (Spirtes, Glymour & Scheines 2000,
ch. 5). Its observational covariance is ``(I - B)^-1 diag(omega) (I - B)^-T``.
An experiment changes the equations of its targets and leaves the others as they are
(the mechanism-change view of interventions; Eberhardt & Scheines 2007).

`simulate` draws a random DAG (Erdos-Renyi over a random topological order), a random
model on it and a set of regimes, and samples every regime. The kinds of intervention on
a target ``j`` (``sd_j`` is the observational standard deviation of ``X_j``, ``v_j`` the
value its unchanged equation gives, ``s`` the strength):

``knockdown``
    soft: the level drops but the regulators still act,
    ``X_j = max(0, 1 - 0.7 s) * v_j - s * sd_j``. With ``s >= 1/0.7`` the target is a
    constant (a complete knockout).
``perfect``
    structural: the parents are cut, ``X_j ~ N(c_j - s * sd_j, omega_j)`` independently.
``shift``
    the mean moves up, ``X_j = v_j + s * sd_j``.
``scale``
    the noise is amplified, ``X_j = c_j + B_j X + (1 + s) E_j`` (noise variance times
    ``(1 + s)^2``).

Example
-------
>>> sim = simulate(nodes=5, regimes=2, samples=100, seed=1)
>>> sorted(sim.data["regime"].unique())
['ctrl', 'kd_X2', 'kd_X5']

References
----------
1. P. Spirtes, C. Glymour, R. Scheines (2000). Causation, Prediction, and Search, 2nd ed.
   MIT Press.
2. F. Eberhardt, R. Scheines (2007). Interventions and causal inference. Philosophy of
   Science 74(5), 981-995.
3. P. Erdos, A. Renyi (1959). On random graphs I. Publicationes Mathematicae 6, 290-297.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import field
from pathlib import Path

import networkx as nx
import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.csv as pa_csv

from pipeline.errors import InputError
from pipeline.fileio import atomic_write, write_text
from pipeline.options import SIMULATION_KINDS
from pipeline.records import record

__all__ = ["KINDS", "LinearSEM", "Simulation", "simulate", "random_sem"]

#: The kinds of intervention `LinearSEM.sample` knows; ``knockout`` (the target set to
#: the constant ``floor``) serves hand-built scenarios such as the demo data.
KINDS = SIMULATION_KINDS
_ALL_KINDS = KINDS + ("knockout",)
_PREFIX = {"knockdown": "kd", "perfect": "do", "shift": "up", "scale": "noisy"}
#: Fraction of the level a knockdown of strength 1 removes (see the module docstring).
KNOCKDOWN_FRACTION = 0.7
#: Decimals written to data.csv.
DECIMALS = 5


@record(frozen=True)
class LinearSEM:
    """A linear Gaussian structural equation model ``X = c + B X + E``.

    Attributes
    ----------
    variables : tuple of str, length p
    weights : float array (p, p); ``weights[j, i]`` is the weight of the edge i -> j
    noise_variance : float array (p,), the variances omega of E
    intercept : float array (p,), the constants c
    """

    variables: tuple[str, ...]
    weights: np.ndarray
    noise_variance: np.ndarray
    intercept: np.ndarray

    def __post_init__(self) -> None:
        p = len(self.variables)
        if self.weights.shape != (p, p) or self.noise_variance.shape != (p,) \
                or self.intercept.shape != (p,):
            raise ValueError(f"LinearSEM: shapes {self.weights.shape}, "
                             f"{self.noise_variance.shape}, {self.intercept.shape} do not fit "
                             f"{p} variables")
        if not nx.is_directed_acyclic_graph(self.graph()):
            raise ValueError("LinearSEM: the weights should form a directed acyclic graph")
        if np.any(self.noise_variance <= 0):
            raise ValueError("LinearSEM: noise variances should be positive")

    @classmethod
    def from_edges(cls, variables: Sequence[str], edges: Mapping[tuple[str, str], float],
                   noise_variance: Mapping[str, float] | float = 1.0,
                   intercept: Mapping[str, float] | float = 0.0) -> LinearSEM:
        """Build a model from ``{(source, target): weight}`` and per-variable values."""
        variables = tuple(variables)
        pos = {v: i for i, v in enumerate(variables)}
        w = np.zeros((len(variables), len(variables)))
        for (s, t), b in edges.items():
            w[pos[t], pos[s]] = b

        def vector(values: Mapping[str, float] | float) -> np.ndarray:
            if isinstance(values, Mapping):
                return np.array([float(values[v]) for v in variables])
            return np.full(len(variables), float(values))

        return cls(variables, w, vector(noise_variance), vector(intercept))

    def graph(self) -> nx.DiGraph:
        """The DAG of the model (nodes in variable order, edges with their ``weight``)."""
        g = nx.DiGraph()
        g.add_nodes_from(self.variables)
        for j, i in zip(*np.nonzero(self.weights), strict=True):
            g.add_edge(self.variables[i], self.variables[j], weight=float(self.weights[j, i]))
        return g

    def covariance(self) -> np.ndarray:
        """Observational covariance ``(I - B)^-1 diag(omega) (I - B)^-T``."""
        a = np.linalg.inv(np.eye(len(self.variables)) - self.weights)
        return a @ np.diag(self.noise_variance) @ a.T

    def mean(self) -> np.ndarray:
        """Observational mean ``(I - B)^-1 c``."""
        return np.linalg.solve(np.eye(len(self.variables)) - self.weights, self.intercept)

    def sample(self, n: int, rng: np.random.Generator,
               actions: Mapping[str, tuple[str, float]] | None = None,
               floor: float = 0.0) -> np.ndarray:
        """Draw `n` rows, shape (n, p), under ``actions = {target: (kind, strength)}``.

        The kinds are those of the module docstring plus ``knockout``: the target is the
        constant `floor` (strength ignored). No actions: the observational law.
        """
        actions = dict(actions or {})
        pos = {v: i for i, v in enumerate(self.variables)}
        for target, (kind, _) in actions.items():
            if target not in pos:
                raise ValueError(f"actions: unknown target '{target}'")
            if kind not in _ALL_KINDS:
                raise ValueError(f"actions: unknown kind '{kind}' for '{target}' "
                                 f"(expected one of {', '.join(_ALL_KINDS)})")
        p = len(self.variables)
        sd = np.sqrt(np.diag(self.covariance()))
        noise = rng.standard_normal((n, p)) * np.sqrt(self.noise_variance)
        x = np.zeros((n, p))
        for j in nx.topological_sort(self._index_graph()):
            parents = np.nonzero(self.weights[j])[0]
            drive = self.intercept[j] + x[:, parents] @ self.weights[j, parents]
            kind, s = actions.get(self.variables[j], (None, 0.0))
            if kind is None:
                x[:, j] = drive + noise[:, j]
            elif kind == "knockdown":
                keep = max(0.0, 1.0 - KNOCKDOWN_FRACTION * s)
                x[:, j] = keep * (drive + noise[:, j]) - s * sd[j]
            elif kind == "perfect":
                x[:, j] = self.intercept[j] - s * sd[j] + noise[:, j]
            elif kind == "shift":
                x[:, j] = drive + noise[:, j] + s * sd[j]
            elif kind == "scale":
                x[:, j] = drive + (1.0 + s) * noise[:, j]
            else:  # knockout
                x[:, j] = floor
        return x

    def _index_graph(self) -> nx.DiGraph:
        g = nx.DiGraph()
        g.add_nodes_from(range(len(self.variables)))
        g.add_edges_from((int(i), int(j)) for j, i in zip(*np.nonzero(self.weights), strict=True))
        return g


@record
class Simulation:
    """Simulated data with the truth behind it.

    Attributes
    ----------
    data : DataFrame, one row per sample, a ``regime`` column then the variables
    regimes : DataFrame with columns regime, targets (``;``-separated, declared), known
    truth_dag : networkx.DiGraph, the true DAG (edge attribute ``weight``)
    truth_regimes : DataFrame with columns regime, targets (actual, off-target hits included)
    model : LinearSEM
    settings : dict of the arguments that produced it
    """

    data: pd.DataFrame
    regimes: pd.DataFrame
    truth_dag: nx.DiGraph
    truth_regimes: pd.DataFrame
    model: LinearSEM
    settings: dict = field(default_factory=dict)

    def truth_dag_frame(self) -> pd.DataFrame:
        """The true DAG as a ``source,target`` table (sorted by variable order)."""
        order = {v: i for i, v in enumerate(self.model.variables)}
        edges = sorted(self.truth_dag.edges(), key=lambda e: (order[e[0]], order[e[1]]))
        return pd.DataFrame(edges, columns=["source", "target"])

    def save(self, folder: str | Path) -> dict[str, Path]:
        """Write data.csv, regimes.csv, truth_dag.csv and truth_regimes.csv atomically.

        The values in data.csv are rounded to `DECIMALS` (5) decimals. Returns the paths
        written, by file name.
        """
        folder = Path(folder)
        tables = {
            "regimes.csv": self.regimes.to_csv(index=False, lineterminator="\n"),
            "truth_dag.csv": self.truth_dag_frame().to_csv(index=False, lineterminator="\n"),
            "truth_regimes.csv": self.truth_regimes.to_csv(index=False, lineterminator="\n"),
        }
        paths = {"data.csv": atomic_write(folder / "data.csv", self._write_data, binary=True)}
        paths.update({name: write_text(folder / name, text) for name, text in tables.items()})
        return paths

    def _write_data(self, handle) -> None:
        """The data table as CSV, values rounded to DECIMALS (pyarrow's C++ writer: fast)."""
        handle.write((",".join(self.data.columns) + "\n").encode("utf-8"))
        table = pa.Table.from_pandas(self.data.round(DECIMALS), preserve_index=False)
        pa_csv.write_csv(table, handle, pa_csv.WriteOptions(include_header=False,
                                                            quoting_style="none"))


def random_sem(nodes: int, degree: float, rng: np.random.Generator) -> LinearSEM:
    """A random model: Erdos-Renyi DAG over a random order, weights +-U[0.5, 1.5].

    Each pair earlier -> later in a random permutation is an edge with probability
    ``degree / (nodes - 1)`` (so `degree` is the expected number of neighbours); noise
    variances are U[0.5, 1.5]; intercepts 0. Variables are named X1..Xp.
    """
    variables = tuple(f"X{i + 1}" for i in range(nodes))
    order = rng.permutation(nodes)
    prob = min(1.0, degree / (nodes - 1)) if nodes > 1 else 0.0
    w = np.zeros((nodes, nodes))
    upper = np.triu(rng.random((nodes, nodes)) < prob, k=1)  # upper[a, b]: order[a] -> order[b]
    magnitude = rng.uniform(0.5, 1.5, size=(nodes, nodes))
    sign = np.where(rng.random((nodes, nodes)) < 0.5, -1.0, 1.0)
    for a, b in zip(*np.nonzero(upper), strict=True):
        w[order[b], order[a]] = magnitude[a, b] * sign[a, b]
    noise = rng.uniform(0.5, 1.5, size=nodes)
    return LinearSEM(variables, w, noise, np.zeros(nodes))


def simulate(nodes: int = 10, degree: float = 2.0, regimes: int = 5, targets_per_regime: int = 1,
             samples: int = 1000, kind: str = "knockdown", strength: float = 1.0,
             off_target: float = 0.0, seed: int | None = None, controls: int = 1) -> Simulation:
    """Simulate control and perturbation experiments on a random linear Gaussian SEM.

    Parameters
    ----------
    nodes : int, number of variables (X1..Xp), at least 2
    degree : float, expected number of neighbours of a variable
    regimes : int, number of interventional regimes
    targets_per_regime : int, targets acted on per regime (1..nodes)
    samples : int, rows per regime (controls included)
    kind : {"knockdown", "perfect", "shift", "scale"}, see the module docstring
    strength : float >= 0
    off_target : float in [0, 1], probability that an experiment also hits one extra,
        undeclared variable (listed in `truth_regimes`, not in `regimes`)
    seed : int or None; the same seed gives the same data, byte for byte once saved
    controls : int, number of control regimes (``ctrl``, or ``ctrl_1``..``ctrl_C``)

    Returns
    -------
    Simulation

    Raises
    ------
    InputError
        If an argument is out of range.

    Notes
    -----
    Regimes are named by kind and declared targets: ``kd_X3``, ``kd_X3_X7`` (knockdown),
    ``do_`` (perfect), ``up_`` (shift), ``noisy_`` (scale). Target sets are drawn without
    repetition while distinct sets remain; a repeated set gets a suffix ``_2``, ``_3``...
    """
    _validate(nodes, degree, regimes, targets_per_regime, samples, kind, strength, off_target,
              controls)
    rng = np.random.default_rng(seed)
    model = random_sem(nodes, degree, rng)
    variables = model.variables

    # 1. the regimes: declared targets, then the off-target hits
    names = ["ctrl"] if controls == 1 else [f"ctrl_{c + 1}" for c in range(controls)]
    declared: list[tuple[str, ...]] = [()] * controls
    actual: list[tuple[str, ...]] = [()] * controls
    seen: set[tuple[str, ...]] = set()
    used: dict[str, int] = {}
    possible = math.comb(nodes, targets_per_regime)
    for _ in range(regimes):
        while True:
            pick = tuple(sorted(rng.choice(nodes, size=targets_per_regime, replace=False)))
            if pick not in seen or len(seen) >= possible:
                break
        seen.add(pick)
        targets = tuple(variables[i] for i in pick)
        hits = targets
        if off_target > 0 and rng.random() < off_target and targets_per_regime < nodes:
            others = [i for i in range(nodes) if i not in pick]
            extra = variables[int(rng.choice(others))]
            hits = tuple(v for v in variables if v in set(targets) | {extra})
        name = "_".join((_PREFIX[kind],) + targets)
        used[name] = used.get(name, 0) + 1
        if used[name] > 1:
            name = f"{name}_{used[name]}"
        names.append(name)
        declared.append(targets)
        actual.append(hits)

    # 2. the samples, regime by regime
    blocks = []
    for name, hits in zip(names, actual, strict=True):
        x = model.sample(samples, rng, {t: (kind, strength) for t in hits})
        block = pd.DataFrame(x, columns=list(variables))
        block.insert(0, "regime", name)
        blocks.append(block)
    data = pd.concat(blocks, ignore_index=True)

    regime_table = pd.DataFrame({"regime": names, "targets": [";".join(t) for t in declared],
                                 "known": "yes"})
    truth_table = pd.DataFrame({"regime": names, "targets": [";".join(t) for t in actual]})
    settings = dict(nodes=nodes, degree=degree, regimes=regimes,
                    targets_per_regime=targets_per_regime, samples=samples, kind=kind,
                    strength=strength, off_target=off_target, seed=seed, controls=controls)
    return Simulation(data, regime_table, model.graph(), truth_table, model, settings)


def _validate(nodes, degree, regimes, targets_per_regime, samples, kind, strength, off_target,
              controls) -> None:
    def whole(name: str, value, low: int) -> None:
        if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < low:
            raise InputError(f"{name}: got {value!r}; expected a whole number >= {low}")

    whole("nodes", nodes, 2)
    whole("regimes", regimes, 0)
    whole("targets_per_regime", targets_per_regime, 1)
    whole("samples", samples, 2)
    whole("controls", controls, 1)
    if targets_per_regime > nodes:
        raise InputError(f"targets_per_regime: got {targets_per_regime}; at most nodes "
                         f"({nodes}) variables can be targets of one regime")
    if kind not in KINDS:
        raise InputError(f"kind: got {kind!r}; expected one of {', '.join(KINDS)}")
    if not (math.isfinite(degree) and degree >= 0):
        raise InputError(f"degree: got {degree!r}; expected a number >= 0 (expected neighbours)")
    if not (math.isfinite(strength) and strength >= 0):
        raise InputError(f"strength: got {strength!r}; expected a number >= 0")
    if not (0.0 <= off_target <= 1.0):
        raise InputError(f"off_target: got {off_target!r}; expected a probability in [0, 1]")
