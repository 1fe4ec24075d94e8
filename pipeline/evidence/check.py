"""The pre-learning check of an experiment: did the perturbations do what was declared?

Before any graph is learned, the inputs are read once and four questions are answered
from the per-regime sufficient statistics:

1. how many samples each regime has;
2. whether each declared target moved: the marginal invariance test of the target in its
   regime against the pooled reference (likelihood-ratio test of equal mean and variance,
   `pipeline.independence.invariance`) with the standardized mean shift. A declared target
   that did not move is a failed intervention: its regime carries no orienting information
   for that target (METHODS.md section 4);
3. the response matrix, regime x variable: under faithfulness a variable shifts under a
   regime iff it is a descendant of one of the regime's targets (Eberhardt & Scheines 2007);
4. whether control batches agree: each reference regime is tested against the pooled other
   reference regimes, variable by variable, with the same invariance test and a Bonferroni
   correction over the variables of each comparison (Bonferroni 1936). Controls that
   differ should not be pooled blindly into one reference.

Warnings add too few samples in a regime and variables constant within a regime (a
complete knockout or a reporter at its floor: not an error, METHODS.md section 3).

References
----------
1. F. Eberhardt, R. Scheines (2007). Interventions and causal inference. Philosophy of
   Science 74(5), 981-995.
2. C. E. Bonferroni (1936). Teoria statistica delle classi e calcolo delle probabilita.
   Pubblicazioni del R. Istituto Superiore di Scienze Economiche e Commerciali di Firenze 8.
3. G. C. Chow (1960). Tests of equality between sets of coefficients in two linear
   regressions. Econometrica 28, 591-605.
"""

from __future__ import annotations

import math
import re
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from pipeline.errors import InputError
from pipeline.evidence.formatting import format_p
from pipeline.independence.invariance import ResponseMatrix, invariance_lr, response_matrix
from pipeline.intake.design import Design

if TYPE_CHECKING:  # pragma: no cover
    from pipeline.intake.read import Intake

__all__ = ["FORMAT", "MIN_SAMPLES", "TargetCheck", "ControlAgreement", "CheckResult", "check",
           "check_intake", "control_agreement"]

FORMAT = "orienteer.check/1"
#: Fewer samples than this in a regime draws a warning: its tests have little power.
MIN_SAMPLES = 30
MOVED, NOT_MOVED = "moved", "did not move"


@dataclass(frozen=True)
class TargetCheck:
    """Did the intervention of `regime` move its declared `target`?

    `shift` is the standardized mean shift against the reference, `pvalue` that of the
    marginal invariance test; `verdict` is ``"moved"`` when ``pvalue <= alpha``, else
    ``"did not move"``. `known` is False for the hints of a ``known=no`` regime.
    """

    regime: str
    target: str
    known: bool
    shift: float
    pvalue: float
    verdict: str


@dataclass
class ControlAgreement:
    """Each control regime against the pooled other controls, variable by variable.

    Attributes
    ----------
    regimes : tuple of str, the control (reference) regimes, C >= 2
    variables : tuple of str, length p
    shift : array (C, p), standardized mean shift against the other controls
    statistic, pvalue : arrays (C, p), the marginal invariance test (mean and variance)
    adjusted : array (C, p), Bonferroni-adjusted p-values, ``min(1, p * n_variables)``
    alpha : float
    """

    regimes: tuple[str, ...]
    variables: tuple[str, ...]
    shift: np.ndarray
    statistic: np.ndarray
    pvalue: np.ndarray
    adjusted: np.ndarray
    alpha: float

    @property
    def differing(self) -> dict[str, list[str]]:
        """Per control, the variables that differ from the other controls (adjusted p <= alpha)."""
        return {r: [v for v, bad in zip(self.variables, row, strict=True) if bad]
                for r, row in zip(self.regimes, self.adjusted <= self.alpha, strict=True)}

    @property
    def agree(self) -> bool:
        """True when no variable differs in any control."""
        return not bool(np.any(self.adjusted <= self.alpha))

    @property
    def verdict(self) -> str:
        return "agree" if self.agree else "differ"

    def to_frame(self) -> pd.DataFrame:
        """Long format: control, variable, shift, statistic, pvalue, adjusted."""
        c, p = len(self.regimes), len(self.variables)
        return pd.DataFrame({
            "control": np.repeat(np.asarray(self.regimes, dtype=object), p),
            "variable": np.tile(np.asarray(self.variables, dtype=object), c),
            "shift": self.shift.ravel(), "statistic": self.statistic.ravel(),
            "pvalue": self.pvalue.ravel(), "adjusted": self.adjusted.ravel(),
        })


