"""Intake: reading measurement tables and the regimes file, and checking them."""

from pipeline.intake.design import Design, Regime

__all__ = ["Design", "Regime"]
