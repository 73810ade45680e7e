"""The prediction at instruments as a function of two scale factors, and its fit to readings.

The model is the project's own settlement prediction (settlement.py) at each instrument:
the load of each placement (a design stage, or the part of it the construction record
says was placed on a day) and each body's removal on its ``removal_day`` give Δσz at the
sublayers below the instrument; the settlement after each of these load states follows the
e–log σ' stress path (`stress_path`: a removed surcharge rebounds on Cr), summed by layer,
and its increments consolidate by `settlement_time_curve` from the day of the placement,
ramped over its build time, with radial drainage to vertical drains in the layers they
reach (the run's own model, by layer instead of by sublayer).

Two factors scale the consolidating layers (compressible, with a cv): ``f_c`` multiplies
their compressibility (Cc of index layers, mv of mv layers, 1/M of modulus layers; Cr
is not scaled) and ``f_cv`` their cv and the radial rate of drains in them (ch taken to
scale with cv). Settlement is affine in ``f_c`` (the e–log σ' law is
linear in Cc for a given stress path), so the model is evaluated once at ``f_c = 1`` and
once at ``f_c = 2`` and interpolated exactly.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
import shapely
from scipy import optimize, stats

from .. import settlement as st
from .._validate import finite_array
from ..errors import InputError
from ..io.readings import Placement
from ..soil import SoilProfile

_DAYS_PER_YEAR = 365.25


def consolidating(profile: SoilProfile) -> np.ndarray:
    """Which layers the factors scale: compressible ones with a cv (per `profile.layers`)."""
    return np.array([lay.compressible and lay.cv_m2_per_yr is not None for lay in profile.layers])


def scaled_profile(profile: SoilProfile, f_c: float = 1.0, f_cv: float = 1.0) -> SoilProfile:
    """`profile` with the consolidating layers' compressibility × `f_c` and cv (and ch,
    when given) × `f_cv`.

    Examples
    --------
    >>> from fillstress.soil import SoilLayer, SoilProfile
    >>> p = SoilProfile([SoilLayer("clay", 0, 6, 16, cc=0.5, cr=0.05, e0=1.4, ocr=1,
    ...                            cv_m2_per_yr=2.0)], water_table_m=0)
    >>> q = scaled_profile(p, 0.8, 2.0).layers[0]
    >>> q.cc, q.cr, q.cv_m2_per_yr
    (0.4, 0.05, 4.0)
    """
    layers = []
    for lay, scale in zip(profile.layers, consolidating(profile)):
        if scale:
            change = {"cv_m2_per_yr": lay.cv_m2_per_yr * f_cv}
            if lay.ch_m2_per_yr is not None:                  # ch scales with cv
                change["ch_m2_per_yr"] = lay.ch_m2_per_yr * f_cv
            if lay.kind == "index":
                change["cc"] = lay.cc * f_c
                change["cr"] = min(lay.cr, change["cc"])     # keeps cr <= cc for f_c < 1
            elif lay.kind == "mv":
                change["mv_per_kpa"] = lay.mv_per_kpa * f_c
            elif lay.kind == "modulus":
                change["modulus_kpa"] = lay.modulus_kpa / f_c
            lay = replace(lay, **change)
        layers.append(lay)
    return SoilProfile(layers, profile.water_table_m, profile.rigid_base_m, profile.gamma_w)


def stage_loads(site) -> dict:
    """Stage number → the load grid that stage adds (its own bodies only)."""
    out, before = {}, None
    for k in site.stages:
        grid = site.load_grid(k)
        added = grid.pressure if before is None else grid.pressure - before
        out[k] = site.spec.load_grid(added)
        before = grid.pressure
    return out


def design_placements(site) -> list[Placement]:
    """The design: each stage placed whole from its ``[settlement] stage_days`` day over
    its ``stage_durations``."""
    return [Placement(k, float(d), 1.0, float(r))
            for k, d, r in zip(site.stages, site.stage_start_days(), site.stage_build_days())]


def _load_events(site, placements) -> list[tuple[float, object, float, float]]:
    """(day, load key, fraction, duration) in time order: the placements (key: stage) and
    each body's removal (key: body name, fraction −1) on its removal day."""
    events = [(p.day, p.stage, p.fraction, p.duration_days) for p in placements]
    events += [(day, name, -1.0, 0.0) for name, day in site.removal_days.items()]
    return sorted(events, key=lambda e: (e[0], isinstance(e[1], str)))


