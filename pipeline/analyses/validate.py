"""Held-out validation: does the learned graph predict an experiment it never saw?

Without a known true graph, the honest test of a causal graph is whether it predicts
the outcome of interventions left out of learning, the standard of the field's
community challenges [1]_. For each held-out regime k with targets T:

1. **learn without k**: the graph is learned from the other regimes (the reference and
   every other perturbation) with the options of ``learn``. The statistics are read
   once; the held-out run uses the same per-regime statistics without regime k. Its
   tests are stored under a key of their own (`holdout_fingerprint`: the input
   fingerprint plus the sorted names of the regimes used), since every test among
   measured variables stratifies over all the regimes of its design: the results of
   different regime sets never mix.
2. **predict**: under faithfulness an intervention on T shifts exactly the descendants
   of T [2]_. The score of a variable is its descendant fraction: the share of the DAGs
   of the learned class in which it is a descendant of a node of T
   (`pipeline.graphs.descendants`; exact when the class has at most `class_samples`
   DAGs, else estimated from that many uniform draws). A graph that is not a valid
   essential graph cannot be sampled: it is scored by reachability instead (1 along
   directed edges, 0.5 through an undirected edge), with a note. The targets
   themselves are not scored (they move by design). A variable is a predicted mover
   when its score is at least `threshold` (default 0.5: at least half of the DAGs of
   the class make it a descendant; an edge left undirected between a target and a
   variable thus counts as a prediction). With the true graph and a fully identified
   class, the predicted movers are exactly the true descendants; with threshold 1, the
   definite descendants, which are true descendants whatever the class.
3. **observe**: the observed movers of regime k are the variables whose marginal law
   moved against the reference, significantly and by at least `min_shift` reference
   sd (`pipeline.analyses.prediction.observed_movers`).
4. **score**: per regime and pooled over all held-out regimes, the precision and
   recall of the predicted movers and the ROC AUC of the scores against the observed
   movers (`pipeline.analyses.prediction`).

Two baselines are scored the same way: **observational**, the descendant fractions in
the class of the graph learned from the reference regimes alone (no intervention
node); and **correlation**, ``max over t in T of |corr(v, t)|`` in the pooled
reference, whose predicted movers are the variables significantly correlated with a
target (Fisher z test, Bonferroni over the targets, then Benjamini-Hochberg over the
scored variables, at `alpha`).
Regimes marked ``known=no`` are skipped: their listed targets are only hints, so there
is nothing to start a prediction from. So are regimes none of whose targets is an
observed mover (a failed perturbation: no descendant is expected to move), with a note.

References
----------
.. [1] Hill, S. M. et al. (2016). Inferring causal molecular networks: empirical
   assessment through a community-based effort. *Nature Methods* 13, 310-318.
.. [2] Eberhardt, F. & Scheines, R. (2007). Interventions and causal inference.
   *Philosophy of Science* 74(5), 981-995.
"""

from __future__ import annotations

import hashlib
import json
import numbers
import secrets
from collections.abc import Callable, Sequence
from contextlib import nullcontext
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np
from scipy.special import ndtr

from pipeline.analyses.prediction import (
    adjusted_pvalues,
    observed_movers,
    precision_recall,
    roc_auc,
)
from pipeline.design import Design
from pipeline.errors import InputError, nearest_names
from pipeline.options import (
    COLLIDER_RULES,
    TARGET_MODES,
    TESTS,
    check_alpha,
    check_choice,
    check_data_paths,
    check_max_condition_size,
    check_regimes_path,
    check_whole,
    split_names,
)
from pipeline.results.validate import METHODS, HeldOutRegime, Prediction, ValidationResult
from pipeline.stats.moments import Moments

__all__ = ["validate", "validate_from_moments", "resolve_holdout", "holdout_design",
           "holdout_moments", "holdout_fingerprint", "class_scores", "METHODS"]

ProgressArg = bool | Callable[[str, int, int], None] | None


# -- holding a regime out ---------------------------------------------------------------------
def holdout_design(design: Design, held_out: Sequence[str]) -> Design:
    """`design` without the regimes `held_out` (variables and the other regimes unchanged)."""
    gone = set(held_out)
    return replace(design, regimes=tuple(r for r in design.regimes if r.name not in gone))


def holdout_moments(moments: Moments, design: Design) -> Moments:
    """The statistics of the regimes of `design` only (in the order of `moments`)."""
    keep = {r.name for r in design.regimes}
    idx = [k for k, name in enumerate(moments.regimes) if name in keep]
    return Moments(moments.variables, tuple(moments.regimes[k] for k in idx),
                   moments.count[idx], moments.mean[idx], moments.scatter[idx])


