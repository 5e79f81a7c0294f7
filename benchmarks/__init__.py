"""Benchmarks for tunelab: a side-by-side suite on open datasets and focused scripts.

This package is not installed with tunelab; scripts here run as ``python benchmarks/NAME.py``
from the repository root (see ``benchmarks/README.md``).
"""