def _layer_drain_rates(site, x: float, y: float) -> np.ndarray:
    """Radial rate (1/year) of each layer below (x, y): the first drain zone holding the
    point acts in the layers the drains reach (a layer the drains stop inside counts as
    drained throughout: a stated approximation of the by-layer model)."""
    out = np.zeros(len(site.soil.layers))
    for zone in site.drains:
        if shapely.contains_xy(zone.outline, x, y):
            for i, layer in enumerate(site.soil.layers):
                if layer.top_m < zone.drains.depth_m and layer.ch:
                    out[i] = float(zone.drains.radial_rate(layer.ch))
            break
    return out


@dataclass(frozen=True)
class PointModel:
    """Settlement against time at N points as a function of (f_c, f_cv).

    ``base``, ``slope`` (N, E, L): settlement increment of each load event (placement or
    removal) in each layer at f_c = 1, and its change per unit of f_c; ``days`` and
    ``durations`` (E,) of the events; ``cv`` (m²/year, inf = immediate) and
    ``drainage_path`` (m) per layer; ``scaled`` (L,) the layers the factors touch;
    ``radial`` (N, L) the drains' radial rate (1/year) at each point and layer.
    """

    base: np.ndarray
    slope: np.ndarray
    days: np.ndarray
    cv: np.ndarray
    drainage_path: np.ndarray
    scaled: np.ndarray
    durations: np.ndarray
    radial: np.ndarray

    def increments(self, f_c: float = 1.0) -> np.ndarray:
        return self.base + (f_c - 1.0) * self.slope

    def final(self, f_c: float = 1.0) -> np.ndarray:
        """Final settlement (m) at each point with every placement in, shape (N,)."""
        return self.increments(f_c).sum(axis=(1, 2))

    def settlement(self, days, f_c: float = 1.0, f_cv: float = 1.0) -> np.ndarray:
        """Settlement (m) at each point at `days` (days after day 0), shape (N, T)."""
        t = np.atleast_1d(np.asarray(days, float)) / _DAYS_PER_YEAR
        cv = np.where(self.scaled, self.cv * f_cv, self.cv)
        radial = np.where(self.scaled, self.radial * f_cv, self.radial)
        inc = self.increments(f_c)
        return np.array([st.settlement_time_curve(
            inc[n], self.days / _DAYS_PER_YEAR, t, cv, self.drainage_path,
            durations=self.durations / _DAYS_PER_YEAR, radial_rate=radial[n])
            for n in range(inc.shape[0])]).reshape(inc.shape[0], t.size)

    def select(self, rows) -> "PointModel":
        return replace(self, base=self.base[rows], slope=self.slope[rows],
                       radial=self.radial[rows])


def point_model(site, xy, depth, placements=None, stress=None) -> PointModel:
    """The prediction at plan points `xy` (N, 2; m) for settlement of depth `depth` (N,)
    and below (0 = the ground surface, a plate; an anchor depth for an extensometer).

    `placements` default to the design (`design_placements`); `stress(grid, xyz)` computes
    Δσz (default the site's method by direct summation).
    """
    soil = site.soil
    if soil is None:
        raise InputError("the site has no [soil]: nothing to compare readings with", key="soil")
    if not consolidating(soil).any():
        raise InputError("no compressible layer has cv: no settlement–time prediction to fit",
                         key="soil.layers")
    xy = np.atleast_2d(finite_array(xy, "xy"))
    depth = np.atleast_1d(finite_array(depth, "depth"))
    events = _load_events(site, list(placements or design_placements(site)))
    stress = stress or _site_stress(site)
    loads = {**stage_loads(site), **{b.name: site.spec.load_grid(b.pressure)
                                     for b in site.bodies if b.name in site.removal_days}}
    cv, hdr = st.time_parameters(soil, no_cv="immediate")
    doubled = scaled_profile(soil, 2.0)
    n, e, n_layers = len(xy), len(events), len(soil.layers)
    base, twice = np.zeros((n, e, n_layers)), np.zeros((n, e, n_layers))
    for d in np.unique(depth):
        rows = np.flatnonzero(depth == d)
        z, h = st.sublayers(soil, top_depth=float(d))
        if z.size == 0:
            continue
        xyz = np.column_stack([np.repeat(xy[rows, 0], z.size), np.repeat(xy[rows, 1], z.size),
                               np.tile(z, rows.size)])
        by_load = {k: stress(g, xyz).reshape(rows.size, z.size) for k, g in loads.items()}
        dsz = np.cumsum([f * by_load[key] for _, key, f, _ in events], axis=0)   # (E, N, K)
        dsz = np.moveaxis(dsz, 0, 1)
        in_layer = (soil.layer_index(z)[:, None] == np.arange(n_layers)).astype(float)  # (K, L)
        base[rows] = st.stress_path(soil, z, h, dsz).settlement @ in_layer
        twice[rows] = st.stress_path(doubled, z, h, dsz).settlement @ in_layer
    base_inc, twice_inc = st.stage_increments(base), st.stage_increments(twice)
    radial = np.array([_layer_drain_rates(site, x, y) for x, y in xy[:, :2]])
    return PointModel(base_inc, twice_inc - base_inc, np.array([ev[0] for ev in events]),
                      cv, hdr, consolidating(soil), np.array([ev[3] for ev in events]), radial)


