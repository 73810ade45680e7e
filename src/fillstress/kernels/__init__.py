"""Closed-form influence of surface loads on an elastic half-space.

Two stress distributions are offered:

* ``"boussinesq"`` — homogeneous isotropic half-space (Boussinesq 1885; rectangle
  after Holl 1940 / Newmark 1935);
* ``"westergaard"`` — half-space reinforced by inextensible horizontal sheets
  (Westergaard 1938), with Poisson's ratio 0 <= ν < 0.5 (default 0).

The scalar numba kernels live in :mod:`.boussinesq` and :mod:`.westergaard`;
:mod:`.spec` validates the method choice once (:func:`resolve_method`, no numba) and
:mod:`.influence` gives vectorised, validating entry points, loaded on first use.

Both corner functions share one shape, computed by the one routine of :mod:`.corner`
(which every solver calls)::

    F = 1/(2π) [ atan2(a·b/R, c) + s · (b·ac(a) + a·ac(b)) / R ],   R = sqrt(a²+b²+c²)

with ``ac(t) = t z / (t² + z²)`` and c = z, s = 1 (Boussinesq) or c = ηz, s = 0
(Westergaard).  :class:`KernelSpec` carries (c/z, s).
"""
from __future__ import annotations

from .._lazy import lazy_getattr
from .spec import METHODS, KernelSpec, eta, resolve_method

_LAZY = {"rectangle_influence": "influence", "point_influence": "influence",
         "boussinesq": "influence", "westergaard": "influence"}

__all__ = ["METHODS", "KernelSpec", "resolve_method", "eta", "rectangle_influence",
           "point_influence", "boussinesq", "westergaard"]
__getattr__ = lazy_getattr(__name__, _LAZY, globals())
