"""Tails of the F and t laws (pipeline.independence.laws) against scipy.

Outside reference: scipy.special.fdtrc (the F law's upper tail, an incomplete beta
function) and scipy.stats.t.sf. The closed forms are exact for even numerators; the
odd ones read Student's t, by Hill's (1970) expansion from 100 degrees of freedom on,
whose error is bounded here as the module docstring states.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import special, stats

from pipeline.independence.laws import HILL_MIN_DF, f_upper_tail, t_two_sided

F_VALUES = np.concatenate([[0.0, 1e-12, 1e-6], np.linspace(0.0, 5.0, 501)[1:],
                           np.logspace(0.7, 3.0, 200)])


@pytest.mark.parametrize("q", [1, 2, 3, 4, 5, 8, 11])
@pytest.mark.parametrize("d", [1, 3, 20, 57, 99, 100, 396, 3993, 50000])
def test_f_tail_equals_scipy(q, d):
    expected = special.fdtrc(q, d, F_VALUES)  # scipy
    got = f_upper_tail(F_VALUES, q, d)
    moderate = expected > 1e-10
    np.testing.assert_allclose(got[moderate], expected[moderate], rtol=1e-8)
    deep = (expected > 1e-300) & ~moderate  # far tail: a relative error below 1e-3
    np.testing.assert_allclose(got[deep], expected[deep], rtol=1e-3)


@pytest.mark.parametrize("d", [2, 30, HILL_MIN_DF, 250, 10_000])
def test_t_tail_equals_scipy(d):
    t = np.concatenate([-np.linspace(0, 8, 81), np.linspace(0, 8, 81)])
    expected = 2 * stats.t.sf(np.abs(t), d)  # scipy
    np.testing.assert_allclose(t_two_sided(t, d), expected, rtol=1e-8, atol=1e-300)


def test_f_tail_at_zero_and_nan():
    got = f_upper_tail(np.array([0.0, -1.0, np.nan, np.inf]), 3, 50)
    assert got[0] == 1.0 and got[1] == 1.0 and np.isnan(got[2]) and got[3] == 0.0


@pytest.mark.parametrize("q, d", [(0, 10), (1.5, 10), (2, 0)])
def test_bad_degrees_of_freedom(q, d):
    with pytest.raises(ValueError, match="expected"):
        f_upper_tail(np.ones(2), q, d)
