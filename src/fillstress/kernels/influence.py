"""Vectorised, validating influence factors of rectangles and point loads (numba)."""
from __future__ import annotations

import numba
import numpy as np

from .._validate import finite_array
from ..errors import InputError
from . import boussinesq, westergaard
from .corner import shared_rectangle
from .spec import resolve_method


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
