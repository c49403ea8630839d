"""Benchmarks of the tracker on synthetic cohorts (not part of the installed package).

Run from the repository root: ``python -m benchmarks.cohort --help``.
"""
