"""The pre-learning check of an experiment: did the perturbations do what was declared?

Before any graph is learned, the inputs are read once and four questions are answered
from the per-regime sufficient statistics:

1. how many samples each regime has;
2. whether each declared target moved: the marginal invariance test of the target in its
   regime against the pooled reference (Chow's test of equal means joined with Bartlett's
   of equal variances, `pipeline.independence.invariance`) with the standardized mean
   shift. A declared target
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

The tests' numbers do not depend on alpha: they are asked through `StoredNumbers`, which
keeps them in the test store of a run folder, so that a rerun at another alpha reads them
and only applies its alpha (the statistics libraries that compute them are imported only
when a number is missing).

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

import json
import re
from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from pipeline.design import Design
from pipeline.errors import InputError
from pipeline.independence.multiplicity import benjamini_hochberg
from pipeline.independence.numbers import StoredNumbers
from pipeline.independence.response import ResponseMatrix
from pipeline.options import check_alpha
from pipeline.results.check import (
    MOVED,
    MOVED_GIVEN,
    NOT_MOVED,
    CheckResult,
    ControlAgreement,
    DistributionShape,
    TargetCheck,
)
from pipeline.results.formatting import format_p, format_shift
from pipeline.stats.moments import Moments

if TYPE_CHECKING:  # pragma: no cover
    from pipeline.intake.read import Intake

__all__ = ["MIN_SAMPLES", "check", "check_intake", "control_agreement", "neighbour_estimate",
           "distribution_shape", "settle_reference", "with_learner_verdicts"]

#: Fewer samples than this in a regime draws a warning: its tests have little power.
MIN_SAMPLES = 30


def check(data: str | Path | Sequence[str | Path], regimes: str | Path, *,
          regime_column: str = "regime", ignore_columns: Sequence[str] = (),
          drop_missing: bool = False, reference: str | None = None,
          alpha: float = 0.01, test: str = "gaussian", progress: bool = False,
          decimal: str | None = None, regime_from: str | None = None, sheet: str | None = None,
          genes: str | Path | Sequence[str] | None = None) -> CheckResult:
    """Read measurement files and a regimes file and check them (see the module docstring).

    Parameters
    ----------
    data : path or list of paths, CSV or Parquet measurement files
    regimes : path of ``regimes.csv``
    regime_column, ignore_columns, drop_missing, reference : as for `read_inputs`
    alpha : float in (0, 1), level of the target, response and control tests
    test : {"gaussian", "rank"}, the tests' statistics (see `pipeline.intake.read.read_inputs`)
    decimal, regime_from, sheet, genes : how to read the files, as for `read_inputs`
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
                         reference=reference, test=test, progress=progress,
                         decimal=decimal, regime_from=regime_from, sheet=sheet, genes=genes)
    return check_intake(intake, alpha=alpha)


