"""What every tester returns, and the interface the learner asks tests through.

A tester answers batches: many tests of one kind and one conditioning-set size per
call. Variables are indices into ``design.variables``; a conditioning-set array has
shape ``(m, l)`` (``l`` may be 0).
"""

from __future__ import annotations

from typing import Protocol

import numpy as np

from pipeline.records import record

__all__ = ["TestResults", "Tester"]


@record(frozen=True)
class TestResults:
    """Statistics and two-sided p-values of a batch of m tests.

    `left_out` is an optional (m, K) boolean mask of the regimes left out of each test
    (a variable constant within the regime); None when no regime was left out.
    """

    statistic: np.ndarray
    pvalue: np.ndarray
    left_out: np.ndarray | None = None

    __test__ = False  # not a pytest class


class Tester(Protocol):
    """Conditional-independence and invariance tests, asked in batches."""

    def ci(self, x: np.ndarray, y: np.ndarray, cond: np.ndarray) -> TestResults:
        """Test ``X_i _||_ Y_i | S_i`` given the regime, for each row i."""
        ...

    def invariance(self, regime: str, x: np.ndarray, cond: np.ndarray) -> TestResults:
        """Test whether the law of ``X_i | S_i`` is the same in `regime` and the reference."""
        ...
