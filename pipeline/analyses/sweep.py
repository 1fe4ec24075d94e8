"""The sweep: the learner of a run folder at several significance levels, from its store.

A learned graph depends on the significance level alpha of its tests: a smaller alpha
removes more edges (a pair is separated as soon as one test has ``p > alpha``) and can
change the colliders and so the orientations. Running the learner over a range of alphas
shows which edges hold across the range and which depend on the choice, the sensitivity
analysis usual for constraint-based learners (common practice).

`sweep` reads the run's ``result.json`` for its settings and its input fingerprint, takes
the per-regime statistics from the run's ``tests.sqlite`` (no data file is read) and runs
the learner at each alpha with every other setting unchanged, through the store: tests
already computed at another alpha are reused, new ones are added to the store. Each
result is therefore the one a fresh ``learn`` at that alpha gives.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from pathlib import Path
from typing import Any

from pipeline.errors import InputError
from pipeline.options import check_alpha
from pipeline.results.sweep import SweepResult

__all__ = ["sweep", "parse_alphas", "DEFAULT_ALPHAS"]

#: The levels swept when none are given.
DEFAULT_ALPHAS = (0.001, 0.005, 0.01, 0.05)


def parse_alphas(values: Any) -> list[float]:
    """Alphas from numbers, strings, or comma-separated strings; sorted, without repeats.

    >>> parse_alphas(["0.01,0.001", "0.05"])
    [0.001, 0.01, 0.05]

    Raises
    ------
    InputError
        If a value is not a number strictly between 0 and 1, or none is given.
    """
    if values is None or isinstance(values, (str, int, float)):
        values = [] if values is None else [values]
    out: list[float] = []
    for v in values:
        words = [w.strip() for w in v.split(",")] if isinstance(v, str) else [v]
        for w in words:
            if isinstance(w, str):
                if not w:
                    continue
                try:
                    w = float(w)
                except ValueError:
                    raise InputError(f"--alpha {w!r}: not a number; give levels strictly "
                                     f"between 0 and 1, e.g. --alpha 0.001 0.01 0.05") from None
            out.append(check_alpha(w))
    if not out:
        raise InputError("--alpha: no level given; e.g. --alpha 0.001 0.005 0.01 0.05")
    return sorted(set(out))


def sweep(folder: str | Path, alphas: Iterable[float] | str = DEFAULT_ALPHAS, *,
          progress: Callable[[str, int, int], None] | None = None) -> SweepResult:
    """Run the learner of `folder` at each alpha, from its stored statistics and tests.

    Parameters
    ----------
    folder : path
        The output folder of a ``learn`` run (``result.json`` and ``tests.sqlite``).
    alphas : iterable of float, or str
        Levels in (0, 1) (strings may hold several, comma-separated).
    progress : callable, optional
        ``progress(label, done, total)`` over the alphas.

    Returns
    -------
    SweepResult

    Raises
    ------
    InputError
        An alpha is out of range, or the folder holds no learn run with its store.
    """
    alphas = parse_alphas(alphas)
    folder = Path(folder)
    if not folder.is_dir():
        raise InputError(f"DIR {folder}: no such folder; name the --out folder of a learn run")
    from pipeline.results.schema import ResultRecord
    from pipeline.workflow import STORE_NAME

    path = folder / "result.json"
    if not path.is_file():
        raise InputError(f"{folder}: no result.json; run `orienteer learn ... --out {folder}` "
                         f"first")
    record = ResultRecord.read(path)
    settings = dict(record.settings)
    fingerprint = settings.get("fingerprint")
    if not fingerprint:
        raise InputError(f"{path}: not the result of a learn run (no input fingerprint in its "
                         f"settings); sweep needs the --out folder of `orienteer learn`")
    store_path = folder / STORE_NAME
    if not store_path.is_file():
        raise InputError(f"{folder}: no {STORE_NAME}; run `orienteer learn ... --out {folder}` "
                         f"again to rebuild the store")
    from pipeline.independence.store import TestStore
    from pipeline.workflow import learn_from_moments

    keep = {k: settings.get(k, d) for k, d in (("max_condition_size", None),
                                                ("targets", "declared"),
                                                ("collider_rule", "majority"),
                                                ("test", "gaussian"))}
    states, totals = [], []
    with TestStore(store_path) as store:
        stored = store.get_inputs(fingerprint)
        if stored is None:
            raise InputError(f"{store_path}: holds no statistics for the inputs of {path}; run "
                             f"`orienteer learn ... --out {folder}` again")
        if list(stored.design.variables) != list(record.nodes):
            raise InputError(f"{path}: its variables differ from those of {store_path}; run "
                             f"learn again")
        order = {v: i for i, v in enumerate(stored.design.variables)}
        for n, alpha in enumerate(alphas):
            if progress is not None:
                progress("sweep: alpha levels", n, len(alphas))
            result = learn_from_moments(stored.design, stored.moments, alpha=alpha, store=store,
                                        fingerprint=fingerprint, check=True, **keep)
            state = {}
            n_dir = 0
            for e in result.edge_records:
                x, y = sorted((e.source, e.target), key=order.__getitem__)
                if e.orientation == "directed":
                    code = 1 if e.source == x else -1
                    n_dir += 1
                else:
                    code = 0
                state[(x, y)] = (code, e.rule, e.p_adjacency)
            states.append(state)
            totals.append({"alpha": alpha, "edges": len(state), "directed": n_dir,
                           "undirected": len(state) - n_dir, "class_size": result.class_size,
                           "computed": result.run.get("computed"),
                           "reused": result.run.get("reused")})
        if progress is not None:
            progress("sweep: alpha levels", len(alphas), len(alphas))
    settings.pop("alpha", None)
    return SweepResult(alphas, list(stored.design.variables), settings, totals, states,
                       str(folder))
