"""The ``learn`` workflow: inputs to a saved result, reusing the test store.

`learn` is the Python face of ``orienteer learn``. It validates its arguments once,
then:

1. fingerprints the raw input bytes and the options that change the statistics (with an
   output folder, an input file unchanged since its digest was kept there is not read:
   `pipeline.stats.fingerprint`);
2. with an output folder, opens ``tests.sqlite`` there; if the store holds the
   statistics of that fingerprint, it takes them from there and parses no data file,
   else it reads the inputs (`pipeline.intake.read.read_inputs`) and stores them; the
   digests of the files it hashed are kept there too;
3. checks the inputs from the statistics (`pipeline.analyses.check.check_intake`);
4. runs the learner (`pipeline.learner.pc.learn_graph`) with the Gaussian tester behind
   the store, so that only tests never run before are computed;
5. wraps the outcome in a `LearnResult` with its provenance (input files with sizes and
   hashes, version, date, command line: `pipeline.provenance`) and, with an output
   folder, saves its files.

`learn_from_moments` runs steps 3-5 on sufficient statistics already in memory.
"""

from __future__ import annotations

import gc
import time
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager, nullcontext
from pathlib import Path
from typing import TYPE_CHECKING, Any

from pipeline.design import Design
from pipeline.errors import InputError
from pipeline.options import (
    COLLIDER_RULES,
    TARGET_MODES,
    TESTS,
    check_alpha,
    check_bootstrap_options,
    check_choice,
    check_data_paths,
    check_max_condition_size,
    check_regimes_path,
    split_names,
)
from pipeline.stats.fingerprint import STORE_NAME
from pipeline.stats.moments import Moments

if TYPE_CHECKING:  # imported where a result is made: the output layer pulls in pandas
    from pipeline.intake.record import Intake
    from pipeline.results.learn import LearnResult

__all__ = ["learn", "learn_from_moments", "TARGET_MODES", "TESTS", "COLLIDER_RULES",
           "STORE_NAME"]

ProgressArg = bool | Callable[[str, int, int], None] | None


def _check_options(alpha, max_condition_size, targets, test, collider_rule):
    return (check_alpha(alpha), check_max_condition_size(max_condition_size),
            check_choice("--targets", targets, TARGET_MODES), check_choice("--test", test, TESTS),
            check_choice("--collider-rule", collider_rule, COLLIDER_RULES))


