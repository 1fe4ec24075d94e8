"""Sufficient statistics: the only thing the tests read."""

from pipeline.stats.accumulate import MomentAccumulator
from pipeline.stats.fingerprint import fingerprint_inputs
from pipeline.stats.moments import Moments
from pipeline.stats.ranks import normal_scores

__all__ = ["Moments", "MomentAccumulator", "normal_scores", "fingerprint_inputs"]
