"""Conditional-independence and invariance tests over sufficient statistics.

The stratified Fisher z function is imported from its module
(``from pipeline.independence.fisher_z import fisher_z``): re-exporting it here would
hide the module of the same name.

Names are imported on first use, so that importing one module of the package does not
import the others (the command line starts faster).
"""

from __future__ import annotations

from pipeline.lazy import lazy_exports

_WHERE = {
    "Tester": "pipeline.independence.base",
    "TestResults": "pipeline.independence.base",
    "partial_correlation": "pipeline.independence.fisher_z",
    "GaussianTester": "pipeline.independence.gaussian",
    "invariance_test": "pipeline.independence.invariance",
    "response_matrix": "pipeline.independence.invariance",
    "ResponseMatrix": "pipeline.independence.response",
}

__all__ = list(_WHERE)

__getattr__, __dir__ = lazy_exports(__name__, _WHERE, globals())