# -- the workflow -------------------------------------------------------------------------------
@contextmanager
def _gc_paused() -> Iterator[None]:
    """Pause Python's cyclic garbage collector inside the block (restored afterwards).

    The learner and the result files allocate tens of thousands of small objects (test
    results, evidence records) that reference counting frees; with the collector on they
    trigger a full collection of the whole heap (pandas, scipy, ...) that costs more than
    a rerun from the store computes. Nothing computed depends on it. (Reading the data
    files runs outside: its chunks are left to the collector.)
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


def learn(data: str | Path | Sequence[str | Path], regimes: str | Path, *,
          out: str | Path | None = None, alpha: float = 0.01,
          max_condition_size: int | None = None, targets: str = "declared",
          reference: str | None = None, regime_column: str = "regime",
          ignore_columns: Sequence[str] | str = (), drop_missing: bool = False,
          test: str = "gaussian", collider_rule: str = "majority", seed: int | None = None,
          bootstrap: int = 0, jobs: int = 1, progress: ProgressArg = False,
          decimal: str | None = None, regime_from: str | None = None, sheet: str | None = None,
          genes: str | Path | Sequence[str] | None = None, picture: bool = False
          ) -> LearnResult:
    """Learn the interventional essential graph of measurement files, with per-edge evidence.

    Parameters
    ----------
    data : path or sequence of paths
        Measurement files (any format of `pipeline.intake.formats`), read as one table.
    regimes : path
        The regimes file.
    out : path, optional
        Output folder: its ``tests.sqlite`` is used and updated, and the result files are
        written there (earlier ones moved to ``out/history/``).
    alpha : float in (0, 1)
        Significance level of every test.
    max_condition_size : int >= 0 or None
        Largest conditioning set tried (None: no limit).
    targets : {"declared", "learn"}
        Take declared targets as given, or learn every regime's targets.
    reference, regime_column, ignore_columns, drop_missing, test
        As for `pipeline.intake.read.read_inputs`.
    collider_rule : {"majority", "conservative", "standard"}
    seed : int >= 0, optional
        Seed of the bootstrap resamples (None: a fresh one, recorded in the settings).
    bootstrap : int >= 0
        Bootstrap resamples of the rows within each regime, each relearned; every edge
        gets its adjacency and orientation frequencies (`pipeline.analyses.bootstrap`).
    jobs : int >= 1
        Processes relearning the resamples (the result does not depend on it).
    progress : bool or callable
        True: progress bars on a terminal; a callable receives ``(label, done, total)``.
    decimal, regime_from, sheet, genes
        How to read the files, as for `pipeline.intake.read.read_inputs`.
    picture : bool
        With `out`, also write ``graph.png`` (a picture of the graph for slides).

    Returns
    -------
    LearnResult

    Raises
    ------
    InputError
        An argument or an input file is wrong; the message names it.
    """
    # 0. validate everything once
    alpha, max_k, targets, test, collider_rule = _check_options(
        alpha, max_condition_size, targets, test, collider_rule)
    from pipeline.intake.reading import reading_of

    reading = reading_of(decimal, regime_from, sheet, genes)
    paths, regimes_path = check_data_paths(data), check_regimes_path(regimes)
    if out is not None and Path(out).exists() and not Path(out).is_dir():
        raise InputError(f"--out {out}: is a file; name a folder for the result files")
    ignore = split_names(ignore_columns)
    bootstrap, seed, jobs = check_bootstrap_options(bootstrap, seed, jobs)
    started = time.perf_counter()

    from pipeline.stats.fingerprint import fingerprint_inputs

    # 1. the fingerprint: raw bytes and the options that change the statistics
    options = dict(regime_column=regime_column, ignore_columns=ignore,
                   drop_missing=bool(drop_missing), reference=reference, test=test,
                   decimal=reading.decimal, regime_from=reading.regime_from,
                   sheet=reading.sheet, genes=reading.genes)
    fingerprint = fingerprint_inputs(paths, regimes_path, out=out, **options)

    # 2. statistics from the store, or read once and stored (the store file is created
    #    only once the inputs have been read without error: no partial output)
    intake, store, from_store, notice = inputs_through_store(
        paths, regimes_path, out, fingerprint, options, progress)
    try:
        settings = {"alpha": alpha, "max_condition_size": max_k, "targets": targets,
                    "test": test, "collider_rule": collider_rule, "reference": reference,
                    "regime_column": regime_column, "ignore_columns": list(ignore),
                    "drop_missing": bool(drop_missing), "fingerprint": fingerprint}
        settings.update(_reading_settings(reading))
        if seed is not None:
            settings["seed"] = seed
        if bootstrap:
            from pipeline.analyses.bootstrap import fresh_seed

            settings["bootstrap"] = bootstrap
            settings.setdefault("seed", fresh_seed())
        with _gc_paused():
            result = _learn(intake.design, intake.moments, intake=intake, store=store,
                            fingerprint=fingerprint, alpha=alpha, max_condition_size=max_k,
                            targets=targets, collider_rule=collider_rule, settings=settings,
                            progress=progress, check=True)
            result.run["from_store"] = from_store
            if notice:
                result.run["notice"] = notice
            if bootstrap:
                _add_bootstrap(result, paths, intake, options, reading, jobs, progress)
            result.run["seconds"] = time.perf_counter() - started
            # where the result comes from: inputs (sizes, hashes), version, date, command
            from pipeline.provenance import provenance

            result.provenance = provenance(paths, regimes_path)
            # 5. the files
            if out is not None:
                result.run["files"] = {k: str(v) for k, v in
                                       result.save(out, picture=picture).items()}
                result.run["files"][STORE_NAME] = str(Path(out) / STORE_NAME)
    finally:
        if store is not None:
            store.close()
    return result


def inputs_through_store(paths: list[Path], regimes_path: Path, out: str | Path | None,
                         fingerprint: str, options: dict[str, Any], progress: ProgressArg,
                         before_store: Callable[[Intake], None] | None = None):
    """The inputs' design and statistics: from ``out/tests.sqlite`` when it holds them under
    `fingerprint`, else read from the files (and kept in the store when `out` is given).

    `before_store` is called with the intake before a new store file is created, so a
    check that fails leaves no file behind. The digest records of the input files hashed
    in this process are kept in the store (`pipeline.stats.fingerprint.digest_records`).
    Returns ``(intake, store, from_store,
    notice)``; the caller closes `store` (None without `out`); `notice` is one line when
    the last run in `out` read other inputs.
    """
    from pipeline.independence.store import TestStore
    from pipeline.intake.record import Intake

    store_path = Path(out) / STORE_NAME if out is not None else None
    store = TestStore(store_path) if store_path is not None and store_path.is_file() else None
    try:
        stored = store.get_inputs(fingerprint) if store is not None else None
        notice = _changed_inputs(store, fingerprint, out) if stored is None else None
        if stored is not None:
            intake = Intake(stored.design, stored.moments, fingerprint, stored.dropped_rows,
                            list(stored.warnings))
            if before_store is not None:
                before_store(intake)
            _keep_digests(store, [*paths, regimes_path])
            return intake, store, True, None
        from pipeline.intake.read import read_inputs
        from pipeline.progress import Progress

        show = progress.enabled if isinstance(progress, Progress) else progress is True
        intake = read_inputs(paths, regimes_path, progress=show, fingerprint=fingerprint,
                             **options)
        if before_store is not None:
            before_store(intake)
        if store_path is not None:
            store = store or TestStore(store_path)
            store.put_inputs(fingerprint, intake.design, intake.moments, intake.warnings,
                             intake.dropped_rows)
            _keep_digests(store, [*paths, regimes_path])
        return intake, store, False, notice
    except BaseException:
        if store is not None:
            store.close()
        raise


def _keep_digests(store, paths: list[Path]) -> None:
    """Keep in `store` the digest records of `paths` hashed in this process, so that a
    rerun into the same folder reads no unchanged file again."""
    from pipeline.stats.fingerprint import digest_records

    store.put_digests(digest_records(paths))


def _changed_inputs(store, fingerprint: str, out) -> str | None:
    """One line when the last run in `out` read other inputs (a file or an option changed)."""
    if store is None:
        return None
    runs = store.runs()
    if not runs:
        return None
    last = str(runs[-1]["fingerprint"]).split("|")[0]
    if last == fingerprint:
        return None
    return (f"the inputs differ from those of the last run in {out} (a file or a reading "
            "option changed): the data were read again; earlier tests stay in the store")


def _add_bootstrap(result: LearnResult, paths: list[Path], intake, options: dict[str, Any],
                   reading, jobs: int, progress: ProgressArg) -> None:
    """Bootstrap frequencies for every edge of `result` (`pipeline.analyses.bootstrap`)."""
    from pipeline.analyses.bootstrap import bootstrap

    s = result.settings
    relearn = {k: s[k] for k in ("alpha", "max_condition_size", "targets", "collider_rule",
                                 "test")}
    if callable(progress):
        bars: Any = nullcontext(progress)
    else:
        from pipeline.progress import Progress

        bars = Progress(enabled=None if progress else False)
    with bars as fn:
        result.add_bootstrap(bootstrap(
            paths, intake.design, intake.moments, result.edge_records,
            resamples=s["bootstrap"], seed=s["seed"], jobs=jobs, settings=relearn,
            regime_column=options["regime_column"], drop_missing=options["drop_missing"],
            test=options["test"], reading=reading, progress=fn))
    result.run["jobs"] = jobs


def _reading_settings(reading) -> dict:
    """The reading options that differ from their defaults, for the result's settings."""
    out: dict[str, Any] = {}
    if reading.decimal != ".":
        out["decimal"] = reading.decimal
    if reading.regime_from != "column":
        out["regime_from"] = reading.regime_from
    if reading.sheet is not None:
        out["sheet"] = reading.sheet
    if reading.genes is not None:
        out["genes"] = list(reading.genes)
    return out


