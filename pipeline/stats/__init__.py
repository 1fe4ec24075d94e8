"""Sufficient statistics: the only thing the tests read."""

from pipeline.stats.moments import Moments

__all__ = ["Moments"]
