"""Solvers: Δσz at points (direct summation, or the far-field method for large problems,
chosen by size) and on plan slices (exact FFT convolution, tiled under a memory cap)."""
from __future__ import annotations

from .auto import stress_at_points
from .direct import vertical_stress
from .farfield import vertical_stress_far
from .slices import SlicePlan, slice_at_depth, stress_slices
from .tiled import tiled_slices

__all__ = ["vertical_stress", "vertical_stress_far", "stress_at_points", "stress_slices",
           "tiled_slices", "slice_at_depth", "SlicePlan"]