def check_intake(intake: Intake, alpha: float = 0.01, numbers: StoredNumbers | None = None,
                 learner_checks_targets: bool = False) -> CheckResult:
    """Check inputs already read (an `Intake`), without reading any file again.

    Parameters
    ----------
    intake : Intake, from `pipeline.intake.read.read_inputs`
    alpha : float in (0, 1)
    numbers : StoredNumbers, optional
        Where the tests' numbers are kept (a run folder's store); None computes them.
    learner_checks_targets : bool
        True when the learner tests the declared targets of known regimes given their
        neighbours in the learned graph (`with_learner_verdicts` then replaces their
        conditional test): the check leaves that test out for them.

    Returns
    -------
    CheckResult

    Raises
    ------
    InputError
        If `alpha` is not in (0, 1) or the design has no reference regime.
    """
    check_alpha(alpha)
    numbers = numbers if numbers is not None else StoredNumbers()
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

    # 3. control batches: do they agree? keep one reference, analyse the others apart
    controls = (control_agreement(intake, alpha, numbers=numbers)
                if len(design.reference) > 1 else None)
    demoted: list[str] = []
    if controls is not None and not controls.agree:
        design, demoted = settle_reference(moments, design, alpha, numbers=numbers)
        diff = "; ".join(f"{k} in {', '.join(v)}" for k, v in controls.differing.items() if v)
        kept = ", ".join(r.name for r in design.reference)
        warnings.append(
            f"control batches differ ({diff}; Bonferroni-adjusted p <= {alpha:g}); pooling them "
            f"would mix different laws, so the reference is {kept}"
            + (f"; {', '.join(demoted)} {'is' if len(demoted) == 1 else 'are'} analysed apart "
               "(its rows count in the tests of independence, but it orients no edge; what "
               "its batch effect moves is listed as off-target findings)" if demoted else ""))

    # 4. the response matrix against that reference
    response = _response(moments, design, numbers)

    # 5. the declared targets: marginal law, and law given the target's neighbours
    targets = _target_checks(moments, design, response, alpha, numbers,
                             learner_checks_targets)
    for t in targets:
        warnings.extend(_target_warning(t, alpha))
    warnings.extend(_control_like(response, targets, alpha))

    # 6. the shape of the distributions (the Gaussian tests' assumption)
    shape = distribution_shape(moments)
    if shape is not None and shape.far:
        at = {v: j for j, v in enumerate(shape.variables)}
        shown = "; ".join(f"{v}: skewness {shape.skewness[at[v]]:+.1f}, excess kurtosis "
                          f"{shape.excess_kurtosis[at[v]]:.1f}" for v in shape.far[:5])
        more = f" and {len(shape.far) - 5} more" if len(shape.far) > 5 else ""
        warnings.append(
            f"{len(shape.far)} variable(s) are far from Gaussian within regimes ({shown}{more}); "
            "the invariance tests allow for heavy tails, but relations may be non-linear: "
            "compare with --test rank")

    return CheckResult(design=design, samples=samples, targets=targets, response=response,
                       controls=controls, constant=constant, warnings=warnings, alpha=alpha,
                       dropped_rows=int(getattr(intake, "dropped_rows", 0) or 0),
                       fingerprint=str(getattr(intake, "fingerprint", "") or ""),
                       shape=shape, reference=[r.name for r in design.reference],
                       demoted=demoted)


def _response(moments: Moments, design: Design, numbers: StoredNumbers) -> ResponseMatrix:
    """The response matrix against the design's reference, its numbers kept in `numbers`."""
    ref_names = [r.name for r in design.reference]

    def compute() -> dict[str, np.ndarray]:
        from pipeline.independence.invariance import response_matrix

        r = response_matrix(moments, design)
        return {"shift": r.shift, "pvalue": r.pvalue, "statistic": r.statistic,
                "sd_ratio": r.sd_ratio}

    got = numbers.get(f"response {json.dumps(ref_names)}", compute)
    return ResponseMatrix(tuple(r.name for r in design.interventional), tuple(moments.variables),
                          got["shift"], got["pvalue"], got["statistic"], sd_ratio=got["sd_ratio"])


def _conditional_pvalue(moments: Moments, reference: list[str], regime: str, j: int,
                        cond: np.ndarray, numbers: StoredNumbers) -> float:
    """p-value of the invariance test of variable `j` given `cond` in `regime` against the
    pooled `reference`, kept in `numbers`."""
    def compute() -> dict[str, np.ndarray]:
        from pipeline.independence.invariance import regime_pair

        return {"pvalue": regime_pair(moments, reference, regime).test(
            np.array([j]), cond[None, :]).pvalue}

    key = json.dumps([reference, regime, int(j), cond.tolist()])
    return float(numbers.get(f"target given {key}", compute)["pvalue"][0])


