"""Solvers: Δσz at points (direct summation, or the far-field method for large problems,
chosen by size) and on plan slices (exact FFT convolution, tiled under a memory cap).

Names load on first use, so a caller of the numpy point path never loads numba.
"""
from __future__ import annotations

from .._lazy import lazy_getattr

_LAZY = {"vertical_stress": "direct", "vertical_stress_far": "farfield",
         "stress_at_points": "auto", "stress_slices": "slices", "slice_at_depth": "slices",
         "SlicePlan": "slices", "tiled_slices": "tiled"}

__all__ = ["vertical_stress", "vertical_stress_far", "stress_at_points", "stress_slices",
           "tiled_slices", "slice_at_depth", "SlicePlan"]
__getattr__ = lazy_getattr(__name__, _LAZY, globals())