def holdout_fingerprint(fingerprint: str, regimes: Sequence[str]) -> str:
    """The store key of the tests of a run on a subset of the regimes of `fingerprint`.

    SHA-256 of the input fingerprint and the sorted names of the regimes used: two runs
    share stored tests iff they use the same inputs and the same regimes.
    """
    text = json.dumps({"inputs": fingerprint, "regimes": sorted(regimes)})
    return hashlib.sha256(b"orienteer.holdout/1\0" + text.encode()).hexdigest()


# -- the computation -------------------------------------------------------------------------
def _check_min_shift(value: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, numbers.Real) \
            or not np.isfinite(value) or value < 0:
        raise InputError(f"--min-shift {value!r}: expected a number >= 0 (an effect size in "
                         f"reference standard deviations, for instance 0.2)")
    return float(value)


def _check_threshold(value: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, numbers.Real) or not 0 < value <= 1:
        raise InputError(f"threshold {value!r}: expected a number in (0, 1] (the descendant "
                         f"fraction from which a variable is a predicted mover)")
    return float(value)


def resolve_holdout(design: Design, holdout: Any = None, holdout_all: bool = False
                    ) -> list[str]:
    """The held-out regime names, checked: known, not part of the reference.

    None (and `holdout_all`) means every non-reference regime.
    """
    names = list(split_names(holdout))
    if names and holdout_all:
        raise InputError(f"--holdout {','.join(names)} and --holdout-all: give one of them")
    if not design.interventional:
        raise InputError("regimes: no perturbation regime to hold out; validation needs at "
                         "least one regime with targets besides the reference")
    if not names:
        return [r.name for r in design.interventional]
    every = [r.name for r in design.regimes]
    for name in names:
        if name not in every:
            raise InputError(f"--holdout {name}: no such regime{nearest_names(name, every)}; "
                             f"regimes are {', '.join(every)}")
        if design.regime(name).reference:
            raise InputError(f"--holdout {name}: {name} is part of the reference (control); "
                             f"hold out perturbation regimes only")
    return list(dict.fromkeys(names))


