"""Simulations as in-memory inputs: shared by tests that learn without writing files."""

from __future__ import annotations

from pipeline.design import Design, Regime
from pipeline.stats.moments import Moments


def in_memory(sim) -> tuple[Design, Moments]:
    """Design and moments of a `pipeline.simulation.simulate` result, without any file."""
    variables = tuple(sim.model.variables)
    samples = {r: g[list(variables)].to_numpy()
               for r, g in sim.data.groupby("regime", sort=False)}
    m = Moments.from_samples(samples, variables)
    regimes = []
    for name, targets in zip(sim.regimes.regime, sim.regimes.targets, strict=True):
        t = tuple(v for v in str(targets).split(";") if v)
        regimes.append(Regime(name, t, True, not t, int(m.count[m.index(name)])))
    return Design(variables, tuple(regimes)), m
