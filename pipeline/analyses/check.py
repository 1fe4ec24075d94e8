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

import re
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from pipeline.errors import InputError
from pipeline.independence.invariance import (
    regime_pair,
    response_matrix,
    standardized_difference,
)
from pipeline.options import check_alpha
from pipeline.results.check import (
    MOVED,
    NOT_MOVED,
    CheckResult,
    ControlAgreement,
    TargetCheck,
)
from pipeline.results.formatting import format_p, format_shift

if TYPE_CHECKING:  # pragma: no cover
    from pipeline.intake.read import Intake

__all__ = ["MIN_SAMPLES", "check", "check_intake", "control_agreement"]

#: Fewer samples than this in a regime draws a warning: its tests have little power.
MIN_SAMPLES = 30


def check(data: str | Path | Sequence[str | Path], regimes: str | Path, *,
          regime_column: str = "regime", ignore_columns: Sequence[str] = (),
          drop_missing: bool = False, reference: str | None = None,
          alpha: float = 0.01, test: str = "gaussian", progress: bool = False) -> CheckResult:
    """Read measurement files and a regimes file and check them (see the module docstring).

    Parameters
    ----------
    data : path or list of paths, CSV or Parquet measurement files
    regimes : path of ``regimes.csv``
    regime_column, ignore_columns, drop_missing, reference : as for `read_inputs`
    alpha : float in (0, 1), level of the target, response and control tests
    test : {"gaussian", "rank"}, the tests' statistics (see `pipeline.intake.read.read_inputs`)
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
    check_alpha(alpha)
    from pipeline.intake.read import read_inputs

    intake = read_inputs(data, regimes, regime_column=regime_column,
                         ignore_columns=tuple(ignore_columns), drop_missing=drop_missing,
                         reference=reference, test=test, progress=progress)
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
    check_alpha(alpha)
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
                                f"{format_shift(s)} sd, p = {format_p(pv)} > {alpha:g}); the "
                                f"intervention may have failed, and this regime carries no "
                                f"orienting information for {t}")
            elif verdict == NOT_MOVED:
                warnings.append(f"regime {r.name}: hinted target {t} did not move (shift "
                                f"{format_shift(s)} sd, p = {format_p(pv)}); the targets of "
                                f"this known=no regime are learned from the data")
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
        others = [m for m in names if m != name]
        n_o, mean_o, scatter_o = moments.pooled(others)
        k = moments.index(name)
        res = regime_pair(moments, others, name).test(every, np.zeros((p, 0), dtype=np.intp))
        stat[i], pval[i] = res.statistic, res.pvalue
        sd = np.sqrt(np.diagonal(scatter_o) / max(n_o - 1, 1))
        shift[i] = standardized_difference(moments.mean[k] - mean_o, sd)
    adjusted = np.minimum(1.0, pval * p)
    return ControlAgreement(names, tuple(moments.variables), shift, stat, pval, adjusted, alpha)


def _mentioned(warnings: list[str], *words: str) -> bool:
    """True if one warning (e.g. from the intake) already names all `words`."""
    pats = [re.compile(rf"(?<![\w.-]){re.escape(w)}(?![\w.-])") for w in words]
    return any(all(p.search(w) for p in pats) for w in warnings)


