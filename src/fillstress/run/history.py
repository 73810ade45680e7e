"""The settlement calculation record of a run: per-borehole sublayer tables, load states,
t50/t90/t95, secondary compression, settlement–time curves, the earliest surcharge removal
day and the drain spacing for a target degree of consolidation (SI tables in
``res.record``; the writers convert units)."""
from __future__ import annotations

import numpy as np
import pandas as pd

from .. import settlement as st
from ..drains import spacing_for_degree
from ..errors import InputError
from . import timeline as tl

FRACTIONS = {"t50_days": 0.5, "t90_days": 0.9, "t95_days": 0.95}
_HORIZON_YR = 200.0


def settlement_record(res, targets: pd.DataFrame, states, points: dict) -> None:
    """Fill ``res.time_curves`` and ``res.record`` from the points' stress paths.

    `points` maps a row of `targets` to (z, h, Δσz per body (B, K), its StressPath)."""
    site, soil = res.site, res.site.soil
    life = site.settings.design_life_years
    timed = any(L.compressible and L.cv_m2_per_yr for L in soil.layers)
    if not timed:
        res.warnings.append("no compressible layer has cv: no settlement–time curves")
    start = np.array([s.day for s in states]) / tl.DAYS_PER_YEAR
    build = np.array([s.duration_days for s in states]) / tl.DAYS_PER_YEAR
    active = np.array([s.active for s in states], dtype=float)
    loading = np.array([s.loads for s in states])
    placed = _placed_without_removal(site, states)
    surcharge = tl.removable(site)
    years = np.unique(np.r_[0.0, np.geomspace(1 / tl.DAYS_PER_YEAR, max(50.0, start.max() + life), 160),
                            start, start + build])
    rows = {"sublayers": [], "consolidation_times": [], "preload": []}
    wanted = targets["role"].isin(["centroid", "borehole"]).to_numpy()
    for row, (z, h, per_body, path) in points.items():
        if not wanted[row]:
            continue
        t = targets.iloc[row]
        rid = t["receptor_id"]
        layers = [soil.layers[i] for i in soil.layer_index(z)]
        cv, hdr = tl.sublayer_time_parameters(soil, z)
        radial = tl.drain_rates(site, float(t["x"]), float(t["y"]), z, layers)
        peak = st.stress_path(soil, z, h, (placed @ per_body)[None])        # no removals
        hist = tl.PointHistory(_increments(path), start, build, cv, hdr, radial)
        hist_peak = tl.PointHistory(_increments(peak)[loading], start[loading], build[loading],
                                    cv, hdr, radial)
        tp = hist.end_of_primary(layers) if timed else np.full(z.size, 1.0)
        sec = tl.secondary(soil, z, h, path, tp, life)
        final = float(path.settlement[0, -1].sum())
        times = {"receptor_id": rid, "settlement_final": final,
                 "settlement_secondary": float(sec.sum()),
                 "settlement_design_life": final + float(sec.sum())}
        if timed:
            res.time_curves[rid] = (years * tl.DAYS_PER_YEAR, hist.curve(years))
            peak_final = float(peak.settlement[0, -1].sum())
            reached = st.times_to_fractions(hist_peak.curve, FRACTIONS.values(), peak_final,
                                            _HORIZON_YR)
            times |= {name: _day(t) for name, t in zip(FRACTIONS, reached)}
        rows["consolidation_times"].append(times)
        if surcharge.any() and timed:
            rows["preload"].append(_preload_row(res, rid, z, h, per_body, surcharge,
                                                placed[-1], hist, hist_peak, peak, tp, life))
        if t["role"] == "borehole":
            rows["sublayers"] += _sublayer_rows(rid, soil, z, h, per_body, active, path, sec,
                                                radial, states)
    res.record = {name: pd.DataFrame(r) for name, r in rows.items() if r}
    res.record["soil_profile"] = _soil_rows(soil)
    res.record["load_states"] = _state_rows(site, states, targets, points)
    if site.drains:
        res.record["drains"] = _drain_rows(site)
    design = _drain_design(res, states)
    if design:
        res.record["drain_design"] = pd.DataFrame(design)


def _increments(path: st.StressPath) -> np.ndarray:
    """Settlement increment of each load state and sublayer, (S, K), of one point."""
    return np.diff(path.settlement[0], axis=0, prepend=0.0)


def _placed_without_removal(site, states) -> np.ndarray:
    """Bodies in place after each state if nothing were removed, (S, B)."""
    reached, out = -np.inf, []
    for s in states:
        if s.stage is not None:
            reached = max(reached, s.stage)
        out.append([b.stage <= reached for b in site.bodies])
    return np.array(out, dtype=float)


def _day(years: float) -> float:
    return years * tl.DAYS_PER_YEAR


def _preload_row(res, rid, z, h, per_body, surcharge, placed, hist, hist_peak, peak,
                 tp, life) -> dict:
    """Earliest removal day: the permanent+surcharge curve reaches the final settlement under
    the permanent load alone (plus its secondary compression over the design life when
    asked)."""
    soil = res.site.soil
    permanent = st.stress_path(soil, z, h, ((placed * ~surcharge) @ per_body)[None])
    target = float(permanent.settlement[0, -1].sum())
    if res.site.settings.removal_includes_secondary:
        target += float(tl.secondary(soil, z, h, permanent, tp, life).sum())
    earliest = _day(st.time_to_fraction(hist_peak.curve, 1.0, target, _HORIZON_YR))
    given = min(res.site.removal_days[b.name] for b, s in zip(res.site.bodies, surcharge) if s)
    at_removal = float(hist_peak.curve(np.array([given / tl.DAYS_PER_YEAR]))[0])
    return {"receptor_id": rid, "removal_day": given, "earliest_removal_day": earliest,
            "settlement_target": target, "settlement_at_removal": at_removal,
            "settlement_peak_final": float(peak.settlement[0, -1].sum()),
            "settlement_final": float(hist.increments.sum()),
            "removal_before_earliest": bool(not given >= earliest)}