def _site_stress(site):
    from ..solve.auto import stress_at_points

    def stress(grid, xyz):
        return stress_at_points(grid, xyz, site.method, site.poisson)
    return stress


# --- the fit --------------------------------------------------------------------------
@dataclass(frozen=True)
class FactorFit:
    """Least-squares scale factors with 95 % confidence intervals from the Jacobian.

    ``f_c``, ``f_cv`` the factors; ``f_c_ci``, ``f_cv_ci`` (low, high); ``rms`` of the
    residuals (m); ``n`` readings fitted; ``residuals`` (m, model − reading) in the
    order given; ``identifiable`` False when the readings cannot tell the factors apart
    (their intervals are then infinite).
    """

    f_c: float
    f_cv: float
    f_c_ci: tuple
    f_cv_ci: tuple
    rms: float
    n: int
    residuals: np.ndarray
    identifiable: bool


def relative_settlement(model: PointModel, rows, days, baseline_days, f_c, f_cv) -> np.ndarray:
    """Model settlement at (row, day) pairs measured from each row's baseline day."""
    rows, days = np.asarray(rows, int), np.asarray(days, float)
    out = np.empty(days.size)
    for r in np.unique(rows):
        at = rows == r
        curve = model.select([r]).settlement(np.r_[baseline_days[r], days[at]], f_c, f_cv)[0]
        out[at] = curve[1:] - curve[0]
    return out


def fit_factors(model: PointModel, rows, days, measured, baseline_days,
                level: float = 0.95) -> FactorFit:
    """Scale factors (f_c, f_cv) that make the model best match settlement readings.

    Parameters
    ----------
    model : PointModel
        One row per instrument.
    rows, days, measured : array_like, shape (R,)
        Instrument row of each reading, its day and settlement (m, from the baseline).
    baseline_days : array_like, shape (N,)
        Day of each instrument's baseline (zero) reading.
    level : float
        Confidence level of the intervals (default 95 %, Student t on R − 2 degrees of
        freedom, covariance s²·(JᵀJ)⁻¹ at the optimum).
    """
    rows = np.asarray(rows, int)
    days = finite_array(days, "days")
    measured = finite_array(measured, "measured")
    base = finite_array(baseline_days, "baseline_days")
    if days.size < 3:
        raise InputError(f"needs at least 3 readings after the baseline to fit two factors, "
                         f"got {days.size}", argument="measured")

    def residual(p):
        return relative_settlement(model, rows, days, base, p[0], p[1]) - measured

    sol = optimize.least_squares(residual, x0=[1.0, 1.0], bounds=([1e-3, 1e-3], [1e3, 1e3]),
                                 x_scale=[1.0, 1.0], method="trf")
    r = sol.fun
    dof = max(r.size - 2, 1)
    s2 = float(r @ r) / dof
    jtj = sol.jac.T @ sol.jac
    identifiable = np.linalg.cond(jtj) < 1e12
    if identifiable:
        half = stats.t.ppf(0.5 + level / 2.0, dof) * np.sqrt(np.diag(np.linalg.inv(jtj)) * s2)
    else:
        half = np.array([math.inf, math.inf])
    (fc, fcv), (hc, hcv) = sol.x, half
    return FactorFit(float(fc), float(fcv), (fc - hc, fc + hc), (fcv - hcv, fcv + hcv),
                     math.sqrt(float(r @ r) / r.size), int(r.size), r, bool(identifiable))


# --- pore pressure at piezometers --------------------------------------------------------
_SERIES_EXPONENT = 40.0


