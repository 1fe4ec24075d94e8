"""How numbers are shown to people and written to JSON: one place for all.

>>> format_p(0.012345), format_shift(-1.234), finite_or_none(float("nan"))
('0.012', '-1.23', None)
"""

from __future__ import annotations

import math
from collections.abc import Iterable

import numpy as np

__all__ = ["format_p", "format_shift", "short_shift", "finite_or_none", "json_matrix",
           "format_count"]


def format_p(v: float | None, missing: str = "-") -> str:
    """A p-value in two significant digits; 0 (an underflow) as ``< 1e-300``.

    >>> format_p(0.012345), format_p(0.0), format_p(None)
    ('0.012', '< 1e-300', '-')
    """
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return missing
    return "< 1e-300" if v == 0 else f"{v:.2g}"


def format_shift(x: float) -> str:
    """A standardized shift with its sign and two decimals (``inf`` for a collapsed sd)."""
    x = float(x)
    if not math.isfinite(x):
        return "inf" if x > 0 else ("-inf" if x < 0 else "nan")
    return f"{x:+.2f}" if abs(x) < 1000 else f"{x:+.3g}"


def short_shift(x: float) -> str:
    """A shift in at most six characters, for wide regime x variable tables."""
    x = float(x)
    if not math.isfinite(x):
        return "inf" if x > 0 else ("-inf" if x < 0 else "nan")
    return f"{x:+.1f}" if abs(x) < 100 else f"{x:+.0e}"


def finite_or_none(v: float | None) -> float | None:
    """A finite float, or None (JSON has no NaN or infinity)."""
    if v is None:
        return None
    v = float(v)
    return v if math.isfinite(v) else None


def json_matrix(a: Iterable) -> list[list[float | None]]:
    """A 2-D array as nested lists with non-finite entries as None."""
    return [[finite_or_none(v) for v in row] for row in np.asarray(a, dtype=float)]


def format_count(n: int) -> str:
    """A possibly huge count: exact below 10^12, else as a power of ten.

    >>> format_count(120), format_count(10**40)
    ('120', 'about 10^40.0')
    """
    if n < 10**12:
        return str(n)
    digits = len(str(n))
    head = int(str(n)[:17])
    return f"about 10^{math.log10(head) + digits - 17:.1f}"

