"""Solvers: Δσz at points (direct summation) and on plan slices (exact FFT convolution)."""
from __future__ import annotations

from .direct import vertical_stress
from .slices import SlicePlan, slice_at_depth, stress_slices

__all__ = ["vertical_stress", "stress_slices", "slice_at_depth", "SlicePlan"]
