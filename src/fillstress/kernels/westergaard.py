"""Westergaard (1938) vertical stress: an elastic medium reinforced by thin, closely
spaced inextensible horizontal sheets (a model for layered, varved deposits).

With Poisson's ratio ν (0 <= ν < 0.5) and η = sqrt((1 − 2ν) / (2 − 2ν)):

* point load:  Δσz / Q = η z / (2π (η²z² + r²)^(3/2))
  which for ν = 0 (η² = 1/2) is the familiar  Q / (π z²) · [1 + 2 (r/z)²]^(−3/2)
  (Westergaard 1938, as reproduced in standard foundation engineering texts).
* corner of a uniform rectangle, signed, by integrating the point load over
  [0, a] × [0, b] (the integral of c/(c²+x²+y²)^(3/2) is atan(ab / (c·sqrt(a²+b²+c²))))::

      F(a, b, z) = 1/(2π) · atan2(ab, η z sqrt(a² + b² + η² z²))

  which tends to 1/4 for an infinite quadrant, like Boussinesq.
"""
from __future__ import annotations

import math

import numba

from .corner import INV_2PI, shared_corner, shared_rectangle


@numba.njit(cache=True)
def corner(a, b, z, eta):
    """Signed Westergaard corner influence of a uniform rectangle (see module notes).

    Parameters
    ----------
    a, b : float
        Plan offsets (m) of the corner from the point, any sign.
    z : float
        Depth (m), >= 0.
    eta : float
        Westergaard's η, > 0.

    Examples
    --------
    >>> round(corner(1e9, 1e9, 1.0, 0.5 ** 0.5), 6)   # infinite quadrant
    0.25
    >>> corner(-1.0, 1.0, 0.0, 0.5 ** 0.5)             # surface limit
    -0.25
    """
    return shared_corner(a, b, z, eta, 0.0)


@numba.njit(cache=True)
def rectangle(x1, x2, y1, y2, z, eta):
    """Influence factor Δσz/q of a uniform rectangle x1..x2 × y1..y2 (offsets from the point).

    Examples
    --------
    >>> round(rectangle(-1.0, 1.0, -1.0, 1.0, 0.0, 0.7), 12)
    1.0
    """
    return shared_rectangle(x1, x2, y1, y2, z, eta, 0.0)


@numba.njit(cache=True)
def point(r, z, eta):
    """Westergaard point-load influence Δσz/Q = ηz / (2π(η²z² + r²)^(3/2)) in 1/m².

    Returns 0 at the surface away from the load and +inf exactly under it.

    Examples
    --------
    >>> round(point(0.0, 1.0, 0.5 ** 0.5), 6)   # ν = 0: 1/(π z²)
    0.31831
    """
    c = eta * abs(z)
    s = c * c + r * r
    if s == 0.0:
        return math.inf
    return INV_2PI * c / (s * math.sqrt(s))
