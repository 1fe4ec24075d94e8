"""The experimental design: measured variables, regimes and their targets."""

from __future__ import annotations

from dataclasses import field

from pipeline.graphs.pdag import InterventionNode
from pipeline.records import record

__all__ = ["Regime", "Design"]


@record(frozen=True)
class Regime:
    """One experimental condition.

    `targets` are the declared targets (only hints when `known` is False); `reference`
    marks the control regimes, which together form the reference; `samples` is the row
    count seen in the data (0 when the design is built without data, as in ``identify``).
    """

    name: str
    targets: tuple[str, ...] = ()
    known: bool = True
    reference: bool = False
    samples: int = 0


@record(frozen=True)
class Design:
    """Variables (in data column order) and regimes (in regimes-file order)."""

    variables: tuple[str, ...]
    regimes: tuple[Regime, ...]
    warnings: tuple[str, ...] = field(default=())

    @property
    def reference(self) -> tuple[Regime, ...]:
        """The reference (control) regimes."""
        return tuple(r for r in self.regimes if r.reference)

    @property
    def interventional(self) -> tuple[Regime, ...]:
        """The non-reference regimes: one intervention node each."""
        return tuple(r for r in self.regimes if not r.reference)

    def regime(self, name: str) -> Regime:
        for r in self.regimes:
            if r.name == name:
                return r
        raise KeyError(name)

    def reference_targets(self) -> frozenset[str]:
        """Targets of the reference (empty unless ``--reference`` named a regime with some)."""
        out: set[str] = set()
        for r in self.reference:
            out.update(r.targets)
        return frozenset(out)

    def intervention_targets(self) -> dict[str, frozenset[str]]:
        """Per non-reference regime, the targets its intervention node points at.

        This is the symmetric difference of the regime's targets and the reference's
        (METHODS.md section 1).
        """
        ref = self.reference_targets()
        return {r.name: frozenset(r.targets) ^ ref for r in self.interventional}

    def intervention_nodes(self) -> list[InterventionNode]:
        return [InterventionNode(r.name) for r in self.interventional]
