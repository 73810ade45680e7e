"""Readings against the prediction: back-analysis, model fit and revised forecast (numbers only).

`analyse` takes a site model, its readings and the construction record and returns every
number the monitoring results folder holds; nothing is written here.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy.optimize import brentq

from ..errors import InputError
from .backanalysis import asaoka, hyperbolic
from .model import (FactorFit, design_placements, fit_factors, piezometer_model,
                    point_model, relative_settlement)

DAYS_PER_YEAR = 365.25
SETTLING = ("plate", "extensometer")
MIN_AFTER_LOADING = 4        # Asaoka needs four readings after the last placement


@dataclass(frozen=True)
class Settings:
    """What the forecast is asked: the degree of consolidation at which the surcharge may
    come off (`target_degree`), and the residual settlement limit (m) over a design life
    (years) after which the pavement or slab may go on."""

    target_degree: float = 0.9
    residual_limit_m: float | None = None
    design_life_years: float = 50.0

    def __post_init__(self):
        if not 0 < self.target_degree < 1:
            raise InputError(f"must be between 0 and 1 (exclusive), got {self.target_degree!r}",
                             argument="--target-degree")
        if self.residual_limit_m is not None and not self.residual_limit_m > 0:
            raise InputError(f"must be positive, got {self.residual_limit_m!r}",
                             argument="--residual-limit")
        if not self.design_life_years > 0:
            raise InputError(f"must be positive, got {self.design_life_years!r}",
                             argument="--design-life")


@dataclass
class MonitoringResults:
    site: object
    readings: object                      # io.readings.Readings
    placements: list                      # io.readings.Placement, as built (or the design)
    design: list                          # io.readings.Placement, the design
    recorded: bool                        # whether a construction record was given
    settings: Settings
    now_day: float
    instruments: pd.DataFrame             # one row per settlement instrument
    site_fit: FactorFit | None
    fits: dict = field(default_factory=dict)          # id → FactorFit
    asaoka: dict = field(default_factory=dict)        # id → AsaokaFit
    hyperbolic: dict = field(default_factory=dict)    # id → HyperbolicFit
    readings_fit: pd.DataFrame | None = None          # each reading with the model's values
    curves: dict = field(default_factory=dict)        # id → (days, design, as built, revised)
    piezometers: pd.DataFrame | None = None
    piezometer_curves: dict = field(default_factory=dict)
    structures: pd.DataFrame | None = None
    cautions: list = field(default_factory=list)


def analyse(site, readings, placements=None, settings: Settings | None = None) -> MonitoringResults:
    """Every number of the monitoring folder, in SI (m, kPa, days after day 0).

    Parameters
    ----------
    site : Site
        The design site model (site.build.load_site).
    readings : io.readings.Readings
    placements : list of Placement, optional
        The construction record; default the design stages on their stage days.
    settings : Settings, optional
    """
    settings = settings or Settings()
    design = design_placements(site)
    recorded = placements is not None
    built = list(placements) if recorded else design
    table = readings.table
    settling = table[table["kind"].isin(SETTLING)]
    if settling.empty:
        raise InputError("has no settlement plate, marker or extensometer readings to compare",
                         file=readings.path)
    res = MonitoringResults(site, readings, built, design, recorded, settings,
                            float(table["day"].max()), pd.DataFrame(), None)
    _settlement_instruments(res, settling)
    _piezometers(res, table[table["kind"] == "piezometer"])
    _structures(res)
    res.cautions = _cautions(res)
    return res


# --- settlement instruments -------------------------------------------------------------
def _settlement_instruments(res: MonitoringResults, settling: pd.DataFrame) -> None:
    site, st = res.site, res.settings
    ids = list(dict.fromkeys(settling["instrument"]))
    first = settling.groupby("instrument", sort=False).first().loc[ids]
    xy = first[["x", "y"]].to_numpy(float)
    depth = np.where(first["kind"] == "plate", 0.0, first["depth"].to_numpy(float))
    as_built = point_model(site, xy, depth, res.placements)
    as_designed = as_built if not res.recorded else point_model(site, xy, depth, res.design)
    rows = settling["instrument"].map({k: i for i, k in enumerate(ids)}).to_numpy()
    baseline = first["day"].to_numpy(float)
    base_value = first["settlement"].to_numpy(float)
    later = settling["day"].to_numpy() > baseline[rows]
    measured = settling["settlement"].to_numpy() - base_value[rows]
    r, d, m = rows[later], settling["day"].to_numpy()[later], measured[later]
    res.site_fit = fit_factors(as_built, r, d, m, baseline) if r.size >= 3 else None
    fc_site = res.site_fit.f_c if res.site_fit else 1.0
    fcv_site = res.site_fit.f_cv if res.site_fit else 1.0
    last_load = max(p.day for p in res.placements)
    records = []
    curve_days = _curve_days(res.now_day, last_load)
    for i, name in enumerate(ids):
        mine = r == i
        one = as_built.select([i])
        fit = fit_factors(one, np.zeros(mine.sum(), int), d[mine], m[mine], baseline[[i]]) \
            if mine.sum() >= 3 else None
        if fit is not None:
            res.fits[name] = fit
        fc, fcv = (fit.f_c, fit.f_cv) if fit and fit.identifiable else (fc_site, fcv_site)
        days_i = np.r_[baseline[i], d[mine]]
        s_i = np.r_[0.0, m[mine]]
        main = _main_layer(one)
        _back_analysis(res, name, days_i, s_i, last_load, as_built.drainage_path[main])
        offset = lambda model, a, b: model.settlement([baseline[i]], a, b)[0, 0]  # noqa: E731
        last = d[mine][-1] if mine.any() else baseline[i]
        meas_last = m[mine][-1] if mine.any() else 0.0
        pred_last = relative_settlement(one, np.zeros(1, int), [last], baseline[[i]], 1, 1)[0]
        final_rev = float(one.final(fc)[0])
        records.append({
            "instrument": name, "kind": first.loc[name, "kind"], "x": xy[i, 0], "y": xy[i, 1],
            "depth": depth[i], "readings": int(mine.sum()) + 1, "baseline_day": baseline[i],
            "last_day": last, "measured_last": meas_last, "predicted_last": pred_last,
            "measured_over_predicted": meas_last / pred_last if pred_last > 0 else math.nan,
            "asaoka_ultimate": _attr(res.asaoka.get(name), "ultimate"),
            "asaoka_cv": _attr(res.asaoka.get(name), "cv_m2_per_yr"),
            "hyperbolic_ultimate": _attr(res.hyperbolic.get(name), "ultimate"),
            "predicted_ultimate": float(one.final()[0]) - offset(one, 1, 1),
            "revised_ultimate": final_rev - offset(one, fc, fcv),
            "f_c": _attr(fit, "f_c"), "f_c_low": _ci(fit, "f_c_ci", 0),
            "f_c_high": _ci(fit, "f_c_ci", 1), "f_cv": _attr(fit, "f_cv"),
            "f_cv_low": _ci(fit, "f_cv_ci", 0), "f_cv_high": _ci(fit, "f_cv_ci", 1),
            "fit_rms": _attr(fit, "rms"),
            "final_design": float(as_designed.select([i]).final()[0]),
            "final_revised": final_rev,
            "degree_now": float(one.settlement([res.now_day], fc, fcv)[0, 0]) / final_rev
            if final_rev > 0 else math.nan,
            "day_target_degree": _day_degree(one, st.target_degree, fc, fcv, last_load),
            "day_residual_limit": _day_residual(one, st, fc, fcv, last_load)})
        res.curves[name] = (curve_days,
                            as_designed.select([i]).settlement(curve_days)[0],
                            one.settlement(curve_days)[0],
                            one.settlement(curve_days, fc, fcv)[0], baseline[i])
    res.instruments = pd.DataFrame.from_records(records)
    rows_all = settling["instrument"].map({k: i for i, k in enumerate(ids)}).to_numpy()
    days_all = settling["day"].to_numpy(float)
    res.readings_fit = pd.DataFrame({
        "instrument": settling["instrument"].to_numpy(), "day": days_all,
        "measured": measured,
        "predicted": relative_settlement(as_built, rows_all, days_all, baseline, 1, 1),
        "revised_site": relative_settlement(as_built, rows_all, days_all, baseline,
                                            fc_site, fcv_site)})


def _curve_days(now: float, last_load: float) -> np.ndarray:
    end = max(now, last_load) * 1.5 + 3 * DAYS_PER_YEAR
    return np.unique(np.r_[np.linspace(0.0, end, 600), now])


def _main_layer(model) -> int:
    """The consolidating layer with the largest settlement below this instrument."""
    share = np.where(model.scaled, model.base.sum(axis=(0, 1)), -np.inf)
    return int(np.argmax(share))


def _back_analysis(res, name, days, s, last_load, drainage_path) -> None:
    after = days >= last_load
    if after.sum() < MIN_AFTER_LOADING:
        return
    try:
        res.asaoka[name] = asaoka(days[after], s[after], step=_asaoka_step(days[after]),
                                  drainage_path_m=drainage_path)
    except InputError:
        pass
    try:
        res.hyperbolic[name] = hyperbolic(days[after], s[after])
    except InputError:
        pass


def _asaoka_step(days) -> float:
    """The median reading interval, but no fewer than 6 and no more than 40 steps."""
    span = float(days[-1] - days[0])
    return float(np.clip(np.median(np.diff(days)), span / 40.0, span / 6.0))


def _attr(obj, name):
    value = getattr(obj, name, None) if obj is not None else None
    return math.nan if value is None else float(value)


def _ci(fit, name, k):
    """An interval end; NaN when there is no fit or the readings cannot bound it."""
    value = math.nan if fit is None else float(getattr(fit, name)[k])
    return value if math.isfinite(value) else math.nan


def _first_day(fn, start: float, horizon_days: float = 200 * DAYS_PER_YEAR) -> float:
    """First day >= `start` where ``fn(day) <= 0`` (fn decreasing), NaN if beyond horizon."""
    if fn(start) <= 0:
        return start
    grid = start + np.geomspace(1.0, horizon_days, 200)
    values = np.array([fn(t) for t in grid])
    k = int(np.argmax(values <= 0))
    if values[k] > 0:
        return math.nan
    lo = start if k == 0 else grid[k - 1]
    return float(brentq(fn, lo, grid[k], xtol=0.01))


def _day_degree(model, target, fc, fcv, last_load) -> float:
    final = float(model.final(fc)[0])
    if final <= 0:
        return math.nan
    return _first_day(lambda t: target * final - model.settlement([t], fc, fcv)[0, 0], last_load)


def _day_residual(model, st: Settings, fc, fcv, last_load) -> float:
    if st.residual_limit_m is None:
        return math.nan
    life = st.design_life_years * DAYS_PER_YEAR

    def excess(t):
        s = model.settlement([t, t + life], fc, fcv)[0]
        return (s[1] - s[0]) - st.residual_limit_m
    return _first_day(excess, last_load)


# --- piezometers ------------------------------------------------------------------------
def _piezometers(res: MonitoringResults, piezo: pd.DataFrame) -> None:
    if piezo.empty:
        return
    site, soil = res.site, res.site.soil
    first_load = min(p.day for p in res.placements)
    ids = list(dict.fromkeys(piezo["instrument"]))
    first = piezo.groupby("instrument", sort=False).first().loc[ids]
    xyz = first[["x", "y", "depth"]].to_numpy(float)
    built = piezometer_model(site, xyz, res.placements)
    fcv = res.site_fit.f_cv if res.site_fit else 1.0
    frames = []
    for i, name in enumerate(ids):
        g = piezo[piezo["instrument"] == name]
        # the reading before any fill is the instrument's own hydrostatic datum; without
        # one, the site's water table gives it
        before = g[g["day"] <= first_load]
        datum = float(before["pore_pressure"].iloc[-1]) if len(before) else \
            float(soil.u0(np.array([xyz[i, 2]]))[0])
        days = g["day"].to_numpy(float)
        frames.append(pd.DataFrame({
            "instrument": name, "day": days, "depth": xyz[i, 2],
            "pore_pressure": g["pore_pressure"].to_numpy(float),
            "hydrostatic": datum, "measured_excess": g["pore_pressure"].to_numpy(float) - datum,
            "predicted_excess": built.excess(days)[i],
            "revised_excess": built.excess(days, fcv)[i],
            "datum": "reading before fill" if len(before) else "site water table"}))
        curve_days = _curve_days(res.now_day, max(p.day for p in res.placements))
        res.piezometer_curves[name] = (curve_days, built.excess(curve_days)[i],
                                       built.excess(curve_days, fcv)[i])
    res.piezometers = pd.concat(frames, ignore_index=True)


# --- buildings and pipes ---------------------------------------------------------------
def _structures(res: MonitoringResults) -> None:
    from ..structures import building_settlement, pipe_settlement
    pts = res.site.points
    keep = pts[pts["receptor_kind"].isin(["building", "pipe"]) & (pts["role"] != "profile")]
    if keep.empty:
        return
    model = point_model(res.site, keep[["x", "y"]].to_numpy(float),
                        keep["depth"].to_numpy(float), res.placements)
    fc = res.site_fit.f_c if res.site_fit else 1.0
    fcv = res.site_fit.f_cv if res.site_fit else 1.0
    now = {"design": model.settlement([res.now_day])[:, 0],
           "revised": model.settlement([res.now_day], fc, fcv)[:, 0]}
    final = {"design": model.final(), "revised": model.final(fc)}
    rows = []
    for rid, g in keep.assign(_row=np.arange(len(keep))).groupby("receptor_id", sort=False):
        idx = g["_row"].to_numpy()
        kind = g["receptor_kind"].iloc[0]
        row = {"receptor_id": rid, "kind": kind}
        for name in ("design", "revised"):
            s = final[name][idx]
            row[f"final_max_{name}"] = float(s.max())
            row[f"now_max_{name}"] = float(now[name][idx].max())
            if kind == "building" and len(idx) >= 2:
                b = building_settlement(rid, g[["x", "y"]].to_numpy(), s,
                                        point_ids=g["point_id"].tolist())
                row[f"distortion_{name}"] = float(b.angular_distortion)
            elif kind == "pipe" and len(idx) >= 2:
                spec = next(p for p in res.site.receptors.pipes if p.id == rid)
                p = pipe_settlement(rid, g["chainage"].to_numpy(), s, np.zeros(len(idx)),
                                    spec.differential_length)
                row[f"differential_{name}"] = float(p.differential_max_m)
        rows.append(row)
    res.structures = pd.DataFrame.from_records(rows)


# --- cautions -----------------------------------------------------------------------------
def _cautions(res: MonitoringResults) -> list[str]:
    out = []
    if not res.recorded:
        out.append("No construction record was given: the fill is taken as placed exactly as "
                   "designed, whole stages on their stage days. A fill placed later, thicker "
                   "or in parts changes the prediction the readings are compared with.")
    else:
        placed = {}
        for p in res.placements:
            placed[p.stage] = placed.get(p.stage, 0.0) + p.fraction
        for k, total in placed.items():
            if abs(total - 1.0) > 1e-6:
                out.append(f"Stage {k}: the construction record places {total:.0%} of the "
                           "design fill; the prediction uses that fraction of its load.")
        for k in {p.stage for p in res.design} - set(placed):
            out.append(f"Stage {k} is not in the construction record: not placed yet.")
    if res.site_fit is not None and not res.site_fit.identifiable:
        out.append("Site fit: the readings cannot separate compressibility from cv (early in "
                   "consolidation settlement grows as f_c·√f_cv); the revised forecast is not "
                   "determined by them. Wait for readings past U ≈ 30–50 % or fix one factor "
                   "from laboratory or field tests.")
    last_load = max(p.day for p in res.placements)
    for row in res.instruments.itertuples():
        if row.baseline_day > min(p.day for p in res.placements):
            out.append(f"{row.instrument}: first reading on day {row.baseline_day:g}, after "
                       "filling began; settlement before it is not in the readings (the "
                       "model is compared from the same day).")
        if row.instrument not in res.asaoka:
            out.append(f"{row.instrument}: fewer than {MIN_AFTER_LOADING} usable readings "
                       f"after the last placement (day {last_load:g}), or no convergence: no "
                       "Asaoka or hyperbolic estimate.")
        fit = res.fits.get(row.instrument)
        if fit is not None and not fit.identifiable:
            out.append(f"{row.instrument}: the readings cannot separate compressibility from "
                       "cv (early readings settle as f_c·√f_cv); the site fit is used.")
        elif fit is not None and (fit.f_cv_ci[1] - fit.f_cv_ci[0]) > fit.f_cv:
            out.append(f"{row.instrument}: the cv factor is poorly determined (95 % interval "
                       f"{fit.f_cv_ci[0]:.2g} … {fit.f_cv_ci[1]:.2g}); more readings after "
                       "the end of loading narrow it.")
    if res.site_fit is not None and res.site_fit.rms > 0:
        worst = res.readings_fit.assign(err=lambda f: (f["measured"] - f["revised_site"]).abs())
        big = worst[worst["err"] > 4 * res.site_fit.rms]
        if len(big):
            out.append(f"{len(big)} reading(s) lie more than 4 × the fit's RMS "
                       f"({res.site_fit.rms * 1000:.1f} mm) from the site fit (first: "
                       f"{big['instrument'].iloc[0]} on day {big['day'].iloc[0]:g}); check "
                       "them for misreadings, damaged plates or a changed datum.")
    ins = res.instruments
    gap = (ins["asaoka_ultimate"] / ins["revised_ultimate"].where(ins["revised_ultimate"] > 0)
           - 1.0)
    apart = ins[gap.abs() > 0.1]
    if len(apart):
        listed = ", ".join(f"{r.instrument} {g:+.0%}" for r, g in
                           zip(apart.itertuples(), gap[apart.index]))
        out.append(f"Asaoka's ultimate settlement differs from the fitted model's by more than "
                   f"10 % at {listed}. Asaoka's first-order line is reliable where the first "
                   "term of Terzaghi's series dominates, above about U = 60 %; readings that "
                   "start lower (here from the last placement) make it low.")
    out.append("The fit scales the design's compressibility and cv uniformly in every "
               "consolidating layer; it cannot tell which layer differs. Settlement is "
               "primary consolidation only (no secondary compression, no lateral "
               "spreading), each placement instant on its day.")
    return out
