"""The Gaussian tester: stratified Fisher z and invariance tests.

`GaussianTester` answers the learner's batches (the `Tester` protocol) from the
per-regime sufficient statistics only. Conditional-independence tests are stratified
over every regime, the reference regimes included as strata of their own
(`pipeline.independence.fisher_z`); invariance tests compare one regime with the
pooled reference (`pipeline.independence.invariance`). The per-regime correlation
matrices are prepared once and reused by every batch.

The rank-based variant (normal scores of pooled ranks; Harris & Drton 2013) is the same
tester run on the moments of the normal scores instead of the raw values.

References
----------
1. N. Harris, M. Drton (2013). PC algorithm for nonparanormal graphical models.
   Journal of Machine Learning Research 14, 3365-3383.
"""

from __future__ import annotations

import numpy as np

from pipeline.design import Design
from pipeline.errors import InputError
from pipeline.independence.base import TestResults
from pipeline.independence.fisher_z import _check_tests, _Strata
from pipeline.independence.invariance import (
    ResponseMatrix,
    _check_design,
    _Pair,
    regime_pair,
    response_matrix,
)
from pipeline.stats.moments import Moments

__all__ = ["GaussianTester"]

#: Regimes whose prepared invariance statistics are kept between batches.
_PAIR_CACHE = 8


class GaussianTester:
    """Gaussian CI and invariance tests over the moments of a design's regimes.

    Parameters
    ----------
    moments : Moments
        Per-regime sufficient statistics of every regime of `design` (any order).
    design : Design
        Names the reference regimes (pooled for invariance tests).
    min_count : int
        Regimes with fewer samples are left out of CI tests.

    Attributes
    ----------
    n_tests : dict
        Number of tests computed so far, by kind (``"ci"``, ``"invariance"``).

    Raises
    ------
    InputError
        If the design has no reference regime.
    ValueError
        If the moments and the design do not describe the same variables and regimes.
    """

    def __init__(self, moments: Moments, design: Design, *, min_count: int = 0) -> None:
        self.reference = tuple(r.name for r in design.reference)
        if not self.reference:
            raise InputError("regimes: no reference (control) regime; give a regime with "
                             "empty targets or name one with --reference REGIME")
        _check_design(moments, design)
        self.moments = moments
        self.design = design
        self.min_count = int(min_count)
        self._p = len(moments.variables)
        used = np.array([moments.index(r.name) for r in design.regimes], dtype=np.intp)
        self._strata = _Strata(moments, used)
        self._pairs: dict[str, _Pair] = {}
        self.n_tests: dict[str, int] = {"ci": 0, "invariance": 0}

    def ci(self, x: np.ndarray, y: np.ndarray, cond: np.ndarray) -> TestResults:
        """Stratified Fisher z tests of ``X_i _||_ Y_i | S_i`` given the regime.

        ``left_out`` columns follow ``moments.regimes``.
        """
        x, y, cond = _check_tests(self._p, x, y, cond)
        res = self._strata.test(x, y, cond, self.min_count)
        self.n_tests["ci"] += x.shape[0]
        return res

    def invariance(self, regime: str, x: np.ndarray, cond: np.ndarray) -> TestResults:
        """Invariance tests that the law of ``X_i | S_i`` is the same in `regime` and the
        reference (Chow + Bartlett, `pipeline.independence.invariance`).

        Raises
        ------
        ValueError
            If `regime` is unknown or part of the reference.
        """
        pair = self._pairs.get(regime)
        if pair is None:
            pair = self._pair(regime)
        x, _, cond = _check_tests(self._p, x, None, cond)
        res = pair.test(x, cond)
        self.n_tests["invariance"] += x.shape[0]
        return res

    def response_matrix(self) -> ResponseMatrix:
        """Marginal shift and invariance p-value of every variable in every regime."""
        return response_matrix(self.moments, self.design)

    def _pair(self, regime: str) -> _Pair:
        names = [r.name for r in self.design.regimes]
        if regime not in names:
            raise ValueError(f"regime: unknown regime {regime!r}; known: {names}")
        if regime in self.reference:
            raise ValueError(f"regime: {regime!r} is part of the reference; invariance tests "
                             "compare a non-reference regime with the reference")
        pair = regime_pair(self.moments, self.reference, regime)
        if len(self._pairs) >= _PAIR_CACHE:  # bound memory: O(p^2) per cached regime
            self._pairs.pop(next(iter(self._pairs)))
        self._pairs[regime] = pair
        return pair