def _target_checks(moments: Moments, design: Design, response: ResponseMatrix,
                   alpha: float, numbers: StoredNumbers, learner_checks_known: bool
                   ) -> list[TargetCheck]:
    """Marginal and conditional invariance of every declared target in its regime (the
    conditional test left out for known targets when the learner does it)."""
    row_of = {name: i for i, name in enumerate(response.regimes)}
    col_of = {v: j for j, v in enumerate(response.variables)}
    ref_targets = design.reference_targets()
    ref_names = [r.name for r in design.reference]
    pending = [(r, t) for r in design.interventional for t in r.targets if t not in ref_targets]
    if not pending:
        return []
    marginal = np.array([response.pvalue[row_of[r.name], col_of[t]] for r, t in pending])
    adjusted = benjamini_hochberg(marginal)
    conditional = [not (learner_checks_known and r.known) for r, _ in pending]
    nbrs = neighbour_estimate(moments, alpha, numbers=numbers) if any(conditional) else None
    out = []
    for (r, t), pv, adj, cond_test in zip(pending, marginal.tolist(), adjusted.tolist(),
                                          conditional, strict=True):
        i, j = row_of[r.name], col_of[t]
        given: tuple[str, ...] = ()
        p_cond = None
        if nbrs is not None and cond_test:
            cond = np.flatnonzero(nbrs[j])
            n_k = int(moments.count[moments.index(r.name)])
            if 0 < cond.size <= max(n_k - 3, 0):
                p_cond = _conditional_pvalue(moments, ref_names, r.name, j, cond, numbers)
                given = tuple(moments.variables[c] for c in cond)
        verdict = (MOVED if pv <= alpha else
                   MOVED_GIVEN if p_cond is not None and p_cond <= alpha else NOT_MOVED)
        out.append(TargetCheck(r.name, t, r.known, float(response.shift[i, j]), pv, verdict,
                               sd_ratio=float(response.sd_ratio[i, j]), adjusted=adj,
                               conditional_pvalue=p_cond, given=given))
    return out


def _target_warning(t: TargetCheck, alpha: float) -> list[str]:
    moved = (f"shift {format_shift(t.shift)} sd, sd ratio {t.sd_ratio:.2f}, "
             f"p = {format_p(t.pvalue)}")
    given = (f"given {', '.join(t.given[:6])}{' ...' if len(t.given) > 6 else ''}"
             if t.given else "")
    if t.verdict == MOVED_GIVEN:
        return [f"regime {t.regime}: declared target {t.target} kept its marginal mean and spread "
                f"({moved}) but its law {given} changed (p = {format_p(t.conditional_pvalue)}): "
                "the intervention acted on it"]
    if t.verdict != NOT_MOVED:
        return []
    cond = (f" nor {given} (p = {format_p(t.conditional_pvalue)})" if t.conditional_pvalue
            is not None else "")
    if not t.known:
        return [f"regime {t.regime}: hinted target {t.target} did not move ({moved}){cond}; the "
                "targets of this known=no regime are learned from the data"]
    return [f"regime {t.regime}: declared target {t.target} moved neither marginally ({moved}, "
            f"> {alpha:g}){cond}: the intervention may have failed; learn checks it again given "
            "its neighbours in the learned graph and leaves it out of the regime's intervention "
            "node only if that test does not see it either"]


def _control_like(response: ResponseMatrix, targets: list[TargetCheck],
                  alpha: float) -> list[str]:
    """Warnings for the regimes where nothing moved: no response after the matrix's
    adjustment, and no declared target seen to move by its own tests (a weak or
    variance-only effect may pass its own test and not the adjustment)."""
    target_moved = {t.regime for t in targets if t.verdict != NOT_MOVED}
    marked = response.marked(alpha)
    return [f"regime {name}: no variable moved (Benjamini-Hochberg adjusted p <= {alpha:g}); "
            "the regime looks like a control" for i, name in enumerate(response.regimes)
            if name not in target_moved and not np.any(marked[i])]


def with_learner_verdicts(result: CheckResult, verdicts: list) -> CheckResult:
    """The check with each declared target's conditional test taken from the learner.

    `verdicts` are `pipeline.learner.targets.TargetVerdict` (given the target's neighbours
    in the learned skeleton, a better conditioning set than the check's estimate). The
    target warnings, and those of regimes that look like a control, are rewritten to
    match; a target that failed both tests is reported by the learner's own warning.
    """
    by_key = {(v.regime, v.target): v for v in verdicts}
    if not by_key:
        return result
    old_texts = {w for t in result.targets for w in _target_warning(t, result.alpha)}
    old_texts |= set(_control_like(result.response, result.targets, result.alpha))
    targets = []
    for t in result.targets:
        v = by_key.get((t.regime, t.target))
        if v is not None:
            verdict = (MOVED if t.pvalue <= result.alpha else
                       MOVED_GIVEN if v.acted else NOT_MOVED)
            t = replace(t, conditional_pvalue=v.p_conditional, given=v.given, verdict=verdict)
        targets.append(t)
    warnings = [w for w in result.warnings if w not in old_texts]
    for t in targets:
        if (t.regime, t.target) in by_key and t.verdict == NOT_MOVED:
            continue  # the learner says it, with what it does about it
        warnings.extend(_target_warning(t, result.alpha))
    warnings.extend(_control_like(result.response, targets, result.alpha))
    return replace(result, targets=targets, warnings=warnings)