@dataclass
class CheckResult:
    """What `check` found. Carries every number; `summary` prints them.

    Attributes
    ----------
    design : Design, variables and regimes (with sample counts)
    samples : dict, regime -> number of samples
    targets : list of TargetCheck, one per declared target of each non-reference regime
    response : ResponseMatrix, regime x variable shift and p-value
    controls : ControlAgreement or None (None with fewer than two control regimes)
    constant : dict, regime -> variables constant within it
    warnings : list of str
    alpha : float
    dropped_rows : int, rows dropped for missing values (``drop_missing``)
    fingerprint : str, of the inputs
    """

    design: Design
    samples: dict[str, int]
    targets: list[TargetCheck]
    response: ResponseMatrix
    controls: ControlAgreement | None
    constant: dict[str, list[str]]
    warnings: list[str]
    alpha: float
    dropped_rows: int = 0
    fingerprint: str = ""

    # -- conversions ----------------------------------------------------------------
    def failed_targets(self) -> dict[str, list[str]]:
        """Per regime, the declared targets that did not move (known regimes only)."""
        out: dict[str, list[str]] = {}
        for t in self.targets:
            if t.known and t.verdict == NOT_MOVED:
                out.setdefault(t.regime, []).append(t.target)
        return out

    def target_frame(self) -> pd.DataFrame:
        """One row per checked target: regime, target, known, shift, pvalue, verdict."""
        cols = ["regime", "target", "known", "shift", "pvalue", "verdict"]
        return pd.DataFrame([[getattr(t, c) for c in cols] for t in self.targets], columns=cols)

    def response_frame(self) -> pd.DataFrame:
        """The response matrix in long format: regime, variable, shift, pvalue."""
        return self.response.to_frame()[["regime", "variable", "shift", "pvalue"]]

    def to_dict(self) -> dict[str, Any]:
        """Everything as JSON-able values (non-finite numbers become null)."""
        ref = [r.name for r in self.design.reference]
        out: dict[str, Any] = {
            "format": FORMAT,
            "alpha": self.alpha,
            "variables": list(self.design.variables),
            "reference": ref,
            "regimes": [{"name": r.name, "targets": list(r.targets), "known": r.known,
                         "reference": r.reference, "samples": int(self.samples.get(r.name, 0))}
                        for r in self.design.regimes],
            "dropped_rows": int(self.dropped_rows),
            "fingerprint": self.fingerprint,
            "targets": [{"regime": t.regime, "target": t.target, "known": t.known,
                         "shift": _num(t.shift), "pvalue": _num(t.pvalue), "verdict": t.verdict}
                        for t in self.targets],
            "response": {"regimes": list(self.response.regimes),
                         "variables": list(self.response.variables),
                         "shift": _matrix(self.response.shift),
                         "pvalue": _matrix(self.response.pvalue)},
            "controls": None,
            "constant": {k: list(v) for k, v in self.constant.items()},
            "warnings": list(self.warnings),
        }
        if self.controls is not None:
            c = self.controls
            out["controls"] = {"regimes": list(c.regimes), "verdict": c.verdict,
                               "correction": "bonferroni over variables",
                               "differing": c.differing, "shift": _matrix(c.shift),
                               "pvalue": _matrix(c.pvalue), "adjusted": _matrix(c.adjusted)}
        return out

    # -- the plain-text summary -----------------------------------------------------------
    def summary(self) -> str:
        """A plain-text report: samples, target check, response matrix, controls, warnings."""
        d = self.design
        lines = [f"Input check: {sum(self.samples.values())} samples, {len(d.variables)} "
                 f"variables, {len(d.regimes)} regimes (reference: "
                 f"{', '.join(r.name for r in d.reference)}); alpha = {self.alpha:g}"]
        if self.dropped_rows:
            lines.append(f"{self.dropped_rows} rows with missing values dropped")
        lines += ["", "Samples per regime"]
        table = pd.DataFrame({
            "regime": [r.name for r in d.regimes],
            "samples": [self.samples.get(r.name, 0) for r in d.regimes],
            "targets": [";".join(r.targets) or "-" for r in d.regimes],
            "known": ["yes" if r.known else "no" for r in d.regimes],
            "role": ["reference" if r.reference else "intervention" for r in d.regimes]})
        lines.append(table.to_string(index=False))
        lines += ["", "Declared targets"]
        frame = self.target_frame()
        if len(frame):
            frame["known"] = frame["known"].map({True: "yes", False: "no (hint)"})
            frame["shift"] = frame["shift"].map(_fmt)
            frame["pvalue"] = frame["pvalue"].map(format_p)
            lines.append(frame.to_string(index=False))
        else:
            lines.append("(no declared targets)")
        lines += ["", "Response matrix: standardized shift against the reference "
                      f"(* marks p <= {self.alpha:g})"]
        lines.append(self.response_table().to_string())
        lines += ["", "Control batches"]
        if self.controls is None:
            lines.append("one control regime: nothing to compare")
        else:
            c = self.controls
            diff = {k: v for k, v in c.differing.items() if v}
            lines.append(f"{', '.join(c.regimes)}: {c.verdict}"
                         + (" (" + "; ".join(f"{k} differs in {', '.join(v)}"
                                             for k, v in diff.items()) + ")" if diff else "")
                         + " [each against the others; Bonferroni over variables]")
        lines += ["", "Warnings"]
        lines += [f"- {w}" for w in self.warnings] or ["none"]
        return "\n".join(lines)

    def response_table(self) -> pd.DataFrame:
        """Regime x variable table of shifts as text, ``*`` where p <= alpha."""
        marks = np.where(self.response.pvalue <= self.alpha, "*", " ")
        cells = [[f"{_fmt(s)}{m}" for s, m in zip(row, mrow, strict=True)]
                 for row, mrow in zip(self.response.shift, marks, strict=True)]
        return pd.DataFrame(cells, index=list(self.response.regimes),
                            columns=list(self.response.variables))

    def write(self, folder: str | Path) -> dict[str, Path]:
        """Write ``check.json`` and ``response.csv`` into `folder` atomically."""
        from pipeline.fileio import write_json, write_text

        folder = Path(folder)
        csv = self.response_frame().to_csv(index=False, lineterminator="\n")
        return {"check.json": write_json(folder / "check.json", self.to_dict()),
                "response.csv": write_text(folder / "response.csv", csv)}


