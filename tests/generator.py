"""Test data from linear structural equation models with interventions.

This generator is written apart from the package's own simulator so that tests and
benchmarks can check the learner on data it was not built beside. It offers:

- `random_dag`: a DAG over a random order of the variables, each pair joined with the
  chance that gives the asked expected degree (``degree / (p - 1)``);
- `random_sem`: a linear SEM on such a DAG, edge weights uniform on +-[0.5, 1.5] with
  random signs, an intercept and a noise scale per variable;
- noise families (`NOISE_FAMILIES`), all with mean 0 and variance 1 before the scale:
  ``"gaussian"``, ``"exponential"`` (Exp(1) - 1), ``"t3"`` (Student t with 3 degrees of
  freedom over sqrt(3)) and ``"uniform"`` (on [-sqrt(3), sqrt(3)]);
- intervention kinds (`KINDS`) on a target j, each a change of j's equation
  ``X_j = c_j + sum_i w_ij X_i + s_j e_j``:

  ``"do"``          parents cut; ``X_j = m + sd e`` with ``sd`` the observational sd of X_j
                    and ``m`` its observational mean plus ``strength`` sds;
  ``"do-matched"``  parents cut; ``m`` and ``sd`` equal the observational mean and sd, so
                    the marginal law of X_j does not move in Gaussian data;
  ``"shift"``       ``c_j`` raised by ``strength`` observational sds;
  ``"variance"``    the noise variance multiplied by ``1 + strength`` (the mean kept);
  ``"knockdown"``   the whole equation multiplied by ``1 / (1 + strength)`` (toward 0);

- `generate`: a control (or several control batches, optionally offset), regimes with
  one or several targets, optional undeclared off-target hits, as a `Generated` result;
- `sign_flip_case`: three variables whose marginal correlation changes sign under an
  intervention.

Under regime r the rows are ``x = (c + s * e) (I - W)^-1`` with the changed ``W``, ``c``
and ``s`` (row convention: ``W[i, j]`` is the weight of ``i -> j``), so the implied
covariance is ``(I - W)^-T diag(s^2) (I - W)^-1``.

>>> g = generate(p=5, degree=2, n=50, targets=[["G01"], ["G03"]], seed=1)
>>> sorted(g.data["regime"].unique()), g.data.shape
(['control', 'r1', 'r2'], (150, 6))
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path

import networkx as nx
import numpy as np
import pandas as pd

__all__ = ["NOISE_FAMILIES", "KINDS", "Hit", "RegimeSpec", "SEM", "Generated", "noise",
           "variable_names", "random_dag", "random_sem", "sample_regime", "generate",
           "sign_flip_case"]

NOISE_FAMILIES = ("gaussian", "exponential", "t3", "uniform")
KINDS = ("do", "do-matched", "shift", "variance", "knockdown")
#: Default strength of each kind (see the module docstring for its meaning).
DEFAULT_STRENGTH = {"do": 1.0, "do-matched": 0.0, "shift": 1.0, "variance": 3.0,
                    "knockdown": 2.0}


def noise(family: str, size, rng: np.random.Generator) -> np.ndarray:
    """Draws of a noise family with mean 0 and variance 1.

    Parameters
    ----------
    family : {"gaussian", "exponential", "t3", "uniform"}
    size : int or tuple
    rng : numpy Generator
    """
    if family == "gaussian":
        return rng.standard_normal(size)
    if family == "exponential":
        return rng.standard_exponential(size) - 1.0
    if family == "t3":
        return rng.standard_t(3, size) / math.sqrt(3.0)
    if family == "uniform":
        return rng.uniform(-math.sqrt(3.0), math.sqrt(3.0), size)
    raise ValueError(f"noise family {family!r}: expected one of {', '.join(NOISE_FAMILIES)}")


def variable_names(p: int) -> list[str]:
    """``G01 .. Gp`` (at least two digits)."""
    width = max(2, len(str(p)))
    return [f"G{i:0{width}d}" for i in range(1, p + 1)]


def random_dag(p: int, degree: float, rng: np.random.Generator,
               names: Sequence[str] | None = None) -> nx.DiGraph:
    """A random DAG on `p` variables with expected degree `degree`, over a random order.

    Every pair is joined with chance ``min(1, degree / (p - 1))``, from the earlier to the
    later variable of a random permutation.
    """
    names = list(names) if names is not None else variable_names(p)
    if len(names) != p:
        raise ValueError(f"names: expected {p} names, got {len(names)}")
    order = rng.permutation(p)
    chance = min(1.0, degree / (p - 1)) if p > 1 else 0.0
    dag = nx.DiGraph()
    dag.add_nodes_from(names)
    for a in range(p):
        for b in range(a + 1, p):
            if rng.random() < chance:
                dag.add_edge(names[order[a]], names[order[b]])
    return dag


@dataclass(frozen=True)
class Hit:
    """One intervention on one variable: `kind` in `KINDS`, `strength` (None: the default)."""

    target: str
    kind: str = "do"
    strength: float | None = None

    def __post_init__(self) -> None:
        if self.kind not in KINDS:
            raise ValueError(f"kind {self.kind!r}: expected one of {', '.join(KINDS)}")

    @property
    def size(self) -> float:
        return DEFAULT_STRENGTH[self.kind] if self.strength is None else float(self.strength)


@dataclass(frozen=True)
class RegimeSpec:
    """A regime: the variables actually hit, and the targets declared in regimes.csv.

    `declared` None means "the hit targets"; `known` goes to the regimes file.
    """

    name: str
    hits: tuple[Hit, ...] = ()
    declared: tuple[str, ...] | None = None
    known: bool = True

    @property
    def true_targets(self) -> list[str]:
        return [h.target for h in self.hits]

    @property
    def declared_targets(self) -> list[str]:
        return list(self.true_targets if self.declared is None else self.declared)


@dataclass
class SEM:
    """A linear SEM: ``X_j = intercept_j + sum_i weights[i, j] X_i + scale_j e_j``.

    `weights[i, j]` is the weight of the edge ``variables[i] -> variables[j]`` (0: no
    edge); the noises ``e_j`` are independent draws of the family `noise` (mean 0,
    variance 1).
    """

    variables: list[str]
    weights: np.ndarray
    intercept: np.ndarray
    scale: np.ndarray
    noise: str = "gaussian"

    @property
    def p(self) -> int:
        return len(self.variables)

    def dag(self) -> nx.DiGraph:
        """The graph of the nonzero weights (attribute ``weight``)."""
        d = nx.DiGraph()
        d.add_nodes_from(self.variables)
        for i, j in zip(*np.nonzero(self.weights), strict=True):
            d.add_edge(self.variables[i], self.variables[j], weight=float(self.weights[i, j]))
        return d

    def mean_cov(self) -> tuple[np.ndarray, np.ndarray]:
        """Implied mean and covariance: ``c (I - W)^-1`` and ``(I - W)^-T S^2 (I - W)^-1``."""
        inv = np.linalg.inv(np.eye(self.p) - self.weights)
        return self.intercept @ inv, inv.T @ np.diag(self.scale**2) @ inv

    def intervened(self, hits: Iterable[Hit]) -> SEM:
        """The SEM of a regime: each hit changes its target's equation (module docstring).

        The sizes of do, do-matched and shift are in sds of the observational law of this
        SEM (not of the changed one), so hits on several targets do not interact.
        """
        mean, cov = self.mean_cov()
        sd = np.sqrt(np.diag(cov))
        w, c, s = self.weights.copy(), self.intercept.copy(), self.scale.copy()
        for h in hits:
            j = self.variables.index(h.target)
            if h.kind in ("do", "do-matched"):
                w[:, j] = 0.0
                c[j] = mean[j] + (h.size if h.kind == "do" else 0.0) * sd[j]
                s[j] = sd[j]
            elif h.kind == "shift":
                c[j] += h.size * sd[j]
            elif h.kind == "variance":
                s[j] *= math.sqrt(1.0 + h.size)
            else:  # knockdown
                f = 1.0 / (1.0 + h.size)
                w[:, j] *= f
                c[j] *= f
                s[j] *= f
        return SEM(list(self.variables), w, c, s, self.noise)

    def sample(self, n: int, rng: np.random.Generator) -> np.ndarray:
        """`n` rows, shape (n, p): ``(c + s * e) (I - W)^-1``."""
        e = noise(self.noise, (n, self.p), rng)
        inv = np.linalg.inv(np.eye(self.p) - self.weights)
        return (self.intercept + e * self.scale) @ inv


def random_sem(p: int = 10, degree: float = 4.0, *, seed: int | np.random.Generator = 0,
               weights: tuple[float, float] = (0.5, 1.5), noise: str = "gaussian",
               scale: tuple[float, float] = (0.75, 1.25),
               intercept: tuple[float, float] = (1.0, 3.0),
               names: Sequence[str] | None = None) -> SEM:
    """A random linear SEM on `random_dag`.

    Weights are uniform on ``+-[weights]`` with a random sign each; scales and intercepts
    uniform on their ranges.
    """
    if noise not in NOISE_FAMILIES:
        raise ValueError(f"noise {noise!r}: expected one of {', '.join(NOISE_FAMILIES)}")
    rng = np.random.default_rng(seed)
    names = list(names) if names is not None else variable_names(p)
    dag = random_dag(p, degree, rng, names)
    w = np.zeros((p, p))
    for a, b in dag.edges:
        w[names.index(a), names.index(b)] = rng.uniform(*weights) * rng.choice([-1.0, 1.0])
    return SEM(names, w, rng.uniform(*intercept, size=p), rng.uniform(*scale, size=p), noise)


def sample_regime(sem: SEM, hits: Iterable[Hit], n: int, rng: np.random.Generator,
                  offset: np.ndarray | None = None) -> np.ndarray:
    """`n` rows of the regime with `hits` (and an intercept `offset`, e.g. a batch effect)."""
    model = sem.intervened(hits)
    if offset is not None:
        model = replace(model, intercept=model.intercept + offset)
    return model.sample(n, rng)


@dataclass
class Generated:
    """Data and truth of one generated experiment.

    Attributes
    ----------
    data : DataFrame
        A ``regime`` column, then one column per variable.
    regimes : DataFrame
        The regimes file (CONTRACT.md): ``regime, targets[, known]``, targets ``;``-joined.
    dag : nx.DiGraph
        The true DAG (edge attribute ``weight``).
    targets : dict
        Regime -> the variables actually hit (controls: []), off-target hits included.
    specs : list of RegimeSpec
        Every regime with its hits and declared targets.
    sem : SEM
        The observational model.
    offsets : dict
        Control batch -> intercept offset added to it (zeros without a batch effect).
    """

    data: pd.DataFrame
    regimes: pd.DataFrame
    dag: nx.DiGraph
    targets: dict[str, list[str]]
    specs: list[RegimeSpec]
    sem: SEM
    offsets: dict[str, np.ndarray] = field(default_factory=dict)

    @property
    def variables(self) -> list[str]:
        return list(self.sem.variables)

    def interventional_targets(self) -> dict[str, list[str]]:
        """The true targets of the non-control regimes (for the true essential graph)."""
        return {s.name: s.true_targets for s in self.specs if s.hits}

    def off_targets(self) -> dict[str, list[str]]:
        """Regime -> hit variables that were not declared."""
        out = {}
        for s in self.specs:
            extra = [t for t in s.true_targets if t not in s.declared_targets]
            if extra:
                out[s.name] = extra
        return out

    def write(self, folder: str | Path) -> dict[str, Path]:
        """Write data.csv, regimes.csv, truth_dag.csv (source,target), truth_targets.csv."""
        folder = Path(folder)
        folder.mkdir(parents=True, exist_ok=True)
        paths = {name: folder / f"{name}.csv"
                 for name in ("data", "regimes", "truth_dag", "truth_targets")}
        self.data.to_csv(paths["data"], index=False)
        self.regimes.to_csv(paths["regimes"], index=False)
        pd.DataFrame(list(self.dag.edges), columns=["source", "target"]).to_csv(
            paths["truth_dag"], index=False)
        rows = [(s.name, ";".join(s.true_targets), ";".join(h.kind for h in s.hits))
                for s in self.specs]
        pd.DataFrame(rows, columns=["regime", "targets", "kinds"]).to_csv(
            paths["truth_targets"], index=False)
        return paths


def _specs(variables: list[str], targets, kinds: Sequence[str], strength: float | None,
           off_target: float, rng: np.random.Generator,
           n_regimes: int | None, targets_per_regime: int) -> list[RegimeSpec]:
    if targets is None:
        n_regimes = len(variables) - 1 if n_regimes is None else n_regimes
        if targets_per_regime == 1 and n_regimes <= len(variables):
            picked = rng.choice(len(variables), size=n_regimes, replace=False)
            targets = [[variables[i]] for i in picked]
        else:
            targets = [[variables[i] for i in
                        rng.choice(len(variables), size=targets_per_regime, replace=False)]
                       for _ in range(n_regimes)]
    specs = []
    for r, tset in enumerate(targets):
        kind = kinds[r % len(kinds)]
        hits = [Hit(t, kind, strength) for t in tset]
        declared = tuple(tset)
        others = [v for v in variables if v not in tset]
        if off_target > 0 and others and rng.random() < off_target:
            hits.append(Hit(others[rng.integers(len(others))], kind, strength))
        specs.append(RegimeSpec(f"r{r + 1}", tuple(hits), declared))
    return specs


def generate(p: int = 10, degree: float = 4.0, *, n: int = 1000, noise: str = "gaussian",
             targets: Sequence[Sequence[str]] | None = None, n_regimes: int | None = None,
             targets_per_regime: int = 1, kinds: Sequence[str] | str = ("do",),
             strength: float | None = None, controls: int = 1, batch_offset: float = 0.0,
             off_target: float = 0.0, known: bool = True, sem: SEM | None = None,
             regime_names: Sequence[str] | None = None, seed: int = 0) -> Generated:
    """A random SEM, a control and interventional regimes, `n` rows each.

    Parameters
    ----------
    p, degree, noise
        Passed to `random_sem` (ignored when `sem` is given).
    targets : list of lists of variable names, optional
        The declared targets of each interventional regime (``r1``, ``r2``, ...).
        Default: `n_regimes` regimes (default p - 1) of `targets_per_regime` random
        variables each (distinct across regimes when one per regime).
    kinds : kind or sequence of kinds
        Regime r uses ``kinds[r % len(kinds)]`` for all its targets.
    strength : float, optional
        The size of every hit (default: `DEFAULT_STRENGTH` of its kind).
    controls : int
        Number of control batches (``control`` or ``control1``, ``control2``, ...).
    batch_offset : float
        Sd of a per-variable intercept offset drawn for each control batch (in units of
        the variable's observational sd); 0: no batch effect.
    off_target : float
        Chance that a regime also hits one extra, undeclared variable (same kind).
    known : bool
        The ``known`` column of the regimes file.
    sem : SEM, optional
        Use this model instead of a random one.
    regime_names : list of str, optional
        Names of the interventional regimes (default ``r1``, ``r2``, ...).
    seed : int
    """
    if isinstance(kinds, str):
        kinds = (kinds,)
    for k in kinds:
        if k not in KINDS:
            raise ValueError(f"kind {k!r}: expected one of {', '.join(KINDS)}")
    if controls < 1:
        raise ValueError(f"controls: expected at least 1, got {controls}")
    rng = np.random.default_rng(seed)
    if sem is None:
        sem = random_sem(p, degree, seed=rng, noise=noise)
    variables = list(sem.variables)
    if targets is not None:
        unknown = sorted({t for ts in targets for t in ts} - set(variables))
        if unknown:
            raise ValueError(f"targets: {unknown} are not variables of the SEM")
    specs = _specs(variables, targets, kinds, strength, off_target, rng, n_regimes,
                   targets_per_regime)
    if regime_names is not None:
        if len(regime_names) != len(specs):
            raise ValueError(f"regime_names: expected {len(specs)} names, got "
                             f"{len(regime_names)}")
        specs = [replace(s, name=str(m)) for s, m in zip(specs, regime_names, strict=True)]
    specs = [replace(s, known=known) for s in specs]
    names = ["control"] if controls == 1 else [f"control{i + 1}" for i in range(controls)]
    _, cov = sem.mean_cov()
    sd = np.sqrt(np.diag(cov))
    offsets = {c: (rng.normal(0.0, batch_offset, size=len(variables)) * sd if batch_offset
                   else np.zeros(len(variables))) for c in names}
    blocks, labels = [], []
    for c in names:
        blocks.append(sample_regime(sem, (), n, rng, offsets[c]))
        labels += [c] * n
    for s in specs:
        blocks.append(sample_regime(sem, s.hits, n, rng))
        labels += [s.name] * n
    data = pd.DataFrame(np.vstack(blocks), columns=variables)
    data.insert(0, "regime", labels)
    all_specs = [RegimeSpec(c, (), (), True) for c in names] + specs
    regimes = pd.DataFrame({"regime": [s.name for s in all_specs],
                            "targets": [";".join(s.declared_targets) for s in all_specs],
                            "known": ["yes" if s.known else "no" for s in all_specs]})
    return Generated(data, regimes, sem.dag(), {s.name: s.true_targets for s in all_specs},
                     all_specs, sem, offsets)


#: Weights of `sign_flip_case`: A -> B, B -> C, A -> C.
SIGN_FLIP_WEIGHTS = (1.0, -1.5, 0.85)


def sign_flip_case(n: int = 1000, seed: int = 0, noise: str = "gaussian") -> Generated:
    """A -> B -> C plus A -> C, where corr(A, C) is negative in the control, positive under do(B).

    Weights ``a = 1`` (A -> B), ``b = -1.5`` (B -> C), ``c = 0.85`` (A -> C), unit noise,
    intercepts 0. In the control ``cov(A, C) = a b + c = -0.65`` and
    ``var(C) = (a b + c)^2 + b^2 + 1 = 3.6725``, so ``corr(A, C) = -0.339``. Under
    ``do(B)`` (regime ``do_B``: B gets independent noise with the observational sd
    ``sqrt(2)`` and its mean moved by one sd) ``cov(A, C) = c = 0.85`` and
    ``var(C) = c^2 + 2 b^2 + 1 = 6.2225``, so ``corr(A, C) = +0.341``. At n = 1000 rows
    per regime the Fisher z of each regime is ``atanh(r) sqrt(n - 3)``, about -11.1 and
    +11.2 (|z| >= 5 by far), while the signed sum over the two regimes nearly cancels
    (``atanh(-0.339) + atanh(0.341)`` is about 0.002): a test that only adds signed z's
    loses the edge A - C.
    """
    a, b, c = SIGN_FLIP_WEIGHTS
    w = np.array([[0.0, a, c], [0.0, 0.0, b], [0.0, 0.0, 0.0]])
    sem = SEM(["A", "B", "C"], w, np.zeros(3), np.ones(3), noise)
    return generate(sem=sem, n=n, targets=[["B"]], kinds="do", strength=1.0, seed=seed,
                    regime_names=["do_B"])
