"""The response matrix: how every variable moved in every regime, as one result type.

Under faithfulness a variable's marginal law shifts in a regime iff it descends from one
of the regime's targets (Eberhardt & Scheines 2007), so the marginal invariance tests of
every variable in every non-reference regime against the reference, with their effect
sizes, are read as a regime x variable matrix. `ResponseMatrix` holds those numbers and
their Benjamini-Hochberg adjustment over the matrix (Benjamini & Hochberg 1995); the
tests themselves are `pipeline.independence.invariance.response_matrix`. This module
imports no statistics library, so that a result can be rebuilt from stored numbers
without loading one.

References
----------
1. F. Eberhardt, R. Scheines (2007). Interventions and causal inference. Philosophy of
   Science 74(5), 981-995.
2. Y. Benjamini, Y. Hochberg (1995). Controlling the false discovery rate: a practical
   and powerful approach to multiple testing. Journal of the Royal Statistical Society B
   57(1), 289-300.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from pipeline.independence.multiplicity import benjamini_hochberg
from pipeline.records import record

if TYPE_CHECKING:  # pandas is imported where a table is made (a faster start)
    import pandas as pd

__all__ = ["ResponseMatrix"]


@record
class ResponseMatrix:
    """Marginal response of every variable to every non-reference regime.

    Attributes
    ----------
    regimes : tuple of str, length R
        The non-reference regimes, in design order.
    variables : tuple of str, length p
    shift : array (R, p)
        Standardized mean shift ``(mean_k - mean_ref) / sd_ref`` (sd of the pooled
        reference, ddof 1); +-inf when the reference is constant and the mean moved.
    statistic : array (R, p)
        Statistic of the marginal invariance test (mean and variance).
    pvalue : array (R, p)
    sd_ratio : array (R, p)
        ``sd_k / sd_ref``: the effect on the spread (inf when the reference is constant).
    adjusted : array (R, p)
        Benjamini-Hochberg adjusted p-values over the whole matrix.

    Examples
    --------
    >>> r = ResponseMatrix(("kd",), ("A", "B"), np.array([[2.0, 0.1]]),
    ...                    np.array([[1e-6, 0.5]]), np.array([[4.9, 0.7]]))
    >>> r.marked(0.01).tolist()
    [[True, False]]
    """

    regimes: tuple[str, ...]
    variables: tuple[str, ...]
    shift: np.ndarray
    pvalue: np.ndarray
    statistic: np.ndarray
    sd_ratio: np.ndarray | None = None
    adjusted: np.ndarray | None = None

    def __post_init__(self) -> None:
        shape = np.shape(self.pvalue)
        if self.sd_ratio is None:
            self.sd_ratio = np.full(shape, np.nan)
        if self.adjusted is None:
            self.adjusted = benjamini_hochberg(self.pvalue)

    def shifted(self, alpha: float) -> np.ndarray:
        """(R, p) mask of the variables whose marginal law moved (raw p <= alpha)."""
        return self.pvalue <= alpha

    def marked(self, alpha: float) -> np.ndarray:
        """(R, p) mask of the responses reported as moved (adjusted p <= alpha)."""
        return self.adjusted <= alpha

    def to_frame(self) -> pd.DataFrame:
        """Long format: one row per (regime, variable)."""
        import pandas as pd

        r, p = len(self.regimes), len(self.variables)
        return pd.DataFrame({
            "regime": np.repeat(np.asarray(self.regimes, dtype=object), p),
            "variable": np.tile(np.asarray(self.variables, dtype=object), r),
            "shift": self.shift.ravel(),
            "sd_ratio": self.sd_ratio.ravel(),
            "statistic": self.statistic.ravel(),
            "pvalue": self.pvalue.ravel(),
            "adjusted": self.adjusted.ravel(),
        })

    def summary(self, top: int = 20) -> str:
        """A plain-text table of the largest responses (by p-value, then |shift|)."""
        frame = self.to_frame()
        frame = frame.assign(_abs=frame["shift"].abs()).sort_values(
            ["pvalue", "_abs"], ascending=[True, False]).drop(columns="_abs")
        head = (f"Response matrix: {len(self.regimes)} regimes x {len(self.variables)} "
                f"variables (marginal invariance test against the reference)")
        return head + "\n" + frame.head(top).to_string(index=False, float_format="%.3g")
