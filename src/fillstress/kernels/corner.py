"""The one corner routine both stress distributions and every solver use.

Both corner functions share one shape (see :mod:`fillstress.kernels`)::

    2π F = atan2(a·b/R, c) + s · (b·ac(a) + a·ac(b)) / R,   R = sqrt(a² + b² + c²)

with ``ac(t) = t z / (t² + z²)`` and c = z, s = 1 (Boussinesq) or c = ηz, s = 0
(Westergaard).  :func:`corner_sum` takes the parts a kernel can compute once per point
row or column (c, 1/c, R², ac(a), ac(b)) and holds the guards against underflow and 0/0
in one place; the scalar corners of :mod:`.boussinesq` and :mod:`.westergaard`, the node
kernel of direct summation, the unit-cell kernel of FFT slices and the exact cells of the
far field all call it.
"""
from __future__ import annotations

import math

import numba

INV_2PI = 1.0 / (2.0 * math.pi)

# Arctangent by range reduction and a rational approximation, after the Cephes library
# (Moshier 1989, "Methods and Programs for Mathematical Functions").  Coefficients recalled
# from memory; tests hold it to libm's atan within 4e-16 relative.  The corner sums spend
# most of their time in the arctangent; the one-argument form on y·(1/c) is what beats
# math.atan2, and this function is measured beside math.atan by benchmarks/bench_engine.py
# (`benchmarks/bench_engine.py --only arctangent`).
_ATAN_P = (-8.750608600031904122785e-1, -1.615753718733365076637e1, -7.500855792314704667340e1,
           -1.228866684490136173410e2, -6.485021904942025371773e1)
_ATAN_Q = (2.485846490142306297962e1, 1.650270098316988542046e2, 4.328810604912902668951e2,
           4.853903996359136964868e2, 1.945506571482613964425e2)
_TAN_3PI_8 = 2.41421356237309504880
_PI_2_LOW = 6.123233995736765886130e-17  # π/2 − float(π/2)
P0, P1, P2, P3, P4 = _ATAN_P
Q0, Q1, Q2, Q3, Q4 = _ATAN_Q


@numba.njit(cache=True)
def fast_atan(x):
    """Arctangent of x (radians), accurate to about one ulp; ±π/2 at ±inf.

    Examples
    --------
    >>> abs(fast_atan(1.0) - math.pi / 4) < 1e-16, fast_atan(math.inf) == math.pi / 2
    (True, True)
    """
    sign = 1.0
    if x < 0.0:
        sign, x = -1.0, -x
    if x > _TAN_3PI_8:
        base, low, x = 0.5 * math.pi, _PI_2_LOW, -1.0 / x
    elif x <= 0.66:
        base, low = 0.0, 0.0
    else:
        base, low, x = 0.25 * math.pi, 0.5 * _PI_2_LOW, (x - 1.0) / (x + 1.0)
    z = x * x
    p = (((P0 * z + P1) * z + P2) * z + P3) * z + P4
    q = ((((z + Q0) * z + Q1) * z + Q2) * z + Q3) * z + Q4
    return sign * (base + ((x * (z * p / q) + x) + low))


@numba.njit(cache=True)
def corner_angle(y, c, inv_c):
    """atan2(y, c) for c >= 0 given inv_c = 1/c: the fast arctangent when c is not tiny,
    math.atan2 otherwise (the surface, c = 0, gives ±π/2 or 0 exactly).

    Examples
    --------
    >>> corner_angle(1.0, 0.0, math.inf) == math.pi / 2, corner_angle(0.0, 0.0, math.inf)
    (True, 0.0)
    """
    if c > 1e-290:
        return fast_atan(y * inv_c)
    return math.atan2(y, c)


@numba.njit(cache=True, fastmath=False)  # never inherits a caller's fastmath (see FAST_MATH)
def depth_parts(depth, depth_scale):
    """(z, c, 1/c) of a point: z = |depth| (which turns -0.0 into +0.0 so atan2 stays in
    the right half-plane), c = depth_scale·z and 1/c by :func:`inverse_depth`.

    Examples
    --------
    >>> depth_parts(-0.0, 0.5)
    (0.0, 0.0, inf)
    """
    z = abs(depth)
    c = depth_scale * z
    return z, c, inverse_depth(c)


@numba.njit(cache=True)
def inverse_depth(c):
    """1/c, or +inf at the surface (c = 0), as :func:`corner_sum` takes it.

    Examples
    --------
    >>> inverse_depth(0.5), inverse_depth(0.0)
    (2.0, inf)
    """
    return 1.0 / c if c > 0.0 else math.inf


@numba.njit(cache=True, fastmath=False)  # never inherits a caller's fastmath (see FAST_MATH)
def cross_ratio(a, z):
    """``a·z / (a² + z²)`` without 0/0 or underflow; 0 when a = z = 0.

    Examples
    --------
    >>> cross_ratio(1.0, 1.0), cross_ratio(0.0, 0.0), cross_ratio(3.0, 0.0)
    (0.5, 0.0, 0.0)
    """
    s = a * a + z * z
    if s > 1e-290:  # the usual case; below this the squares may have underflowed
        return a * z / s
    h = math.hypot(a, z)
    if h == 0.0:
        return 0.0
    return (a / h) * (z / h)