def neighbour_estimate(moments: Moments, alpha: float, max_variables: int = 500,
                       numbers: StoredNumbers | None = None) -> np.ndarray | None:
    """Pairs with a partial correlation given all other variables (a Markov blanket estimate).

    Per regime with more samples than variables + 3, the partial correlations given the
    rest are read off the inverse of the correlation matrix; the regimes are combined as
    in the stratified Fisher z test (`pipeline.independence.combine`). Returns a symmetric
    (p, p) boolean matrix of the pairs with combined p <= alpha, or None when no regime
    has enough samples or there are more than `max_variables` variables. The p-values
    are kept in `numbers` when given.
    """
    p = len(moments.variables)
    if p < 2 or p > max_variables:
        return None
    numbers = numbers if numbers is not None else StoredNumbers()
    got = numbers.get("neighbours", lambda: _neighbour_pvalues(moments))
    if got["pvalue"].size == 0:
        return None
    adj = (got["pvalue"] <= alpha) & got["tested"]
    np.fill_diagonal(adj, False)
    return adj & adj.T


def _neighbour_pvalues(moments: Moments) -> dict[str, np.ndarray]:
    """The combined p-value of each pair's partial correlation given the rest, and whether
    a regime tested it; (0, 0) arrays when no regime has enough samples."""
    from pipeline.independence.combine import stratified_pvalues

    p = len(moments.variables)
    const = moments.constant()
    zs, ws = [], []
    for k in range(len(moments.regimes)):
        n = int(moments.count[k])
        keep = np.flatnonzero(~const[k])
        if n - keep.size - 1 <= 0 or keep.size < 2:
            continue
        sc = moments.scatter[k][np.ix_(keep, keep)]
        d = np.sqrt(np.diagonal(sc))
        corr = sc / np.outer(d, d)
        try:
            prec = np.linalg.inv(corr)
        except np.linalg.LinAlgError:
            continue
        pd_ = np.sqrt(np.diagonal(prec))
        r = np.zeros((p, p))
        r[np.ix_(keep, keep)] = -prec / np.outer(pd_, pd_)
        w = np.zeros((p, p))
        w[np.ix_(keep, keep)] = max(n - (p - 2) - 3, 0)
        zs.append(np.arctanh(np.clip(r, -1 + 1e-12, 1 - 1e-12)))
        ws.append(w)
    if not zs:
        return {"pvalue": np.zeros((0, 0)), "tested": np.zeros((0, 0), dtype=bool)}
    z = np.stack(zs, axis=-1).reshape(p * p, -1)
    w = np.stack(ws, axis=-1).reshape(p * p, -1)
    return {"pvalue": stratified_pvalues(z, w)[1].reshape(p, p),
            "tested": w.sum(axis=1).reshape(p, p) > 0}


def distribution_shape(moments: Moments, skew_limit: float = 1.0,
                       kurtosis_limit: float = 3.0) -> DistributionShape | None:
    """Within-regime skewness and excess kurtosis of each variable, averaged over regimes.

    A variable is far from Gaussian when ``|skewness| > skew_limit`` or ``excess kurtosis >
    kurtosis_limit`` (rules of thumb: common practice). None without fourth moments.
    """
    if moments.m4 is None:
        return None
    skew, kurt = moments.shape()
    n = np.asarray(moments.count, dtype=float)[:, None] * np.isfinite(skew)
    total = np.where(n.sum(axis=0) > 0, n.sum(axis=0), 1.0)
    mean_skew = np.nansum(np.nan_to_num(skew) * n, axis=0) / total
    mean_kurt = np.nansum(np.nan_to_num(kurt) * n, axis=0) / total
    far = tuple(v for v, s, k in zip(moments.variables, mean_skew, mean_kurt, strict=True)
                if abs(s) > skew_limit or k > kurtosis_limit)
    return DistributionShape(tuple(moments.variables), mean_skew, mean_kurt, far)