def isochrone(z_over_h, tv):
    """Terzaghi's excess pore pressure ratio u/u0 at Z = z/H_dr from a drained face.

    ``u/u0 = Σ 2/M·sin(M·Z)·exp(−M²·Tv)``, M = π(2m+1)/2, uniform initial excess u0;
    Tv = 0 gives 1 inside the layer (0 < Z < 2). Summed until exp(−M²·Tv) < e⁻⁴⁰.

    Examples
    --------
    >>> round(float(isochrone(1.0, 0.2)), 4)     # mid-layer of a double-drained layer
    0.7723
    >>> float(isochrone(0.5, 0.0)), float(isochrone(0.0, 0.3))
    (1.0, 0.0)
    """
    z = np.asarray(finite_array(z_over_h, "z_over_h"))
    tv = np.asarray(finite_array(tv, "tv"))
    if np.any(tv < 0):
        raise InputError("time factor must be >= 0", argument="tv")
    z, tv = np.broadcast_arrays(z, tv)
    out = np.zeros(z.shape)
    positive_t = tv > 0
    inside = (z > 0) & (z < 2)
    out[~positive_t & inside] = 1.0
    if np.any(positive_t):
        tmin = float(tv[positive_t].min())
        n_terms = int(math.sqrt(_SERIES_EXPONENT / tmin) / math.pi) + 2
        zz, tt = z[positive_t], tv[positive_t]
        total = np.zeros(zz.shape)
        for m in range(min(n_terms, 100000)):
            big_m = math.pi * (2 * m + 1) / 2.0
            total += 2.0 / big_m * np.sin(big_m * zz) * np.exp(-big_m**2 * tt)
        out[positive_t] = total
    return out if out.ndim else float(out)


@dataclass(frozen=True)
class PiezometerModel:
    """Predicted excess pore pressure at N piezometers: ``du`` (N, E) kPa each placement
    adds; ``z_over_h`` (N,) position from the drained face; ``cv`` (N,) m²/year (inf:
    drains at once) and ``drainage_path`` (N,) m of the layer; ``scaled`` (N,) whether
    f_cv applies; ``days`` (E,) of the placements."""

    du: np.ndarray
    z_over_h: np.ndarray
    cv: np.ndarray
    drainage_path: np.ndarray
    scaled: np.ndarray
    days: np.ndarray

    def excess(self, days, f_cv: float = 1.0) -> np.ndarray:
        """Excess pore pressure (kPa) at each piezometer at `days`, shape (N, T)."""
        t = np.atleast_1d(np.asarray(days, float))
        cv = np.where(self.scaled, self.cv * f_cv, self.cv)
        out = np.zeros((self.du.shape[0], t.size))
        for j, start in enumerate(self.days):
            elapsed = np.maximum(t - start, 0.0) / _DAYS_PER_YEAR
            for i in range(self.du.shape[0]):
                if not np.isfinite(cv[i]):
                    continue
                tv = cv[i] * elapsed / self.drainage_path[i] ** 2
                ratio = np.where(t >= start, isochrone(self.z_over_h[i], tv), 0.0)
                out[i] += self.du[i, j] * ratio
        return out


def piezometer_model(site, xyz, placements=None, stress=None) -> PiezometerModel:
    """Predicted excess pore pressure at piezometers at `xyz` (N, 3: x, y, depth in m).

    Each placement raises the excess pore pressure by the Δσz it adds there (the 1-D
    assumption: the load is carried by the water at first), which then dissipates by
    Terzaghi's isochrones of the layer holding the tip. A tip in a layer without cv (or
    incompressible) has no excess.
    """
    soil = site.soil
    xyz = np.atleast_2d(finite_array(xyz, "xyz"))
    placements = list(placements or design_placements(site))
    stress = stress or _site_stress(site)
    by_stage = {k: stress(g, xyz) for k, g in stage_loads(site).items()}
    du = np.column_stack([p.fraction * by_stage[p.stage] for p in placements])
    idx = soil.layer_index(xyz[:, 2])
    cv, hdr, z_rel, scaled = [], [], [], consolidating(soil)[idx]
    for i, z in zip(idx, xyz[:, 2]):
        lay = soil.layers[i]
        bottom = min(lay.bottom_m, soil.rigid_base_m)
        h = st.drainage_path(lay, bottom if bottom < lay.bottom_m else None)
        from_face = bottom - z if lay.drainage == "single-bottom" else z - lay.top_m
        cv.append(lay.cv_m2_per_yr if scaled[len(cv)] else math.inf)
        hdr.append(h)
        z_rel.append(from_face / h)
    return PiezometerModel(du, np.array(z_rel), np.array(cv), np.array(hdr), scaled,
                           np.array([p.day for p in placements]))