# Below this scaled depth the guards of corner_sum are needed; at or above it R >= c
# cannot underflow and 1/c is finite, so the one-argument arctangent applies unguarded.
DEEP = 1e-145

# fastmath flags of the hot loops: fused multiply-add, reassociation, reciprocals,
# approximate functions and no signed zeros, but not the flags that assume no inf or NaN
# (the surface limit gives 1/c = inf).  numba passes a caller's flags on to
# the functions it calls unless they set their own, so the guarded near-surface branch and
# cross_ratio and depth_parts say fastmath=False: reassociating a·(b/R) into (a·b)/R, or
# b/R into b·(1/R), is exactly the underflow and overflow those guards avoid, and c must
# be +0.0, never -0.0, at the surface.  Below the surface a signed zero only ever adds 0.
FAST_MATH = {"contract", "reassoc", "arcp", "afn", "nsz"}


@numba.njit(cache=True)
def corner_sum(a, b, c, r_sq, inv_c, a_cross, b_cross):
    """2π·F(a, b) from parts: c >= 0 the scaled depth, r_sq = a² + b² + c², inv_c from
    :func:`inverse_depth`, a_cross = s·cross_ratio(a, z) and b_cross = s·cross_ratio(b, z).

    The first test depends only on the point, so in a loop over nodes the compiler hoists
    it out of the loop.

    Examples
    --------
    >>> round(corner_sum(1.0, 1.0, 1.0, 3.0, 1.0, 0.5, 0.5) / (2 * math.pi), 4)  # Newmark m = n = 1
    0.1752
    >>> corner_sum(0.0, 0.0, 0.0, 0.0, math.inf, 0.0, 0.0)
    0.0
    """
    if c >= DEEP:  # the usual case
        return corner_deep(a, b, r_sq, inv_c, a_cross, b_cross)
    return _corner_near_surface(a, b, c, r_sq, inv_c, a_cross, b_cross)


@numba.njit(cache=True)
def corner_deep(a, b, r_sq, inv_c, a_cross, b_cross):
    """:func:`corner_sum` where c >= DEEP: then R >= c, so neither R nor 1/c under- or
    overflows and no guard is needed (kernels test c once per point and call this).

    Examples
    --------
    >>> corner_deep(1.0, 1.0, 3.0, 1.0, 0.5, 0.5) == corner_sum(1.0, 1.0, 1.0, 3.0, 1.0, 0.5, 0.5)
    True
    """
    inv_r = 1.0 / math.sqrt(r_sq)
    return fast_atan(a * (b * inv_r) * inv_c) + (b * a_cross + a * b_cross) * inv_r


@numba.njit(cache=True, fastmath=False)  # never inherits a caller's fastmath (see FAST_MATH)
def _corner_near_surface(a, b, c, r_sq, inv_c, a_cross, b_cross):
    # atan2(ab, cR) taken as atan2(a·(b/R), c): the same angle, but a product of two tiny
    # offsets cannot underflow to 0 and lose its quadrant
    r = math.sqrt(r_sq)
    if r >= DEEP:
        inv_r = 1.0 / r
        return corner_angle(a * (b * inv_r), c, inv_c) + (b * a_cross + a * b_cross) * inv_r
    # the squares may have underflowed: R again without them, and divisions, since 1/R
    # may overflow
    r = math.hypot(math.hypot(a, b), c)
    if r == 0.0:
        return 0.0
    return corner_angle(a * (b / r), c, inv_c) + (b * a_cross + a * b_cross) / r


@numba.njit(cache=True)
def shared_corner(a, b, z, depth_scale, second_term):
    """The corner F(a, b, z) for either method: depth_scale = c/z, second_term = s.

    Examples
    --------
    >>> round(shared_corner(1.0, 1.0, 1.0, 1.0, 1.0), 4)   # Boussinesq m = n = 1
    0.1752
    """
    z = abs(z)  # turns -0.0 into +0.0 so atan2 stays in the right half-plane
    c = depth_scale * z
    return INV_2PI * corner_sum(a, b, c, a * a + b * b + c * c, inverse_depth(c),
                                second_term * cross_ratio(a, z),
                                second_term * cross_ratio(b, z))


@numba.njit(cache=True)
def shared_rectangle(x1, x2, y1, y2, z, depth_scale, second_term):
    """Influence Δσz/q of a uniform rectangle x1..x2 × y1..y2 (offsets from the point).

    Examples
    --------
    >>> round(shared_rectangle(-1.0, 1.0, -1.0, 1.0, 0.0, 1.0, 1.0), 12)
    1.0
    """
    return (shared_corner(x2, y2, z, depth_scale, second_term)
            - shared_corner(x1, y2, z, depth_scale, second_term)
            - shared_corner(x2, y1, z, depth_scale, second_term)
            + shared_corner(x1, y1, z, depth_scale, second_term))
