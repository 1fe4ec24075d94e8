"""Conditional-independence and invariance tests over sufficient statistics.

The stratified Fisher z function is imported from its module
(``from pipeline.independence.fisher_z import fisher_z``): re-exporting it here would
hide the module of the same name.
"""

from pipeline.independence.base import Tester, TestResults
from pipeline.independence.fisher_z import partial_correlation
from pipeline.independence.gaussian import GaussianTester
from pipeline.independence.invariance import ResponseMatrix, invariance_test, response_matrix

__all__ = [
    "Tester",
    "TestResults",
    "partial_correlation",
    "GaussianTester",
    "invariance_test",
    "response_matrix",
    "ResponseMatrix",
]