def _sublayer_rows(rid, soil, z, h, per_body, active, path, sec, radial, states) -> list[dict]:
    dsz = active @ per_body                                                 # (S, K)
    branch = path.branch()[0]
    rows = []
    for k in range(z.size):
        layer = soil.layers[int(soil.layer_index(z[k])[0])]
        row = {"receptor_id": rid, "layer": layer.name, "depth_top": z[k] - h[k] / 2,
               "depth_bottom": z[k] + h[k] / 2, "sigma_v0": path.s0[k],
               "sigma_p": path.sp[k] if path.is_index[k] else np.nan}
        row.update({f"dsz_state{e + 1}": dsz[e, k] for e in range(len(states))})
        row.update({"sigma_final": path.sigma[0, -1, k], "sigma_max": path.sigma_max[0, -1, k],
                    "strain": path.strain[0, -1, k], "settlement": path.settlement[0, -1, k],
                    "branch": branch[k], "settlement_secondary": sec[k],
                    "drains": bool(radial[k] > 0)})
        rows.append(row)
    return rows


def _soil_rows(soil) -> pd.DataFrame:
    """Every parameter of every layer as used, with the water table and the rigid base."""
    rows = []
    for L in soil.layers:
        rows.append({"layer": L.name, "depth_top": L.top_m, "depth_bottom": L.bottom_m,
                     "model": L.kind, "unit_weight": L.unit_weight,
                     "saturated_unit_weight": L.saturated_unit_weight,
                     "cc": L.cc, "cr": L.cr, "e0": L.e0, "sigma_p": L.sigma_p_kpa, "ocr": L.ocr,
                     "mv": L.mv_per_kpa, "modulus": L.modulus_kpa,
                     "unloading_modulus": L.unloading_modulus_kpa,
                     "cv": L.cv_m2_per_yr, "ch": L.ch, "drainage": L.drainage,
                     "c_alpha": L.c_alpha, "c_alpha_eps": L.c_alpha_eps,
                     "c_alpha_ratio_surcharged": L.c_alpha_ratio_surcharged,
                     "end_of_primary_days": (None if L.end_of_primary_yr is None
                                             else L.end_of_primary_yr * tl.DAYS_PER_YEAR),
                     "depth_water_table": soil.water_table_m, "depth_rigid_base": soil.rigid_base_m})
    frame = pd.DataFrame(rows)
    text = ["layer", "model", "drainage"]
    # a parameter no layer has is an empty number column, so it keeps its unit suffix
    return frame[text].join(frame.drop(columns=text).apply(pd.to_numeric, errors="coerce"))[
        frame.columns]


def _drain_rows(site) -> pd.DataFrame:
    return pd.DataFrame([{"zone": zone, "pattern": d.pattern, "spacing": d.spacing_m,
                          "depth_of_drains": d.depth_m, "dw": d.dw, "de": d.de,
                          "n": d.n, "smear_ratio": d.smear_ratio, "k_ratio": d.k_ratio,
                          "kh_over_qw_per_m2": d.kh_over_qw, "mu": d.mu}
                         for zone, _, d in site.drains])


def _state_rows(site, states, targets, points) -> pd.DataFrame:
    names = [b.name for b in site.bodies]
    rows = []
    holes = {row: v for row, v in points.items() if targets.iloc[row]["role"] == "borehole"}
    for e, s in enumerate(states):
        base = {"state": e + 1, "event": s.event, "day": s.day, "duration_days": s.duration_days,
                "bodies_in_place": " + ".join(n for n, on in zip(names, s.active) if on) or "none"}
        if not holes:
            rows.append(base)
        for row, (_, _, per_body, path) in holes.items():
            dsz = np.asarray(s.active, dtype=float) @ per_body
            rows.append({**base, "receptor_id": targets.iloc[row]["receptor_id"],
                         "dsz_max": float(dsz.max()),
                         "settlement": float(path.settlement[0, e].sum())})
    return pd.DataFrame(rows)


def _drain_design(res, states) -> list[dict]:
    """Spacing that reaches [settlement] target_degree by target_day in each drain zone and
    drained layer (instant load at the first state; Carrillo with the layer's own Uv)."""
    target, day = res.site.settings.target_degree, res.site.settings.target_day
    if target is None or day is None or not res.site.drains:
        return []
    years = (day - states[0].day) / tl.DAYS_PER_YEAR
    soil = res.site.soil
    cv, hdr = st.time_parameters(soil, no_cv="immediate")
    rows = []
    for zone, _, drains in res.site.drains:
        for i, layer in enumerate(soil.layers):
            if not layer.compressible or not layer.ch or layer.top_m >= drains.depth_m:
                continue
            uv = 1.0 if np.isinf(cv[i]) else float(st.degree_of_consolidation(cv[i] * years / hdr[i] ** 2))
            row = {"zone": zone, "layer": layer.name, "target_degree": target, "target_day": day,
                   "vertical_degree": uv, "spacing_given": drains.spacing_m}
            try:
                row["spacing_required"] = spacing_for_degree(drains, layer.ch, target, years, uv)
                row["note"] = ""
            except InputError as err:
                row["spacing_required"] = np.nan
                row["note"] = err.reason
            rows.append(row)
    return rows
