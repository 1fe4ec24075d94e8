"""Intake: reading measurement tables and the regimes file, and checking them.

The entry point is `pipeline.intake.read.read_inputs`; `regimes.py` reads the regimes
file, `tables.py` the measurement tables, `dag.py` a known graph.
"""
