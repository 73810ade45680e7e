"""fillstress: vertical stress increase and settlement below fills on an elastic half-space."""
from __future__ import annotations

from importlib.metadata import PackageNotFoundError, version as _version

from .errors import CapacityError, FillstressError, InputError
from .grid import LoadGrid
from .solve import stress_slices, vertical_stress

try:
    __version__ = _version("fillstress")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0.0.0+unknown"

__all__ = ["LoadGrid", "vertical_stress", "stress_slices", "InputError", "FillstressError", "CapacityError", "__version__"]
