"""Bootstrap frequencies of the edges of a learned graph.

The stability of an edge is the share of resamples of the data whose relearned graph has
it (Friedman, Goldszmidt & Wyner 1999). Each resample keeps half of the rows of every
regime, drawn without replacement (subsampling, as in stability selection: Meinshausen &
Buhlmann 2010; see `pipeline.stats.resample` for why not the n-out-of-n bootstrap of
Efron 1979: its repeated rows make every test reject too often); the regimes keep their
proportions, so the design is that of the original experiment. The learner sees data only
through sufficient statistics, so a resample is a set of weighted moments
(`pipeline.stats.resample`): one streaming pass over the data files gives those of all B
resamples, then each resample is relearned with the settings of the original run (same
alpha, targets mode, collider rule, largest conditioning set; the input check runs too,
so a declared target that did not move is treated as in the original run). Relearning is
spread over processes with ``jobs > 1``; results do not depend on it.

For each edge of the original result:

``bootstrap_adjacency``
    the share of resamples in which the two variables are adjacent;
``bootstrap_orientation``
    for a directed edge ``u -> v``, the share of resamples in which the edge is directed
    ``u -> v``; for an undirected edge, the share in which it is present and undirected.

With ``test="rank"`` the normal scores are computed once from all rows and the resamples
reweight them (the ranks are not recomputed within each resample).

Resamples never write to the test store.

A caution on reading the frequencies: a half-sample has half the rows, so its tests have
less power than those of the whole data, and a weak true edge is found in fewer resamples
than its presence in the result suggests. The frequencies rank the edges by how reliably
the data support them (the use of Friedman, Goldszmidt & Wyner); they are not
probabilities that an edge is true.

References
----------
1. N. Friedman, M. Goldszmidt, A. Wyner (1999). Data analysis with Bayesian networks: a
   bootstrap approach. Proceedings of UAI, 196-205.
2. B. Efron (1979). Bootstrap methods: another look at the jackknife. Annals of
   Statistics 7(1), 1-26.
3. N. Meinshausen, P. Buhlmann (2010). Stability selection. Journal of the Royal
   Statistical Society B 72(4), 417-473.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from pipeline.design import Design
from pipeline.errors import InputError
from pipeline.options import check_bootstrap_options
from pipeline.results.bootstrap import BootstrapResult
from pipeline.stats.moments import Moments

__all__ = ["bootstrap", "resampled_moments", "fresh_seed", "MAX_BYTES"]

#: Largest memory for the B resamples' statistics (8 B K p^2 bytes) before refusing.
MAX_BYTES = 6 * 2**30

ProgressFn = Callable[[str, int, int], None] | None


def fresh_seed() -> int:
    """A seed from the operating system's entropy (recorded so the run can be repeated)."""
    return int(np.random.SeedSequence().entropy % 2**63)


def resampled_moments(paths: Sequence[str | Path], design: Design, moments: Moments, *,
                      resamples: int, seed: int, regime_column: str = "regime",
                      drop_missing: bool = False, test: str = "gaussian", reading: Any = None,
                      chunk_rows: int = 100_000, progress: ProgressFn = None) -> list[Moments]:
    """The statistics of `resamples` bootstrap resamples of the data, in one pass.

    The files are read as the intake reads them (same formats, reading options, regime
    labels, dropped rows), so each row meets the same regime as in the run.

    Parameters
    ----------
    paths : sequence of paths
        The data files of the run (already read once without error by the intake).
    design : Design
        Variables and regimes of the run.
    moments : Moments
        The statistics of the run: fixes the row count of each regime.
    resamples, seed : int
    regime_column, drop_missing, test
        As for the intake (`pipeline.intake.read.read_inputs`).
    reading : ReadOptions, optional
        How the files are read (`pipeline.intake.tables.reading_of`); default options if None.
    chunk_rows : int
        Rows per chunk (the result does not depend on it).
    progress : callable, optional
        Called as ``progress(label, rows_done, rows_total)``.

    Returns
    -------
    list of Moments, one per resample

    Raises
    ------
    InputError
        If the statistics would not fit in memory, or the files no longer hold the rows
        the run counted (changed since).
    """
    from pipeline.intake.read import _Pass  # the intake's own handling of each chunk
    from pipeline.intake.tables import ReadOptions, iter_chunks, read_header
    from pipeline.stats.resample import ResampleAccumulator

    reading = reading if reading is not None else ReadOptions()
    names = tuple(r.name for r in design.regimes)
    p, k = len(design.variables), len(names)
    need = 8 * resamples * k * p * p
    if need > MAX_BYTES:
        raise InputError(f"--bootstrap {resamples}: the statistics of {resamples} resamples of "
                         f"{k} regimes x {p} variables need {need / 2**30:.1f} GiB of memory "
                         f"(limit {MAX_BYTES / 2**30:.0f} GiB); use fewer resamples")
    counts = [int(moments.count[moments.index(n)]) for n in names]
    by_name = reading.regime_from == "filename"
    state = _Pass(design.variables, list(names), {n: i for i, n in enumerate(names)},
                  drop_missing, keep_rows=test == "rank", by_name=by_name)
    state.acc = ResampleAccumulator(design.variables, names, counts, resamples, seed)
    total, done = int(sum(counts)), 0
    try:
        for path in paths:
            header = read_header(Path(path), reading)
            for chunk in iter_chunks(header, design.variables,
                                     None if by_name else regime_column, chunk_rows, reading):
                state.add(header, chunk)
                done += len(chunk.codes)
                if progress is not None:
                    progress("bootstrap: reading data", min(done, total), total)
        state.finish()
        return state.moments()
    except ValueError as exc:
        raise InputError(f"bootstrap: the data files no longer match the run ({exc}); run "
                         f"learn again without the store") from None


