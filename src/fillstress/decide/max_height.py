"""The largest scale of one body's height at which the first limit is reached.

With every other load in place, scaling one body's thickness by a factor ``s`` scales its
pressure, and so its Δσz everywhere, by ``s`` (elastic superposition). Stress limits are then
linear in ``s`` and the factor is exact (:func:`linear_scale`). Settlement is not linear in
load (the e–log σ' law), so the factor is found by a monotone root search on the full
settlement model (:func:`scale_at_limit`): the upper bound is doubled until the limit is
passed, then Brent's method (scipy.optimize.brentq) closes the bracket to the stated
relative tolerance. The height it gives is ``s`` times the body's height (its shape scaled
vertically; a pile of fixed repose angle whose toe grows with it is a different question).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from .._validate import finite, finite_array, positive, whole_number
from ..errors import InputError
from ..settlement import consolidation_settlement


@dataclass(frozen=True)
class ScaleAtLimit:
    """The factor on a body's height at which the largest utilisation reaches 1.

    ``scale`` is inf when the limit is not reached below ``bracket[1]`` (the search gave up:
    the body cannot load the governing receptor enough), 0 when the limit is already reached
    at ``bracket[0]``. ``utilisation`` is the largest utilisation at ``scale`` (1 within the
    tolerance when found); ``evaluations`` counts calls of the utilisation function.
    """

    scale: float
    utilisation: float
    evaluations: int
    bracket: tuple[float, float]
    tolerance: float
    found: bool


def scale_at_limit(max_utilisation: Callable[[float], float], *, start: float = 1.0,
                   rtol: float = 1e-6, max_doublings: int = 60) -> ScaleAtLimit:
    """Scale factor ``s >= 0`` at which ``max_utilisation(s) = 1``, for a function that
    increases with ``s``.

    Parameters
    ----------
    max_utilisation : callable
        ``f(s) -> float``: the largest utilisation over every receptor and limit with the
        body's height scaled by ``s`` and everything else in place; non-decreasing in s.
    start : float
        First upper bound tried (> 0); doubled until ``f >= 1`` there.
    rtol : float
        Relative tolerance on the factor (>= 1e-15): the root lies within
        ``rtol·s + 1e-300`` of the value returned.
    max_doublings : int
        Give up (scale = inf, ``found=False``) after this many doublings.

    Examples
    --------
    >>> r = scale_at_limit(lambda s: 0.2 + 0.4 * s ** 2, rtol=1e-10)   # 0.2 + 0.4 s² = 1
    >>> round(r.scale, 8), r.found
    (1.41421356, True)
    >>> scale_at_limit(lambda s: 0.5).scale                   # never reached
    inf
    """
    if not callable(max_utilisation):
        raise InputError("must be a callable f(scale) -> utilisation", argument="max_utilisation")
    start = positive(start, "start")
    rtol = positive(rtol, "rtol")
    if rtol < 1e-15:
        raise InputError(f"must be >= 1e-15, got {rtol!r}", argument="rtol")
    max_doublings = whole_number(max_doublings, "max_doublings", minimum=1)
    count = [0]

    def excess(s):
        count[0] += 1
        return finite(max_utilisation(s), "max_utilisation(scale)") - 1.0

    at_zero = excess(0.0)
    if at_zero >= 0:
        return ScaleAtLimit(0.0, at_zero + 1.0, count[0], (0.0, 0.0), rtol, True)
    lo, hi = 0.0, start
    for _ in range(max_doublings):
        at_hi = excess(hi)
        if at_hi >= 0:
            break
        lo, hi = hi, 2.0 * hi
    else:
        return ScaleAtLimit(math.inf, at_hi + 1.0, count[0], (0.0, lo), rtol, False)
    from scipy.optimize import brentq     # slow to load; only a settlement limit needs it
    s = hi if at_hi == 0 else brentq(excess, lo, hi, xtol=1e-300, rtol=max(rtol, 4e-16))
    return ScaleAtLimit(float(s), excess(s) + 1.0, count[0], (lo, hi), rtol, True)


def linear_scale(body, limit, other=0.0) -> tuple[float, int]:
    """Exact factor on a body's height for limits linear in its stress (Δσz, Δσz/σ'v0).

    At each receptor i the quantity is ``other_i + s·body_i`` (superposition), so the limit
    is reached at ``s_i = (limit_i − other_i) / body_i`` where ``body_i > 0``; the body's
    factor is the smallest of these (``1 / utilisation`` when nothing else is in place).

    Parameters
    ----------
    body : array_like, shape (N,)
        The quantity due to the body at its present height (kPa, or a ratio).
    limit : float or array_like, shape (N,)
        Limit at each receptor, same unit (> 0).
    other : float or array_like, shape (N,)
        The quantity due to everything else in place.

    Returns
    -------
    (scale, receptor)
        The factor (inf when the body adds nothing anywhere; 0 where a receptor it loads is
        already at or over its limit) and the index of the governing receptor (-1 with inf).

    Examples
    --------
    >>> linear_scale([20.0, 5.0], 30.0)            # 30/20 at receptor 0
    (1.5, 0)
    >>> linear_scale([20.0, 5.0], 30.0, other=[0.0, 28.0])   # (30 − 28)/5 at receptor 1
    (0.4, 1)
    """
    b = np.atleast_1d(finite_array(body, "body"))
    if b.ndim != 1 or b.size == 0:
        raise InputError(f"must be a non-empty 1-D array, got shape {b.shape}", argument="body")
    lim = np.broadcast_to(finite_array(limit, "limit"), b.shape)
    if np.any(lim <= 0):
        raise InputError("must be > 0 at every receptor", argument="limit")
    rest = np.broadcast_to(finite_array(other, "other"), b.shape)
    loaded = b > 0
    if not loaded.any():
        return math.inf, -1
    per = np.full(b.shape, math.inf)
    per[loaded] = np.maximum(lim[loaded] - rest[loaded], 0.0) / b[loaded]
    k = int(np.argmin(per))
    return float(per[k]), k


def settlement_utilisation(profile, z_mid, h, dsz_body, limit_m, dsz_other=0.0
                           ) -> Callable[[float], float]:
    """``f(s)``: the largest settlement utilisation over points with one body's Δσz scaled
    by ``s``, on the full (nonlinear, Terzaghi 1-D) consolidation settlement.

    Parameters
    ----------
    profile : SoilProfile
    z_mid, h : array_like, shape (K,)
        Sublayer mid-depths and thicknesses (m), e.g. from ``settlement.sublayers``.
    dsz_body : array_like, shape (N, K)
        Δσz (kPa) of the body at its present height, at each point and sublayer.
    limit_m : float or array_like, shape (N,)
        Settlement limit (m) at each point.
    dsz_other : float or array_like, shape (N, K)
        Δσz (kPa) of everything else in place.

    Examples
    --------
    One normally consolidated sublayer, 2 m thick at 3 m (σ'0 = 30 kPa), Cc = 0.5, e0 = 1.5:
    s = 0.4·log10((30 + 60·k)/30); the 0.1 m limit is reached at k = (10^0.25 − 1)/2.

    >>> from fillstress.soil import SoilLayer, SoilProfile
    >>> p = SoilProfile([SoilLayer("clay", 0, 4, 10.0, cc=0.5, cr=0.05, e0=1.5, ocr=1.0)],
    ...                 water_table_m=10.0)
    >>> f = settlement_utilisation(p, [3.0], [2.0], [[60.0]], 0.1)
    >>> r = scale_at_limit(f, rtol=1e-12)
    >>> round(r.scale, 9) == round((10 ** 0.25 - 1) / 2, 9)
    True
    """
    body = np.atleast_2d(finite_array(dsz_body, "dsz_body"))
    other = np.broadcast_to(finite_array(dsz_other, "dsz_other"), body.shape)
    lim = np.broadcast_to(finite_array(limit_m, "limit_m"), body.shape[:1])
    if np.any(lim <= 0):
        raise InputError("must be > 0 m at every point", argument="limit_m")
    consolidation_settlement(profile, z_mid, h, other)      # validates the arrays once

    def f(scale: float) -> float:
        s = consolidation_settlement(profile, z_mid, h, other + scale * body)
        return float(np.max(s / lim))

    return f
