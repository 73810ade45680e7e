"""Solvers: Δσz at points (direct summation) and on plan slices (exact FFT convolution)."""
from __future__ import annotations

from .direct import vertical_stress

__all__ = ["vertical_stress"]
