"""Boussinesq (1885) vertical stress in a homogeneous, isotropic elastic half-space.

Closed forms per unit surface load (dimensionless influence for areas, 1/m² for a point):

* point load:  Δσz / Q = 3 z³ / (2π R⁵),  R² = r² + z²            (Boussinesq 1885)
* corner of a uniformly loaded rectangle, signed, Holl (1940) style::

      F(a, b, z) = 1/(2π) · [ atan2(ab, zR) + abz/R · (1/(a²+z²) + 1/(b²+z²)) ],
      R = sqrt(a² + b² + z²)

  with (a, b) the plan offsets of the corner from the point.  Because ``zR >= 0``,
  ``atan2`` stays on the principal branch everywhere, so the classic Newmark (1935)
  "+π when m²n² > m²+n²+1" correction is never needed, and F is odd in a and in b.
  A rectangle x1..x2 × y1..y2 (offsets from the point) is
  ``F(x2,y2) − F(x1,y2) − F(x2,y1) + F(x1,y1)``.  The corner is evaluated by the one
  routine of :mod:`.corner`, which holds the guards against underflow.

These are scalar numba functions: they assume valid input (z >= 0) and stay
branch-light.  The validating public entry points live in ``fillstress.kernels``.
"""
from __future__ import annotations

import math

import numba

from .corner import INV_2PI, shared_corner, shared_rectangle


@numba.njit(cache=True)
def corner(a, b, z):
    """Signed Boussinesq corner influence F(a, b, z) of a uniform rectangle.

    Parameters
    ----------
    a, b : float
        Plan offsets (m) of the rectangle corner from the point, any sign.
    z : float
        Depth (m), >= 0.

    Returns
    -------
    float
        F such that a rectangle [0, a] × [0, b] (a, b > 0) gives Δσz = q·F.
        At z = 0: ±1/4 when a·b ≠ 0, else 0 (the surface limit).

    Examples
    --------
    >>> round(corner(1.0, 1.0, 1.0), 4)      # Newmark (1935) m = n = 1
    0.1752
    >>> corner(2.0, -3.0, 0.0), corner(0.0, 5.0, 0.0)
    (-0.25, 0.0)
    """
    return shared_corner(a, b, z, 1.0, 1.0)


@numba.njit(cache=True)
def rectangle(x1, x2, y1, y2, z):
    """Influence factor Δσz/q of a uniform rectangle x1..x2 × y1..y2 (offsets from the point).

    Examples
    --------
    >>> round(rectangle(-1.0, 1.0, -1.0, 1.0, 0.0), 12)   # inside at the surface
    1.0
    >>> round(rectangle(0.0, 1.0, 0.0, 1.0, 0.0), 12)     # at a corner
    0.25
    """
    return shared_rectangle(x1, x2, y1, y2, z, 1.0, 1.0)


@numba.njit(cache=True)
def point(r, z):
    """Boussinesq point-load influence Δσz/Q = 3z³/(2πR⁵) in 1/m².

    Returns 0 at the surface away from the load and +inf exactly under it (r = z = 0).

    Examples
    --------
    >>> round(point(0.0, 1.0), 6)    # 3/(2π)
    0.477465
    >>> point(1.0, 0.0)
    0.0
    """
    r2 = r * r + z * z
    if r2 == 0.0:
        return math.inf
    return 3.0 * INV_2PI * abs(z) ** 3 / (r2 * r2 * math.sqrt(r2))