def learn_from_moments(design: Design, moments: Moments, *, alpha: float = 0.01,
                       max_condition_size: int | None = None, targets: str = "declared",
                       collider_rule: str = "majority", test: str = "gaussian",
                       store: Any = None, fingerprint: str | None = None, check: bool = False,
                       progress: ProgressArg = False) -> LearnResult:
    """Learn from sufficient statistics already in memory (no file is read or written).

    Parameters
    ----------
    design : Design
    moments : Moments
        Per-regime statistics of every regime of `design`.
    alpha, max_condition_size, targets, collider_rule
        As for `learn`.
    test : str
        Recorded in the settings (the statistics decide what was tested).
    store : TestStore, optional
        Answer from and write to this store under `fingerprint` (required with it).
    check : bool
        Also run the input check (target check, response matrix).
    progress : bool or callable

    Returns
    -------
    LearnResult

    Raises
    ------
    InputError
        An argument is out of range.
    """
    alpha, max_k, targets, test, collider_rule = _check_options(
        alpha, max_condition_size, targets, test, collider_rule)
    if not isinstance(design, Design) or not isinstance(moments, Moments):
        raise InputError("learn_from_moments: expected a Design and a Moments object")
    if store is not None and not fingerprint:
        raise InputError("learn_from_moments: a store needs the fingerprint of the inputs")
    settings = {"alpha": alpha, "max_condition_size": max_k, "targets": targets, "test": test,
                "collider_rule": collider_rule, "reference": None,
                "fingerprint": fingerprint or ""}
    result = _learn(design, moments, intake=None, store=store, fingerprint=fingerprint or "",
                    alpha=alpha, max_condition_size=max_k, targets=targets,
                    collider_rule=collider_rule, settings=settings, progress=progress,
                    check=check)
    from pipeline.provenance import provenance

    result.provenance = provenance([])  # statistics given in memory: no input file
    return result


