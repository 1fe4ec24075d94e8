"""Graph theory of interventional Markov equivalence; imports no statistics."""

from pipeline.graphs.pdag import PDAG, InterventionNode

__all__ = ["PDAG", "InterventionNode"]
