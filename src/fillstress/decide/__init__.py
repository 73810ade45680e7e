"""Answers for the decision: limits and their utilisation, the largest scale of a body,
headroom maps for a further load, and the odds of exceeding a limit.

Numerical core only (arrays and typed results in SI units, no files): it builds on
``solve/``, ``kernels/``, ``grid``, ``soil``, ``settlement`` and ``structures``.
"""
