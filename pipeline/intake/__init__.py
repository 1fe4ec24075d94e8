"""Intake: reading measurement tables and the regimes file, and checking them."""

from pipeline.intake.design import Design, Regime
from pipeline.intake.read import Intake, read_inputs
from pipeline.intake.regimes import read_regimes

__all__ = ["Design", "Regime", "Intake", "read_inputs", "read_regimes"]