def validate_from_moments(design: Design, moments: Moments, *, holdout: Any = None,
                          alpha: float = 0.01, min_shift: float = 0.2,
                          max_condition_size: int | None = None, targets: str = "declared",
                          collider_rule: str = "majority", test: str = "gaussian",
                          class_samples: int = 1000, threshold: float = 0.5,
                          seed: int | None = None, store: Any = None,
                          fingerprint: str | None = None,
                          progress: ProgressArg = False) -> ValidationResult:
    """Held-out validation from statistics in memory (see the module docstring).

    Parameters
    ----------
    design : Design
    moments : Moments
        Statistics of every regime of `design`.
    holdout : names or ``"R1,R2"``, optional
        Regimes to hold out, one at a time; default every non-reference regime.
    alpha, max_condition_size, targets, collider_rule, test
        As for `pipeline.learn` (`alpha` also for the observed movers).
    min_shift : float >= 0
        Effect-size floor of an observed mover, in reference standard deviations.
    class_samples : int >= 1
        DAGs drawn per class (classes at most this large are listed exactly).
    threshold : float in (0, 1]
        Descendant fraction from which a variable is a predicted mover.
    seed : int, optional
        Seed of the DAG draws; drawn and recorded in the settings when None.
    store : TestStore, optional
        With `fingerprint`: each held-out run answers from and writes to it under
        `holdout_fingerprint`.
    progress : bool or callable

    Returns
    -------
    ValidationResult

    Raises
    ------
    InputError
        An argument is out of range, a held-out regime is unknown or a reference regime.
    """
    alpha = check_alpha(alpha)
    min_shift = _check_min_shift(min_shift)
    max_k = check_max_condition_size(max_condition_size)
    targets = check_choice("--targets", targets, TARGET_MODES)
    collider_rule = check_choice("--collider-rule", collider_rule, COLLIDER_RULES)
    test = check_choice("--test", test, TESTS)
    class_samples = check_whole("--class-samples", class_samples, 1)
    threshold = _check_threshold(threshold)
    if seed is not None:
        seed = check_whole("--seed", seed, 0)
    else:
        seed = secrets.randbelow(2**31)
    if store is not None and not fingerprint:
        raise InputError("validate_from_moments: a store needs the fingerprint of the inputs")
    names = resolve_holdout(design, holdout)

    from pipeline.independence.invariance import response_matrix
    from pipeline.workflow import learn_from_moments

    learn_options = dict(alpha=alpha, max_condition_size=max_k, targets=targets,
                         collider_rule=collider_rule, test=test)
    settings = {"alpha": alpha, "min_shift": min_shift, "threshold": threshold,
                "class_samples": class_samples, "seed": seed, "max_condition_size": max_k,
                "targets": targets, "test": test, "collider_rule": collider_rule,
                "holdout": names, "fingerprint": fingerprint or ""}
    if callable(progress):
        bars: Any = nullcontext(progress)
    else:
        from pipeline.progress import Progress

        bars = Progress(enabled=None if progress else False)

    def learn(sub: Design, *, check: bool, report) -> Any:
        key = holdout_fingerprint(fingerprint, [r.name for r in sub.regimes]) \
            if store is not None else None
        return learn_from_moments(sub, holdout_moments(moments, sub), store=store,
                                  fingerprint=key, check=check, progress=report or False,
                                  **learn_options)

    notes: list[str] = []
    regimes: list[HeldOutRegime] = []
    resp = response_matrix(moments, design)
    row_of = {name: i for i, name in enumerate(resp.regimes)}
    n_ref, _, scatter_ref = moments.pooled([r.name for r in design.reference])
    corr = _correlation(scatter_ref)
    effect = design.intervention_targets()
    position = {v: i for i, v in enumerate(design.variables)}
    with bars as report:
        report = report if progress else None
        # the observational baseline: the reference regimes alone, learned once
        observational = learn(replace(design, regimes=design.reference), check=False,
                              report=report)
        for done, name in enumerate(names):
            if report is not None:
                report("held-out regimes", done, len(names))
            regime = design.regime(name)
            acted = sorted(effect[name], key=position.__getitem__)
            if not regime.known:
                notes.append(f"regime {name} skipped: it is marked known=no, so its targets "
                             "are only hints and there is nothing to predict from")
                continue
            if not acted:
                notes.append(f"regime {name} skipped: it acts on the same targets as the "
                             "reference, so it should move nothing")
                continue
            i = row_of[name]
            hit = np.array([position[t] for t in acted], dtype=np.intp)
            if not observed_movers(resp.pvalue[i, hit], resp.shift[i, hit],
                                   resp.sd_ratio[i, hit], alpha=alpha,
                                   min_shift=min_shift)[0].any():
                notes.append(f"regime {name} skipped: its target(s) {', '.join(acted)} did "
                             f"not move by {min_shift:g} sd or more (a failed perturbation?), "
                             "so no descendant is expected to move")
                continue
            learned = learn(holdout_design(design, [name]), check=True, report=report)
            scored = [v for v in design.variables if v not in set(acted)]
            cols = np.array([position[v] for v in scored], dtype=np.intp)
            moved, adjusted = observed_movers(resp.pvalue[i, cols], resp.shift[i, cols],
                                              resp.sd_ratio[i, cols], alpha=alpha,
                                              min_shift=min_shift)
            graph_scores, how, graph_info = class_scores(
                learned.graph, acted, scored, valid=learned.valid, samples=class_samples,
                seed=seed)
            if how.startswith("reachability"):
                notes.append(f"regime {name}: the graph learned without it is not a valid "
                             "essential graph, so its DAGs cannot be listed; scored by "
                             "reachability (1 along directed edges, 0.5 through an "
                             "undirected edge)")
            obs_scores, obs_how, _ = class_scores(
                observational.graph, acted, scored, valid=observational.valid,
                samples=class_samples, seed=seed)
            corr_scores, corr_pred = _correlation_scores(corr, n_ref, acted, scored,
                                                         position, alpha)
            regimes.append(HeldOutRegime(
                regime=name, targets=tuple(acted), variables=tuple(scored),
                shift=resp.shift[i, cols], sd_ratio=resp.sd_ratio[i, cols],
                pvalue=resp.pvalue[i, cols], adjusted=adjusted, moved=moved,
                scores={"graph": graph_scores, "observational": obs_scores,
                        "correlation": corr_scores},
                predicted={"graph": graph_scores >= threshold,
                           "observational": obs_scores >= threshold,
                           "correlation": corr_pred},
                scoring={"graph": how, "observational": obs_how}, graph=graph_info))
        if report is not None:
            report("held-out regimes", len(names), len(names))
    if not regimes:
        notes.append("no regime could be held out and scored")
    obs_graph = observational.graph
    return ValidationResult(
        regimes=regimes, table=_table(regimes), settings=settings, notes=notes,
        observational={"edges": obs_graph.number_of_edges(),
                       "directed": len(list(obs_graph.directed_edges())),
                       "class_size": _class_size(observational)},
        warnings=list(design.warnings))


