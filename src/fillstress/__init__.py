"""fillstress: vertical stress increase and settlement below fills on an elastic half-space."""
from __future__ import annotations

from .errors import CapacityError, FillstressError, InputError
from .grid import LoadGrid
from ._version import __version__
from .solve import stress_slices, vertical_stress

__all__ = ["LoadGrid", "vertical_stress", "stress_slices", "InputError", "FillstressError", "CapacityError", "__version__"]
