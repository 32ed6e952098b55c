"""Benchmarks, run from the repository root.

``python -m benches.kernels``, ``python -m benches.addin``, ``python -m benches.fill_io``.
"""