def _learn(design: Design, moments: Moments, *, intake, store, fingerprint: str, alpha: float,
           max_condition_size: int | None, targets: str, collider_rule: str,
           settings: dict[str, Any], progress: ProgressArg, check: bool) -> LearnResult:
    """Steps 3-4 of the workflow; arguments already validated.

    With a store, the check's numbers and the learner's tests are read from it, and the
    Gaussian tester (and the libraries it computes with) is built only if one is missing.
    """
    from pipeline.learner.pc import learn_graph

    # 3. the input check, from the statistics alone (its numbers kept in the store)
    checked = None
    if check:
        from pipeline.analyses.check import check_intake
        from pipeline.independence.numbers import StoredNumbers
        from pipeline.intake.record import Intake

        if intake is None:
            intake = Intake(design, moments, fingerprint, 0, list(design.warnings))
        checked = check_intake(intake, alpha=alpha,
                               numbers=None if store is None else StoredNumbers(store, fingerprint),
                               learner_checks_targets=targets == "declared")

    # 3b. control batches that differ are not pooled: the check settled the reference
    learner_design = checked.design if checked is not None else design

    def gaussian_tester() -> Any:
        from pipeline.independence.gaussian import GaussianTester

        return GaussianTester(moments, learner_design)

    # 4. the learner, asking its tests through the store
    if store is not None:
        from pipeline.independence.cached import CachedTester

        tester: Any = CachedTester(gaussian_tester, store,
                                   _store_key(fingerprint, checked.demoted if checked else []),
                                   n_regimes=len(design.regimes))
    else:
        tester = gaussian_tester()
    if callable(progress):
        bars = nullcontext(progress)
    else:
        from pipeline.progress import Progress

        bars = Progress(enabled=None if progress else False)
    with bars as report:
        learned = learn_graph(learner_design, tester, alpha=alpha,
                              max_condition_size=max_condition_size,
                              targets=targets, collider_rule=collider_rule,
                              progress=report if (progress and report is not None) else None)
    if store is not None:
        tester.flush()

    warnings: list[str] = []
    if checked is not None:
        from pipeline.analyses.check import with_learner_verdicts

        checked = with_learner_verdicts(checked, learned.target_verdicts)
    for w in [*(intake.warnings if intake is not None else design.warnings),
              *(checked.warnings if checked is not None else ()), *learned.warnings]:
        if w not in warnings:
            warnings.append(w)
    run: dict[str, Any] = {}
    if store is not None:
        run.update(computed=tester.computed, reused=tester.reused)
        store.log_run(fingerprint, settings, tester.computed, tester.reused)
    else:
        n = getattr(tester, "n_tests", {})
        run.update(computed=sum(n.values()) if n else None, reused=0)
    from pipeline.results.learn import LearnResult

    return LearnResult(learned=learned, design=learner_design, settings=settings,
                       warnings=warnings, check=checked, run=run)


def _store_key(fingerprint: str, demoted: list[str]) -> str:
    """The store key of the learner's tests: the input fingerprint, plus the control
    batches analysed apart when the check found them differing (invariance tests then
    compare with another reference)."""
    return fingerprint if not demoted else f"{fingerprint}|apart={','.join(sorted(demoted))}"