def settle_reference(moments: Moments, design: Design, alpha: float,
                     numbers: StoredNumbers | None = None) -> tuple[Design, list[str]]:
    """Keep one reference when control batches differ; the others are analysed apart.

    The largest control (the first of equal size) is the reference; every other control is
    tested against it (marginal invariance of each variable, Bonferroni over the
    variables) and, when it differs, leaves the reference: it stays a regime of its own
    with no declared target. Its rows still count in the tests of independence (which
    stratify by regime), its intervention node is joined to nothing, so a batch effect
    orients no edge, and the variables the batch effect moves are reported as off-target
    findings. (Learning its targets instead would let a batch effect too small to detect
    on one variable orient that variable's edges: measured worse on simulated batches.)
    Controls that agree stay pooled into the reference.

    Returns the new design and the names of the controls analysed apart. The tests'
    p-values are kept in `numbers` when given.
    """
    controls = list(design.reference)
    if len(controls) < 2:
        return design, []
    sizes = [int(moments.count[moments.index(r.name)]) for r in controls]
    chosen = controls[int(np.argmax(sizes))].name
    others = [r.name for r in controls if r.name != chosen]
    p = len(moments.variables)

    def compute() -> dict[str, np.ndarray]:
        from pipeline.independence.invariance import regime_pair

        every, empty = np.arange(p), np.zeros((p, 0), dtype=np.intp)
        return {"pvalue": np.array([regime_pair(moments, [chosen], name).test(every, empty)
                                    .pvalue for name in others]).reshape(len(others), p)}

    numbers = numbers if numbers is not None else StoredNumbers()
    pvalue = numbers.get(f"controls against {json.dumps([chosen, *others])}", compute)["pvalue"]
    demoted = [name for name, row in zip(others, pvalue, strict=True)
               if np.any(np.minimum(1.0, row * p) <= alpha)]
    if not demoted:
        return design, []
    regimes = tuple(replace(r, reference=False) if r.name in demoted else r
                    for r in design.regimes)
    return replace(design, regimes=regimes), demoted


def control_agreement(intake: Intake, alpha: float = 0.01,
                      numbers: StoredNumbers | None = None) -> ControlAgreement:
    """Test each control regime against the pooled other controls (marginal invariance).

    The tests' numbers are kept in `numbers` when given.

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

    def compute() -> dict[str, np.ndarray]:
        from pipeline.independence.invariance import regime_pair, standardized_difference

        every = np.arange(p)
        shift, stat, pval = (np.zeros((len(names), p)) for _ in range(3))
        for i, name in enumerate(names):
            others = [m for m in names if m != name]
            n_o, mean_o, scatter_o = moments.pooled(others)
            k = moments.index(name)
            res = regime_pair(moments, others, name).test(every,
                                                          np.zeros((p, 0), dtype=np.intp))
            stat[i], pval[i] = res.statistic, res.pvalue
            sd = np.sqrt(np.diagonal(scatter_o) / max(n_o - 1, 1))
            shift[i] = standardized_difference(moments.mean[k] - mean_o, sd)
        return {"shift": shift, "statistic": stat, "pvalue": pval}

    numbers = numbers if numbers is not None else StoredNumbers()
    got = numbers.get(f"controls {json.dumps(list(names))}", compute)
    adjusted = np.minimum(1.0, got["pvalue"] * p)
    return ControlAgreement(names, tuple(moments.variables), got["shift"], got["statistic"],
                            got["pvalue"], adjusted, alpha)


def _mentioned(warnings: list[str], *words: str) -> bool:
    """True if one warning (e.g. from the intake) already names all `words`."""
    pats = [re.compile(rf"(?<![\w.-]){re.escape(w)}(?![\w.-])") for w in words]
    return any(all(p.search(w) for p in pats) for w in warnings)


