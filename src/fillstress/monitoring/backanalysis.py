"""Back-analysis of settlement readings: Asaoka (1978) and the hyperbolic method (Tan 1971).

Both work on readings taken after the last load is placed (the load then stays constant),
with time in days and settlement in any one length unit (the results come in that unit).

Asaoka (1978), "Observational procedure of settlement prediction", Soils and Foundations
18(4): readings at equal time steps Δt obey, to first order, ``s_j = β0 + β1·s_{j−1}``;
the ultimate settlement is where the line meets ``s_j = s_{j−1}``: ``s_ult = β0/(1 − β1)``.
For Terzaghi's 1-D consolidation the first term of the series gives
``s(t) = s_ult·(1 − (8/π²)·exp(−λt))`` with ``λ = π²·cv/(4·H_dr²)``, so
``β1 = exp(−λ·Δt)`` exactly and ``cv = −4·H_dr²·ln β1 / (π²·Δt)``. (Asaoka's paper gives
``cv = −(5/12)·H²·ln β1/Δt`` from a truncated form of the equation; 5/12 = 0.417 against
4/π² = 0.405. The first-term relation used here is exact wherever the first term
dominates, i.e. U above about 60 %.)

Tan (1971) hyperbolic method (as recalled from memory of the method's later descriptions):
after a time origin t0 (the end of loading) with settlement s0 there,
``(t − t0)/(s − s0) = α + β·(t − t0)`` is a straight line; the ultimate settlement is
``s0 + 1/β``. Fitted by least squares on the readings after t0.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._validate import finite_array, positive
from ..errors import InputError

_DAYS_PER_YEAR = 365.25


def _readings(days, settlement, minimum: int):
    t = np.atleast_1d(finite_array(days, "days"))
    s = np.atleast_1d(finite_array(settlement, "settlement"))
    if t.ndim != 1 or s.shape != t.shape:
        raise InputError(f"must be 1-D and match days {t.shape}, got {s.shape}",
                         argument="settlement")
    if t.size < minimum:
        raise InputError(f"needs at least {minimum} readings, got {t.size}", argument="days")
    if np.any(np.diff(t) <= 0):
        raise InputError("reading times must be strictly increasing", argument="days")
    return t, s


def resample_equal(days, settlement, step: float | None = None):
    """Readings linearly interpolated onto equal time steps from the first to the last.

    Parameters
    ----------
    days, settlement : array_like, shape (N,)
        Reading times (strictly increasing) and values.
    step : float, optional
        Time step (days); default the median spacing of the readings.

    Returns
    -------
    days, settlement : ndarray
        The equal-step times (first reading onward, none beyond the last) and values.

    Examples
    --------
    >>> t, s = resample_equal([0, 10, 30], [0.0, 1.0, 2.0], step=10)
    >>> t.tolist(), s.tolist()
    ([0.0, 10.0, 20.0, 30.0], [0.0, 1.0, 1.5, 2.0])
    """
    t, s = _readings(days, settlement, 2)
    dt = float(np.median(np.diff(t))) if step is None else positive(step, "step")
    n = int(math.floor((t[-1] - t[0]) / dt * (1 + 1e-12))) + 1
    grid = t[0] + dt * np.arange(n)
    return grid, np.interp(grid, t, s)


@dataclass(frozen=True)
class AsaokaFit:
    """Asaoka (1978) fit: ``s_j = beta0 + beta1·s_{j−1}`` at steps of `step_days`.

    ``ultimate`` = beta0/(1 − beta1) (the readings' unit); ``rate_per_day`` = −ln(beta1)/Δt;
    ``cv_m2_per_yr`` from the first term of Terzaghi's series when a drainage path was
    given (else None); ``previous``, ``current`` the pairs (s_{j−1}, s_j) plotted;
    ``residuals`` = current − (beta0 + beta1·previous).
    """

    step_days: float
    beta0: float
    beta1: float
    ultimate: float
    rate_per_day: float
    cv_m2_per_yr: float | None
    previous: np.ndarray
    current: np.ndarray
    residuals: np.ndarray


def asaoka(days, settlement, step: float | None = None,
           drainage_path_m: float | None = None) -> AsaokaFit:
    """Ultimate settlement and consolidation rate by Asaoka's (1978) method.

    Readings at unequal times are first resampled onto equal steps (`resample_equal`).

    Parameters
    ----------
    days, settlement : array_like, shape (N,)
        Readings after the last load was placed; N >= 4.
    step : float, optional
        The time step Δt (days); default the median spacing of the readings.
    drainage_path_m : float, optional
        Longest drainage path H_dr (m) of the consolidating layer: gives the implied cv.

    Examples
    --------
    Readings exactly of the form s = 0.8·(1 − 0.6·exp(−t/50)), every 10 days:

    >>> import numpy as np
    >>> t = np.arange(0.0, 101.0, 10.0)
    >>> fit = asaoka(t, 0.8 * (1 - 0.6 * np.exp(-t / 50)), drainage_path_m=3.0)
    >>> round(fit.ultimate, 6), round(fit.beta1, 6), round(fit.rate_per_day, 6)
    (0.8, 0.818731, 0.02)
    >>> round(fit.cv_m2_per_yr, 4)        # 4·3²·0.02·365.25/π²
    26.6454
    """
    t, s = resample_equal(*_readings(days, settlement, 4), step)
    if t.size < 4:
        raise InputError(f"only {t.size} equal steps between the first and last reading; "
                         "needs at least 4 (a shorter step or more readings)", argument="step")
    prev, cur = s[:-1], s[1:]
    design = np.column_stack([np.ones_like(prev), prev])
    (beta0, beta1), *_ = np.linalg.lstsq(design, cur, rcond=None)
    if not 0.0 < beta1 < 1.0:
        raise InputError(f"the readings do not converge (Asaoka β1 = {beta1:.4g}, needs "
                         "0 < β1 < 1): still loading, no settlement, or too few readings "
                         "after the end of loading", argument="settlement")
    dt = float(t[1] - t[0])
    rate = -math.log(beta1) / dt
    cv = None
    if drainage_path_m is not None:
        h = positive(drainage_path_m, "drainage_path_m")
        cv = 4.0 * h * h * rate * _DAYS_PER_YEAR / math.pi**2
    return AsaokaFit(dt, float(beta0), float(beta1), float(beta0 / (1.0 - beta1)), rate, cv,
                     prev, cur, cur - (beta0 + beta1 * prev))


@dataclass(frozen=True)
class HyperbolicFit:
    """Tan (1971) hyperbolic fit: ``(t − t0)/(s − s0) = alpha + beta·(t − t0)``.

    ``ultimate`` = s0 + 1/beta; ``t0``, ``s0`` the time origin and its settlement;
    ``residuals`` of the settlement the fitted hyperbola gives at each reading after t0.
    """

    t0: float
    s0: float
    alpha: float
    beta: float
    ultimate: float
    residuals: np.ndarray


def hyperbolic(days, settlement, start_day: float | None = None) -> HyperbolicFit:
    """Ultimate settlement by the hyperbolic method of Tan (1971).

    Parameters
    ----------
    days, settlement : array_like, shape (N,)
        Readings; those after `start_day` are fitted (at least 3).
    start_day : float, optional
        The time origin t0 (end of loading); default the first reading. The settlement
        there is interpolated from the readings.

    Examples
    --------
    Readings exactly on s = 0.1 + (t − 20)/(40 + 2·(t − 20)):

    >>> import numpy as np
    >>> t = np.array([20.0, 40, 80, 160, 320])
    >>> fit = hyperbolic(t, 0.1 + (t - 20) / (40 + 2 * (t - 20)))
    >>> round(fit.alpha, 9), round(fit.beta, 9), round(fit.ultimate, 9)
    (40.0, 2.0, 0.6)
    """
    t, s = _readings(days, settlement, 3)
    t0 = float(t[0]) if start_day is None else float(start_day)
    if not t[0] <= t0 < t[-1]:
        raise InputError(f"must lie within the readings ({t[0]:g} … {t[-1]:g} days), got "
                         f"{start_day!r}", argument="start_day")
    s0 = float(np.interp(t0, t, s))
    after = t > t0
    dt, ds = t[after] - t0, s[after] - s0
    if dt.size < 3:
        raise InputError(f"needs at least 3 readings after day {t0:g}, got {dt.size}",
                         argument="days")
    if np.any(ds <= 0):
        raise InputError(f"settlement must exceed its value at day {t0:g} at every later "
                         "reading (the method needs settlement growing from the origin)",
                         argument="settlement")
    design = np.column_stack([np.ones_like(dt), dt])
    (alpha, beta), *_ = np.linalg.lstsq(design, dt / ds, rcond=None)
    if beta <= 0:
        raise InputError(f"the readings do not level off (hyperbolic β = {beta:.4g} <= 0)",
                         argument="settlement")
    fitted = dt / (alpha + beta * dt)
    return HyperbolicFit(t0, s0, float(alpha), float(beta), float(s0 + 1.0 / beta),
                         ds - fitted)
