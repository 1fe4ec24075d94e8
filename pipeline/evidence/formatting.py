"""How numbers are shown to people (tables, summaries, the report): one place for all."""

from __future__ import annotations

import math

__all__ = ["format_p"]


def format_p(v: float | None, missing: str = "-") -> str:
    """A p-value in two significant digits; 0 (an underflow) as ``< 1e-300``.

    >>> format_p(0.012345), format_p(0.0), format_p(None)
    ('0.012', '< 1e-300', '-')
    """
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return missing
    return "< 1e-300" if v == 0 else f"{v:.2g}"