def _class_size(result: Any) -> int | None:
    try:
        return int(result.class_size)
    except (ValueError, TypeError):
        return None


def class_scores(graph: Any, targets: Sequence[str], variables: Sequence[str], *,
                 valid: bool = True, samples: int = 1000, seed: int | None = None
                 ) -> tuple[np.ndarray, str, dict]:
    """Descendant fractions of `variables` from `targets` in the class of a learned graph.

    Parameters
    ----------
    graph : PDAG
        The learned essential graph.
    targets, variables : names of nodes of `graph`
    valid : bool
        False for a graph that is not a valid essential graph: scored by reachability.
    samples, seed
        As for `pipeline.graphs.descendants.descendant_fractions`.

    Returns
    -------
    scores : float array, one per variable
    how : str, how they were obtained (``"exact over 8 DAGs"``, ...)
    info : dict, edges, directed edges, validity and class size of the graph
    """
    from pipeline.graphs.descendants import descendant_fractions, reachability_scores

    info = {"edges": graph.number_of_edges(), "directed": len(list(graph.directed_edges())),
            "valid": bool(valid), "class_size": None}
    if not valid:
        frac = reachability_scores(graph, targets)
        how = "reachability (not a valid essential graph)"
    else:
        d = descendant_fractions(graph, targets, samples=samples, seed=seed)
        frac = d.fractions
        info["class_size"] = d.class_size
        how = (f"exact over {d.dags} DAGs" if d.method == "exact"
               else f"{d.dags} sampled DAGs of {d.class_size}")
    return np.array([frac[v] for v in variables], dtype=float), how, info


def _correlation(scatter: np.ndarray) -> np.ndarray:
    sd = np.sqrt(np.clip(np.diagonal(scatter), 0.0, None))
    with np.errstate(divide="ignore", invalid="ignore"):
        c = scatter / np.outer(sd, sd)
    return np.clip(np.nan_to_num(c, nan=0.0, posinf=0.0, neginf=0.0), -1.0, 1.0)


def _correlation_scores(corr: np.ndarray, n: int, acted: list[str], scored: list[str],
                        position: dict, alpha: float) -> tuple[np.ndarray, np.ndarray]:
    """``max_t |corr(v, t)|`` and the predicted movers (Fisher z, BH, at alpha)."""
    rows = np.array([position[v] for v in scored], dtype=np.intp)
    cols = np.array([position[t] for t in acted], dtype=np.intp)
    score = np.abs(corr[np.ix_(rows, cols)]).max(axis=1) if rows.size else np.zeros(0)
    z = np.arctanh(np.minimum(score, 1 - 1e-15)) * np.sqrt(max(n - 3, 0))
    pvalue = np.minimum(1.0, 2.0 * ndtr(-z) * max(len(cols), 1))  # Bonferroni over targets
    return score, adjusted_pvalues(pvalue) <= alpha


def _table(regimes: list[HeldOutRegime]) -> list[Prediction]:
    """Per held-out regime and method, then pooled ("overall"), the measures."""
    rows: list[Prediction] = []
    for r in regimes:
        for m in METHODS:
            rows.append(_measure("regime", r.regime, m, r.scores[m], r.predicted[m], r.moved))
    def pooled(parts: list[np.ndarray], dtype: type) -> np.ndarray:
        return np.concatenate(parts) if parts else np.zeros(0, dtype=dtype)

    moved = pooled([r.moved for r in regimes], bool)
    for m in METHODS:
        rows.append(_measure("overall", "overall", m, pooled([r.scores[m] for r in regimes],
                                                             float),
                             pooled([r.predicted[m] for r in regimes], bool), moved))
    return rows


def _measure(scope: str, regime: str, method: str, scores: np.ndarray,
             predicted: np.ndarray, moved: np.ndarray) -> Prediction:
    n_pred, n_obs, tp, precision, recall = precision_recall(predicted, moved)
    return Prediction(scope=scope, regime=regime, method=method, scored=int(moved.size),
                      observed=n_obs, predicted=n_pred, true_positives=tp,
                      precision=precision, recall=recall,
                      auc=roc_auc(scores, moved) if moved.size else None)


