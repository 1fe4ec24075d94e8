"""The ``result.json`` format (``orienteer.result/1``) as dataclasses.

Written by ``learn`` and ``identify``; read by ``plan``, ``compare`` and ``sweep``.
The field names are the outside contract (CONTRACT.md); add fields, never rename them.
"""

from __future__ import annotations

import math
from dataclasses import field
from pathlib import Path
from typing import Any

from pipeline.errors import InputError
from pipeline.graphs.pdag import PDAG
from pipeline.records import record

__all__ = ["FORMAT", "EdgeRecord", "RegimeRecord", "ResultRecord"]

FORMAT = "orienteer.result/1"
RULES = ("intervention", "collider", "meek-1", "meek-2", "meek-3", "meek-4", "none")


def _shallow(record: Any) -> dict[str, Any]:
    """A record's fields as a dict, lists copied one level (what `asdict` gives for these
    records, without its deep copy of every nested value)."""
    return {k: list(v) if isinstance(v, list) else v for k, v in vars(record).items()}


@record
class EdgeRecord:
    """One edge of the result. For an undirected edge `source` comes first in ``nodes``.

    `strength` is ``-log10`` of the weakest test that had to find a dependence for the
    direction to stand (see `pipeline.results.explain`; None for an undirected edge),
    `chain` the steps from the tests to the direction (each with its rule, the tests and
    their p-values, and a sentence), `explanation` one sentence in plain words, and
    `conflict` marks an edge on which the tests disagree (the decisions set aside are in
    `notes`). `p_orientation` stays for the contract: the p of the separating test behind
    the collider that directed the edge.
    """

    source: str
    target: str
    orientation: str  # "directed" | "undirected"
    rule: str = "none"
    via: list[str] = field(default_factory=list)
    p_adjacency: float | None = None
    p_orientation: float | None = None
    bootstrap_adjacency: float | None = None
    bootstrap_orientation: float | None = None
    conflict: bool = False
    notes: list[str] = field(default_factory=list)
    strength: float | None = None
    explanation: str = ""
    chain: list[dict[str, Any]] = field(default_factory=list)


@record
class RegimeRecord:
    name: str
    targets: list[str]
    known: bool = True
    samples: int = 0
    reference: bool = False
    detected_targets: list[str] = field(default_factory=list)


@record
class ResultRecord:
    """The whole ``result.json``."""

    nodes: list[str]
    regimes: list[RegimeRecord]
    edges: list[EdgeRecord]
    class_size: int
    settings: dict[str, Any] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    valid: bool = True
    problems: list[str] = field(default_factory=list)
    format: str = FORMAT
    findings: list[dict[str, Any]] = field(default_factory=list)
    tests_per_level: dict[str, int] = field(default_factory=dict)
    provenance: dict[str, Any] = field(default_factory=dict)

    @property
    def log10_class_size(self) -> float:
        return _log10_int(self.class_size)

    def to_dict(self) -> dict[str, Any]:
        return {
            "format": self.format,
            "nodes": list(self.nodes),
            "regimes": [_shallow(r) for r in self.regimes],
            "edges": [_shallow(e) for e in self.edges],
            "class_size": int(self.class_size),
            "log10_class_size": (round(self.log10_class_size, 6) if self.class_size > 0
                                 else None),  # 0: not a valid essential graph
            "settings": self.settings,
            "warnings": list(self.warnings),
            "valid": self.valid,
            "problems": list(self.problems),
            "findings": [dict(f) for f in self.findings],
            "tests_per_level": {str(k): int(v) for k, v in self.tests_per_level.items()},
            "provenance": dict(self.provenance),
        }

    def to_json(self) -> str:
        from pipeline.fileio import json_text

        return json_text(self.to_dict())

    def graph(self) -> PDAG:
        """The result's graph as a PDAG over ``nodes``."""
        g = PDAG(self.nodes)
        for e in self.edges:
            if e.orientation == "directed":
                g.add_directed(e.source, e.target)
            else:
                g.add_undirected(e.source, e.target)
        return g

    @classmethod
    def from_dict(cls, d: dict[str, Any], where: str = "result.json") -> ResultRecord:
        if not isinstance(d, dict) or d.get("format") != FORMAT:
            raise InputError(f"{where}: not an Orienteer result "
                             f"(expected \"format\": \"{FORMAT}\")")
        try:
            nodes = [str(n) for n in d["nodes"]]
            regimes = [RegimeRecord(**r) for r in d.get("regimes", [])]
            edges = [EdgeRecord(**e) for e in d["edges"]]
            rec = cls(nodes=nodes, regimes=regimes, edges=edges,
                      class_size=int(d.get("class_size", 0)), settings=d.get("settings", {}),
                      warnings=list(d.get("warnings", [])), valid=bool(d.get("valid", True)),
                      problems=list(d.get("problems", [])),
                      findings=[dict(f) for f in d.get("findings", [])],
                      tests_per_level={str(k): int(v)
                                       for k, v in d.get("tests_per_level", {}).items()},
                      provenance=dict(d.get("provenance", {})))
        except (KeyError, TypeError, ValueError) as exc:
            raise InputError(f"{where}: malformed result ({exc})") from None
        known = set(nodes)
        for e in rec.edges:
            if e.source not in known or e.target not in known:
                raise InputError(f"{where}: edge {e.source} - {e.target} names a node "
                                 f"not in 'nodes'")
            if e.orientation not in ("directed", "undirected"):
                raise InputError(f"{where}: edge {e.source} - {e.target} has orientation "
                                 f"'{e.orientation}' (expected directed or undirected)")
        return rec

    @classmethod
    def read(cls, path: str | Path) -> ResultRecord:
        from pipeline.fileio import read_json

        return cls.from_dict(read_json(path), where=str(path))


def _log10_int(n: int) -> float:
    """log10 of a possibly huge positive integer, without overflow."""
    if n <= 0:
        return float("-inf") if n == 0 else float("nan")
    digits = len(str(n))
    if digits < 300:
        return math.log10(n)
    head = int(str(n)[:17])
    return math.log10(head) + digits - 17
