"""Orienteer: orient the edges of a causal graph from control and perturbation experiments.

The Python API mirrors the command line; see README.md.
"""

from __future__ import annotations

__all__: list[str] = []
