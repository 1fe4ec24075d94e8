"""Analyses beyond learning: the input check, what a design identifies, scores against a truth.

Each module computes; its result type, files and printing live in `pipeline.results`.
"""