def check(data: str | Path | Sequence[str | Path], regimes: str | Path, *,
          regime_column: str = "regime", ignore_columns: Sequence[str] = (),
          drop_missing: bool = False, reference: str | None = None,
          alpha: float = 0.01, progress: bool = False) -> CheckResult:
    """Read measurement files and a regimes file and check them (see the module docstring).

    Parameters
    ----------
    data : path or list of paths, CSV or Parquet measurement files
    regimes : path of ``regimes.csv``
    regime_column, ignore_columns, drop_missing, reference : as for `read_inputs`
    alpha : float in (0, 1), level of the target, response and control tests
    progress : bool, show a progress display on standard error while reading

    Returns
    -------
    CheckResult

    Raises
    ------
    InputError
        If the inputs are wrong (see `pipeline.intake.read.read_inputs`) or `alpha` is
        not in (0, 1).
    """
    _check_alpha(alpha)
    from pipeline.intake.read import read_inputs

    intake = read_inputs(data, regimes, regime_column=regime_column,
                         ignore_columns=tuple(ignore_columns), drop_missing=drop_missing,
                         reference=reference, progress=progress)
    return check_intake(intake, alpha=alpha)


def check_intake(intake: Intake, alpha: float = 0.01) -> CheckResult:
    """Check inputs already read (an `Intake`), without reading any file again.

    Parameters
    ----------
    intake : Intake, from `pipeline.intake.read.read_inputs`
    alpha : float in (0, 1)

    Returns
    -------
    CheckResult

    Raises
    ------
    InputError
        If `alpha` is not in (0, 1) or the design has no reference regime.
    """
    _check_alpha(alpha)
    design, moments = intake.design, intake.moments
    samples = {name: int(n) for name, n in zip(moments.regimes, moments.count, strict=True)}
    warnings: list[str] = []
    for w in list(getattr(design, "warnings", ())) + list(getattr(intake, "warnings", ())):
        if w not in warnings:
            warnings.append(w)

    # 1. samples per regime
    p = len(design.variables)
    for r in design.regimes:
        n = samples.get(r.name, 0)
        if n < MIN_SAMPLES and not _mentioned(warnings, "samples", r.name):
            extra = (f"; fewer than {p + 2} (variables + 2): tests cannot condition on all "
                     "other variables in it" if n < p + 2 else "")
            warnings.append(f"regime {r.name}: only {n} samples (fewer than {MIN_SAMPLES}); "
                            f"its tests have little power{extra}")

    # 2. variables constant within a regime
    mask = moments.constant()
    constant = {name: [v for v, c in zip(moments.variables, row, strict=True) if c]
                for name, row in zip(moments.regimes, mask, strict=True) if row.any()}
    for name, all_vs in constant.items():
        vs = [v for v in all_vs if not _mentioned(warnings, "constant", name, v)]
        if not vs:
            continue
        warnings.append(f"regime {name}: {', '.join(vs)} constant within the regime (a complete "
                        "knockout or a reporter at its floor); tests among measured variables "
                        "leave this regime out for "
                        + ("it" if len(vs) == 1 else "them"))

    # 3. the response matrix and the declared targets
    response = response_matrix(moments, design)
    row_of = {name: i for i, name in enumerate(response.regimes)}
    col_of = {v: j for j, v in enumerate(response.variables)}
    ref_targets = design.reference_targets()
    targets: list[TargetCheck] = []
    for r in design.interventional:
        i = row_of[r.name]
        for t in r.targets:
            if t in ref_targets:
                continue
            j = col_of[t]
            s, pv = float(response.shift[i, j]), float(response.pvalue[i, j])
            verdict = MOVED if pv <= alpha else NOT_MOVED
            targets.append(TargetCheck(r.name, t, r.known, s, pv, verdict))
            if verdict == NOT_MOVED and r.known:
                warnings.append(f"regime {r.name}: declared target {t} did not move (shift "
                                f"{_fmt(s)} sd, p = {format_p(pv)} > {alpha:g}); the "
                                f"intervention may have failed, and this regime carries no "
                                f"orienting information for {t}")
            elif verdict == NOT_MOVED:
                warnings.append(f"regime {r.name}: hinted target {t} did not move (shift "
                                f"{_fmt(s)} sd, p = {format_p(pv)}); the targets of this known=no "
                                f"regime are learned from the data")
        if not np.any(response.pvalue[i] <= alpha):
            warnings.append(f"regime {r.name}: no variable moved at alpha {alpha:g}; the "
                            "regime looks like a control")

    # 4. control batches
    controls = control_agreement(intake, alpha) if len(design.reference) > 1 else None
    if controls is not None and not controls.agree:
        diff = "; ".join(f"{k} in {', '.join(v)}" for k, v in controls.differing.items() if v)
        warnings.append(f"control batches differ ({diff}; Bonferroni-adjusted p <= {alpha:g}); "
                        "pooling them into one reference mixes different laws")

    return CheckResult(design=design, samples=samples, targets=targets, response=response,
                       controls=controls, constant=constant, warnings=warnings, alpha=alpha,
                       dropped_rows=int(getattr(intake, "dropped_rows", 0) or 0),
                       fingerprint=str(getattr(intake, "fingerprint", "") or ""))