# -- from files -------------------------------------------------------------------------------
def validate(data: str | Path | Sequence[str | Path], regimes: str | Path, *,
             out: str | Path | None = None, holdout: Any = None, holdout_all: bool = False,
             alpha: float = 0.01, min_shift: float = 0.2, max_condition_size: int | None = None,
             targets: str = "declared", reference: str | None = None,
             regime_column: str = "regime", ignore_columns: Sequence[str] | str = (),
             drop_missing: bool = False, test: str = "gaussian",
             collider_rule: str = "majority", class_samples: int = 1000,
             threshold: float = 0.5, seed: int | None = None,
             progress: ProgressArg = False, decimal: str | None = None,
             regime_from: str | None = None, sheet: str | None = None,
             genes: str | Path | Sequence[str] | None = None) -> ValidationResult:
    """Hold out regimes of measurement files one at a time and score the predictions.

    Parameters
    ----------
    data : path or sequence of paths
        Measurement files (CSV or Parquet), read as one table.
    regimes : path
        The regimes file.
    out : path, optional
        Output folder: its ``tests.sqlite`` is used and updated (the inputs are read once
        and kept there), ``validation.csv`` and ``validation.json`` are written (earlier
        ones moved to ``out/history/``), and ``report.html`` is rendered again when the
        folder holds a ``learn`` result of the same inputs.
    holdout : names or ``"R1,R2"``, optional
        Regimes to hold out; default (and with `holdout_all`) every non-reference regime.
    holdout_all : bool
        Hold out every non-reference regime (do not combine with `holdout`).
    alpha, min_shift, max_condition_size, targets, collider_rule, class_samples,
    threshold, seed
        As for `validate_from_moments`.
    reference, regime_column, ignore_columns, drop_missing, test, decimal, regime_from, sheet,
    genes
        As for `pipeline.intake.read.read_inputs`.
    progress : bool or callable

    Returns
    -------
    ValidationResult

    Raises
    ------
    InputError
        An argument or an input file is wrong; the message names it.
    """
    check_alpha(alpha)
    _check_min_shift(min_shift)
    check_choice("--test", test, TESTS)
    paths, regimes_path = check_data_paths(data), check_regimes_path(regimes)
    if out is not None and Path(out).exists() and not Path(out).is_dir():
        raise InputError(f"--out {out}: is a file; name a folder for the result files")
    if split_names(holdout) and holdout_all:
        raise InputError(f"--holdout {','.join(split_names(holdout))} and --holdout-all: give "
                         "one of them")
    from pipeline.intake.reading import reading_of
    from pipeline.stats.fingerprint import fingerprint_inputs
    from pipeline.workflow import inputs_through_store

    ignore = split_names(ignore_columns)
    reading = reading_of(decimal, regime_from, sheet, genes)
    options = dict(regime_column=regime_column, ignore_columns=ignore,
                   drop_missing=bool(drop_missing), reference=reference, test=test,
                   decimal=reading.decimal, regime_from=reading.regime_from,
                   sheet=reading.sheet, genes=reading.genes)
    fingerprint = fingerprint_inputs(paths, regimes_path, out=out, **options)
    # the held-out regimes are checked before any file is created
    intake, store, _, _ = inputs_through_store(
        paths, regimes_path, out, fingerprint, options, progress,
        before_store=lambda i: resolve_holdout(i.design, holdout, holdout_all))
    design, moments, warnings = intake.design, intake.moments, list(intake.warnings)
    try:
        result = validate_from_moments(
            design, moments, holdout=holdout, alpha=alpha, min_shift=min_shift,
            max_condition_size=max_condition_size, targets=targets,
            collider_rule=collider_rule, test=test, class_samples=class_samples,
            threshold=threshold, seed=seed, store=store, fingerprint=fingerprint,
            progress=progress)
    finally:
        if store is not None:
            store.close()
    result.settings.update(reference=reference, regime_column=regime_column,
                           ignore_columns=list(ignore), drop_missing=bool(drop_missing))
    result.warnings = list(dict.fromkeys(warnings + result.warnings))
    if out is not None:
        result.run["files"] = {k: str(v) for k, v in result.save(out).items()}
        result.run["report"] = _refresh(Path(out), fingerprint, result)
    return result


def _refresh(folder: Path, fingerprint: str, result: ValidationResult) -> str | None:
    """Render the folder's report again when it holds a learn run of the same inputs."""
    from pipeline.results.files import refresh_report

    path = folder / "result.json"
    if not path.is_file():
        result.run["report_note"] = (f"no report: {folder} holds no learn result; run "
                                     f"`orienteer learn ... --out {folder}` with the same "
                                     "inputs to get report.html with this section")
        return None
    try:
        settings = json.loads(path.read_text(encoding="utf-8")).get("settings", {})
    except (json.JSONDecodeError, UnicodeDecodeError):
        settings = {}
    if settings.get("fingerprint") != fingerprint:
        result.run["report_note"] = (f"report.html not updated: the learn result in {folder} "
                                     "comes from other inputs or options")
        return None
    return str(refresh_report(folder))
