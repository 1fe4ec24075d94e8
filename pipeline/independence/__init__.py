"""Conditional-independence and invariance tests over sufficient statistics."""

from pipeline.independence.base import Tester, TestResults

__all__ = ["Tester", "TestResults"]