def control_agreement(intake: Intake, alpha: float = 0.01) -> ControlAgreement:
    """Test each control regime against the pooled other controls (marginal invariance).

    Raises
    ------
    InputError
        If the design has fewer than two control (reference) regimes.
    """
    moments, design = intake.moments, intake.design
    names = tuple(r.name for r in design.reference)
    if len(names) < 2:
        raise InputError(f"regimes: control agreement needs two or more control regimes, "
                         f"got {len(names)}")
    p = len(moments.variables)
    every = np.arange(p)
    shift, stat, pval = (np.zeros((len(names), p)) for _ in range(3))
    for i, name in enumerate(names):
        n_o, mean_o, scatter_o = moments.pooled([m for m in names if m != name])
        k = moments.index(name)
        res = invariance_lr(n_o, mean_o, scatter_o, int(moments.count[k]), moments.mean[k],
                            moments.scatter[k], every, np.zeros((p, 0), dtype=np.intp))
        stat[i], pval[i] = res.statistic, res.pvalue
        sd = np.sqrt(np.diagonal(scatter_o) / max(n_o - 1, 1))
        diff = moments.mean[k] - mean_o
        with np.errstate(divide="ignore", invalid="ignore"):
            shift[i] = np.where(sd > 0, diff / np.where(sd > 0, sd, 1.0), np.sign(diff) * np.inf)
        shift[i][(sd == 0) & (diff == 0)] = 0.0
    adjusted = np.minimum(1.0, pval * p)
    return ControlAgreement(names, tuple(moments.variables), shift, stat, pval, adjusted, alpha)


def _check_alpha(alpha: float) -> None:
    if isinstance(alpha, bool) or not isinstance(alpha, (int, float)) \
            or not (0.0 < float(alpha) < 1.0):
        raise InputError(f"alpha: got {alpha!r}; expected a level between 0 and 1 "
                         "(e.g. 0.01)")


def _mentioned(warnings: list[str], *words: str) -> bool:
    """True if one warning (e.g. from the intake) already names all `words`."""
    pats = [re.compile(rf"(?<![\w.-]){re.escape(w)}(?![\w.-])") for w in words]
    return any(all(p.search(w) for p in pats) for w in warnings)


def _num(x: float) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


def _matrix(a: np.ndarray) -> list[list[float | None]]:
    return [[_num(v) for v in row] for row in np.asarray(a, dtype=float)]


def _fmt(x: float) -> str:
    if not math.isfinite(x):
        return "inf" if x > 0 else ("-inf" if x < 0 else "nan")
    return f"{x:+.2f}" if abs(x) < 1000 else f"{x:+.3g}"
