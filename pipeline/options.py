"""The options of the commands and the API: their allowed values and their validation.

Every public entry (`pipeline.learn`, `pipeline.check`, the commands) checks its options
once through these functions; everything behind them trusts its arguments. Each check
raises `InputError` with the option's name, the value seen and what is expected, which
the command line turns into exit code 2.
"""

from __future__ import annotations

import numbers
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from pipeline.errors import InputError, nearest_names

__all__ = ["TARGET_MODES", "TESTS", "COLLIDER_RULES", "ENGINES", "SIMULATION_KINDS",
           "check_alpha", "check_choice", "check_max_condition_size", "check_whole",
           "check_data_paths", "check_regimes_path", "split_names",
           "check_bootstrap_options"]

#: ``--targets``: take declared targets as given, or learn every regime's targets.
TARGET_MODES = ("declared", "learn")
#: ``--test``: Gaussian tests on the raw values, or on within-regime rank correlations.
TESTS = ("gaussian", "rank")
#: ``--collider-rule``: how an unshielded triple is decided.
COLLIDER_RULES = ("majority", "conservative", "standard")
#: ``--engine``: where the tests run.
ENGINES = ("local", "dask")
#: ``simulate --kind``: the kinds of intervention of the simulator.
SIMULATION_KINDS = ("knockdown", "perfect", "shift", "scale")


def check_alpha(alpha: Any, name: str = "--alpha") -> float:
    """A significance level strictly between 0 and 1."""
    if isinstance(alpha, bool) or not isinstance(alpha, numbers.Real) or not 0 < alpha < 1:
        raise InputError(f"{name} {alpha!r}: expected a number strictly between 0 and 1 "
                         f"(for instance 0.01)")
    return float(alpha)


def check_choice(name: str, value: Any, allowed: Sequence[str]) -> str:
    """One of `allowed`; the message suggests the nearest."""
    if value not in allowed:
        raise InputError(f"{name} {value!r}: not a choice{nearest_names(str(value), allowed)}; "
                         f"use one of {', '.join(allowed)}")
    return str(value)


def check_max_condition_size(k: Any) -> int | None:
    """A whole number >= 0, or None for no limit."""
    if k is None:
        return None
    if isinstance(k, bool) or not isinstance(k, numbers.Integral) or k < 0:
        raise InputError(f"--max-condition-size {k!r}: expected a whole number >= 0, or no "
                         f"value for no limit")
    return int(k)


def check_whole(name: str, value: Any, low: int = 0) -> int:
    """A whole number >= `low`."""
    if isinstance(value, bool) or not isinstance(value, numbers.Integral) or value < low:
        raise InputError(f"{name} {value!r}: expected a whole number >= {low}")
    return int(value)


def split_names(value: Any) -> tuple[str, ...]:
    """``"A,B"`` or a list of names -> a tuple of stripped, non-empty names."""
    if value is None:
        return ()
    if isinstance(value, str):
        value = value.split(",")
    return tuple(str(c).strip() for c in value if str(c).strip())


def check_data_paths(data: Any) -> list[Path]:
    """One or more existing measurement files."""
    if data is None or (isinstance(data, (list, tuple)) and not data):
        raise InputError("DATA: no data file given; name one or more measurement files")
    if isinstance(data, (str, Path)):
        data = [data]
    paths = []
    for d in data:
        if not isinstance(d, (str, Path)):
            raise InputError(f"DATA: {type(d).__name__} given; expected paths of measurement "
                             f"files")
        p = Path(d)
        if not p.is_file():
            raise InputError(f"data file {p}: no such file; check the path")
        paths.append(p)
    return paths


def check_regimes_path(regimes: Any) -> Path:
    """An existing regimes file."""
    if regimes is None:
        raise InputError("--regimes: no regimes file given; pass --regimes REGIMES.csv")
    r = Path(regimes)
    if not r.is_file():
        raise InputError(f"regimes file {r}: no such file; check the path given to --regimes")
    return r


def check_bootstrap_options(resamples: Any, seed: Any, jobs: Any) -> tuple[int, int | None, int]:
    """``--bootstrap`` >= 0, ``--seed`` a whole number >= 0 or None, ``--jobs`` >= 1."""
    resamples = check_whole("--bootstrap", resamples, 0)
    if seed is not None:
        seed = check_whole("--seed", seed, 0)
    return resamples, seed, check_whole("--jobs", jobs, 1)