def _relearn(task: tuple) -> tuple[int, np.ndarray, float]:
    """Learn one resample; return its index, its edges as rows ``(i, j, code)`` and the
    CPU seconds it took.

    ``code`` is 1 for ``i -> j``, -1 for ``j -> i``, 0 for undirected (``i < j``).
    """
    import time

    started = time.process_time()
    b, design, moments, settings = task
    from pipeline.stats.accumulate import one_blas_thread
    from pipeline.workflow import learn_from_moments

    with one_blas_thread():
        result = learn_from_moments(design, moments, check=True, **settings)
    pos = {v: i for i, v in enumerate(design.variables)}
    rows = []
    g = result.graph
    for u, v in g.directed_edges():
        i, j = pos[u], pos[v]
        rows.append((i, j, 1) if i < j else (j, i, -1))
    for u, v in g.undirected_edges():
        i, j = sorted((pos[u], pos[v]))
        rows.append((i, j, 0))
    return b, np.array(rows, dtype=np.int64).reshape(-1, 3), time.process_time() - started


def bootstrap(paths: Sequence[str | Path], design: Design, moments: Moments,
              edges: Sequence[Any], *, resamples: int, seed: int | None = None,
              jobs: int = 1, settings: dict[str, Any] | None = None,
              regime_column: str = "regime", drop_missing: bool = False,
              test: str = "gaussian", reading: Any = None,
              progress: ProgressFn = None) -> BootstrapResult:
    """Bootstrap frequencies of adjacency and orientation for every pair of variables.

    Parameters
    ----------
    paths : sequence of paths
        The data files of the run.
    design, moments
        The run's design and statistics.
    edges : sequence of EdgeRecord
        The edges of the original result (their orientation is what
        ``bootstrap_orientation`` counts).
    resamples : int >= 1
    seed : int >= 0, optional
        None draws a fresh seed (recorded in the result).
    jobs : int >= 1
        Processes relearning the resamples (1: in this process). The workers are started
        by a fork server; like any multiprocessing code, a script calling this with
        ``jobs > 1`` runs its work under ``if __name__ == "__main__":``.
    settings : dict
        Keywords of `pipeline.workflow.learn_from_moments` for each resample (alpha,
        max_condition_size, targets, collider_rule, test).
    regime_column, drop_missing, test, reading
        As for the intake (see `resampled_moments`).
    progress : callable, optional
        ``progress(label, done, total)``: the reading pass, then the resamples.

    Returns
    -------
    BootstrapResult

    Raises
    ------
    InputError
        An option is out of range, or the data files changed since the run.
    """
    resamples, seed, jobs = check_bootstrap_options(resamples, seed, jobs)
    if resamples < 1:
        raise InputError("--bootstrap 0: expected a whole number >= 1 resamples")
    seed = fresh_seed() if seed is None else seed
    all_moments = resampled_moments(paths, design, moments, resamples=resamples, seed=seed,
                                    regime_column=regime_column, drop_missing=drop_missing,
                                    test=test, reading=reading, progress=progress)
    settings = dict(settings or {})
    tasks = [(b, design, m, settings) for b, m in enumerate(all_moments)]
    del all_moments
    p = len(design.variables)
    counts = np.zeros((4, p, p), dtype=np.int64)  # adjacent, i -> j, j -> i, undirected

    cpu = [0.0]

    def add(outcome: tuple[int, np.ndarray, float]) -> None:
        rows = outcome[1]
        cpu[0] += outcome[2]
        i, j, code = rows[:, 0], rows[:, 1], rows[:, 2]
        np.add.at(counts[0], (i, j), 1)
        np.add.at(counts[1], (i[code == 1], j[code == 1]), 1)
        np.add.at(counts[2], (i[code == -1], j[code == -1]), 1)
        np.add.at(counts[3], (i[code == 0], j[code == 0]), 1)

    label = "bootstrap: relearning"
    if progress is not None:
        progress(label, 0, resamples)
    if jobs == 1:
        for n, task in enumerate(tasks, start=1):
            add(_relearn(task))
            tasks[n - 1] = None  # free the resample's statistics
            if progress is not None:
                progress(label, n, resamples)
    else:
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor, as_completed
        from concurrent.futures.process import BrokenProcessPool

        # workers fork from a server process that has imported the learner once
        context = multiprocessing.get_context("forkserver")
        context.set_forkserver_preload(["pipeline.workflow", "pipeline.analyses.bootstrap"])
        try:
            with ProcessPoolExecutor(max_workers=min(jobs, resamples),
                                     mp_context=context) as pool:
                futures = [pool.submit(_relearn, t) for t in tasks]
                del tasks
                for n, fut in enumerate(as_completed(futures), start=1):
                    add(fut.result())
                    if progress is not None:
                        progress(label, n, resamples)
        except BrokenProcessPool as exc:
            raise RuntimeError(
                "bootstrap: a worker process stopped before finishing (out of memory, or "
                "killed). From a Python script, call learn(..., jobs > 1) under "
                "`if __name__ == '__main__':` (the workers import the script's main module); "
                "or use jobs=1") from exc
    result = BootstrapResult.from_counts(design.variables, counts, resamples=resamples,
                                         seed=seed, edges=edges)
    result.cpu_seconds = cpu[0]
    return result
