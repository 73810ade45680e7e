"""Closed-form influence of surface loads on an elastic half-space.

Two stress distributions are offered:

* ``"boussinesq"`` — homogeneous isotropic half-space (Boussinesq 1885; rectangle
  after Holl 1940 / Newmark 1935);
* ``"westergaard"`` — half-space reinforced by inextensible horizontal sheets
  (Westergaard 1938), with Poisson's ratio 0 <= ν < 0.5 (default 0).

The scalar numba kernels live in :mod:`.boussinesq` and :mod:`.westergaard`.  This
module validates the method choice once (:func:`resolve_method`) and gives
vectorised, validating entry points for other parts of the program.

Both corner functions share one shape, computed by the one routine of :mod:`.corner`
(which every solver calls)::

    F = 1/(2π) [ atan2(a·b/R, c) + s · (b·ac(a) + a·ac(b)) / R ],   R = sqrt(a²+b²+c²)

with ``ac(t) = t z / (t² + z²)`` and c = z, s = 1 (Boussinesq) or c = ηz, s = 0
(Westergaard).  :class:`KernelSpec` carries (c/z, s).
"""
from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np

from .._validate import finite_array
from ..errors import InputError
from . import boussinesq, westergaard
from .corner import shared_rectangle

METHODS = ("boussinesq", "westergaard")


@dataclass(frozen=True)
class KernelSpec:
    """A validated choice of stress distribution.

    Attributes
    ----------
    method : str
        "boussinesq" or "westergaard".
    poisson : float or None
        Poisson's ratio (Westergaard only).
    depth_scale : float
        c / z in the shared corner form: 1 for Boussinesq, η for Westergaard.
    second_term : float
        1.0 when the Boussinesq abz/R term is present, else 0.0.
    """

    method: str
    poisson: float | None
    depth_scale: float
    second_term: float


def resolve_method(method="boussinesq", poisson=None) -> KernelSpec:
    """Validate a method name and Poisson's ratio; raise InputError naming the argument.

    Examples
    --------
    >>> resolve_method("westergaard").poisson
    0.0
    >>> resolve_method("boussinesq", 0.3)
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument poisson: applies only to method='westergaard', got 0.3 with method='boussinesq'
    """
    if not isinstance(method, str) or method.strip().lower() not in METHODS:
        raise InputError(f"must be one of {', '.join(METHODS)}; got {method!r}", argument="method")
    method = method.strip().lower()
    if method == "boussinesq":
        if poisson is not None:
            raise InputError(f"applies only to method='westergaard', got {poisson!r} "
                             "with method='boussinesq'", argument="poisson")
        return KernelSpec("boussinesq", None, 1.0, 1.0)
    nu = 0.0 if poisson is None else poisson
    try:
        nu = float(nu)
    except (TypeError, ValueError):
        raise InputError(f"must be a number, got {poisson!r}", argument="poisson") from None
    if not (0.0 <= nu < 0.5):  # also refuses NaN
        raise InputError(f"must satisfy 0 <= poisson < 0.5 for Westergaard, got {poisson!r}",
                         argument="poisson")
    return KernelSpec("westergaard", nu, westergaard.eta(nu), 0.0)


@numba.njit(cache=True)
def _rectangle_flat(x1, x2, y1, y2, z, depth_scale, second_term, out):
    for k in range(out.size):
        out[k] = shared_rectangle(x1[k], x2[k], y1[k], y2[k], z[k], depth_scale, second_term)


@numba.njit(cache=True)
def _point_flat(r, z, is_westergaard, eta, out):
    for k in range(out.size):
        if is_westergaard:
            out[k] = westergaard.point(r[k], z[k], eta)
        else:
            out[k] = boussinesq.point(r[k], z[k])


def _depth(depth):
    z = finite_array(depth, "depth")
    if np.any(z < 0):
        raise InputError(f"must be >= 0 below the ground surface, got minimum {z.min():g}",
                         argument="depth")
    return z


def rectangle_influence(x1, x2, y1, y2, depth, method="boussinesq", poisson=None):
    """Influence factor Δσz/q of uniform rectangles x1..x2 × y1..y2 (plan offsets in m
    of the rectangle edges from the point, x1 <= x2, y1 <= y2) at `depth` (m, >= 0).

    Arguments broadcast against each other; returns a float or an array.

    Examples
    --------
    >>> round(float(rectangle_influence(0, 1, 0, 2, 1.0)), 4)   # Newmark m = 1, n = 2
    0.1999
    >>> rectangle_influence([-1, 0, 1], [1, 1, 2], -1, 1, 0.0).round(12).tolist()
    [1.0, 0.5, 0.0]
    """
    spec = resolve_method(method, poisson)
    names = ("x1", "x2", "y1", "y2")
    edges = [finite_array(v, n) for v, n in zip((x1, x2, y1, y2), names)]
    x1a, x2a, y1a, y2a, za = np.broadcast_arrays(*edges, _depth(depth))
    if np.any(x2a < x1a) or np.any(y2a < y1a):
        raise InputError("rectangle edges must satisfy x1 <= x2 and y1 <= y2", argument="x2/y2")
    flat = [np.ascontiguousarray(v, dtype=np.float64).ravel() for v in (x1a, x2a, y1a, y2a, za)]
    out = np.empty(flat[0].size)
    _rectangle_flat(*flat, spec.depth_scale, spec.second_term, out)
    return out.reshape(x1a.shape)[()]


def point_influence(radius, depth, method="boussinesq", poisson=None):
    """Influence Δσz/Q (1/m²) of a point load Q at plan distance `radius` and `depth` (m).

    +inf exactly under the load at the surface (radius = depth = 0), 0 elsewhere at
    the surface.

    Examples
    --------
    >>> round(float(point_influence(0.0, 2.0)), 6)       # 3/(2π·4)
    0.119366
    >>> round(float(point_influence(0.0, 1.0, "westergaard")), 6)   # 1/π
    0.31831
    """
    spec = resolve_method(method, poisson)
    r = finite_array(radius, "radius")
    if np.any(r < 0):
        raise InputError("must be >= 0", argument="radius")
    ra, za = np.broadcast_arrays(r, _depth(depth))
    out = np.empty(ra.size)
    _point_flat(np.ascontiguousarray(ra).ravel(), np.ascontiguousarray(za).ravel(),
                spec.method == "westergaard", spec.depth_scale, out)
    return out.reshape(ra.shape)[()]


__all__ = ["METHODS", "KernelSpec", "resolve_method", "rectangle_influence",
           "point_influence", "boussinesq", "westergaard"]
