"""The monitoring results folder: tables, pictures, report and manifest.

Written inside an `io.atomic.ResultsWriter` (a hidden sibling renamed into place when
complete), with a manifest that checksums every file, like a run's folder.
"""
from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd

from ..io import manifest
from ..io.atomic import write_atomic
from ..io.tables import plan_unit, write_table_csv
from .wording import ASSUMPTIONS, CAUTIONS, slug

QUANTITIES = {
    **dict.fromkeys(["measured_last", "predicted_last", "asaoka_ultimate",
                     "hyperbolic_ultimate", "predicted_ultimate", "revised_ultimate", "final_design",
                     "final_revised", "fit_rms", "measured", "predicted", "revised_site",
                     "design", "as_built", "revised", "previous", "current", "residual",
                     "final_max_design", "final_max_revised", "now_max_design",
                     "now_max_revised", "differential_design", "differential_revised"],
                   "settlement"),
    **dict.fromkeys(["pore_pressure", "hydrostatic", "measured_excess", "predicted_excess",
                     "revised_excess"], "pressure"),
    **dict.fromkeys(["day", "baseline_day", "last_day", "readings", "measured_over_predicted",
                     "asaoka_cv_m2_per_yr", "f_c", "f_c_low", "f_c_high", "f_cv", "f_cv_low",
                     "f_cv_high", "degree_now", "day_target_degree", "day_residual_limit",
                     "distortion_design", "distortion_revised"], None),
}


def write_monitoring(res, folder, *, report: bool = True, inputs=(), day0=None) -> None:
    """Write every file of the monitoring folder `folder` (a ResultsWriter being built)."""
    site = res.site
    u = site.units

    def table(name, frame):
        if frame is not None and len(frame):
            write_table_csv(folder.path(name), frame, u, QUANTITIES,
                            crs=site.crs)

    table("instruments.csv", res.instruments.rename(columns={"asaoka_cv": "asaoka_cv_m2_per_yr"}))
    table("readings_fit.csv", res.readings_fit)
    table("piezometers.csv", res.piezometers)
    table("structures.csv", res.structures)
    table("curves.csv", _curves(res))
    table("asaoka.csv", _asaoka_points(res))
    summary = _summary(res, day0)
    text = json.dumps(summary, indent=2, ensure_ascii=False, default=_json, allow_nan=False) + "\n"
    write_atomic(folder.path("monitoring.json"), lambda p: p.write_text(text, encoding="utf-8"))
    pictures = _pictures(res)
    for name, png in pictures.items():
        write_atomic(folder.path(f"figures/{name}"), lambda p, b=png: p.write_bytes(b))
    if report:
        from .report import monitoring_page
        html = monitoring_page(res, summary, pictures)
        write_atomic(folder.path("report.html"), lambda p: p.write_text(html, encoding="utf-8"))
    manifest.write_manifest(folder, settings=summary["settings"], units=u,
                            inputs=[*site.input_files, *inputs], site_file=site.path,
                            crs=site.crs, grid=site.spec, assumptions=ASSUMPTIONS,
                            cautions=[CAUTIONS, *res.cautions])


def _curves(res) -> pd.DataFrame:
    frames = []
    for name, (days, design, built, revised, base) in res.curves.items():
        zero = [np.interp(base, days, c) for c in (design, built, revised)]
        keep = days >= base
        frames.append(pd.DataFrame({"instrument": name, "day": days[keep],
                                    "design": design[keep] - zero[0],
                                    "as_built": built[keep] - zero[1],
                                    "revised": revised[keep] - zero[2]}))
    return pd.concat(frames, ignore_index=True) if frames else None


def _asaoka_points(res) -> pd.DataFrame:
    frames = [pd.DataFrame({"instrument": name, "previous": f.previous, "current": f.current,
                            "residual": f.residuals}) for name, f in res.asaoka.items()]
    return pd.concat(frames, ignore_index=True) if frames else None


def _fit_json(fit) -> dict | None:
    if fit is None:
        return None
    def finite(pair):
        return [float(v) if math.isfinite(v) else None for v in pair]
    return {"f_c": fit.f_c, "f_c_95": finite(fit.f_c_ci), "f_cv": fit.f_cv,
            "f_cv_95": finite(fit.f_cv_ci), "rms_m": fit.rms, "readings": fit.n,
            "identifiable": fit.identifiable}


def _summary(res, day0) -> dict:
    st = res.settings
    return {
        "site": res.site.name, "day0": None if day0 is None else str(day0),
        "now_day": res.now_day,
        "settings": {"target_degree": st.target_degree,
                     "residual_limit_m": st.residual_limit_m,
                     "design_life_years": st.design_life_years,
                     "construction_record": res.recorded,
                     "readings_file": str(res.readings.path)},
        "placements_as_built": [vars(p) for p in res.placements],
        "placements_design": [vars(p) for p in res.design],
        "site_fit": _fit_json(res.site_fit),
        "instrument_fits": {k: _fit_json(f) for k, f in res.fits.items()},
        "assumptions": ASSUMPTIONS, "cautions": [CAUTIONS, *res.cautions]}


def _json(v):
    if isinstance(v, (np.floating, float)):
        return None if not math.isfinite(v) else float(v)
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, np.bool_):
        return bool(v)
    return str(v)


def _pictures(res) -> dict:
    from ..report import monitoring as fig
    site = res.site
    scale = 1.0 / site.units.settlement_to_m
    unit = site.units.settlement
    plan_label, plan_m = plan_unit(site.crs, site.units)
    out = {}
    stage_days = sorted({p.day for p in res.placements})
    fitted = res.readings_fit
    for name, (days, design, built, revised, base) in res.curves.items():
        g = fitted[fitted["instrument"] == name]
        out[f"instrument_{slug(name)}.png"] = fig.instrument_figure(
            name, days, design, built, revised, (g["day"], g["measured"]), unit=unit,
            scale=scale, stage_days=stage_days, baseline_day=base)
    for name, a in res.asaoka.items():
        out[f"asaoka_{slug(name)}.png"] = fig.asaoka_figure(name, a, unit=unit, scale=scale)
    ins = res.instruments
    plates = ins[ins["kind"] == "plate"]
    if len(plates):
        gx, gy = np.meshgrid(site.spec.x_centres, site.spec.y_centres)
        outline = (gx / plan_m, gy / plan_m, np.abs(site.fill_thickness()))
        out["plates_map.png"] = fig.ratio_map(plates["x"] / plan_m, plates["y"] / plan_m,
                                              plates["measured_over_predicted"],
                                              plates["instrument"], plan_unit=plan_label,
                                              outline=outline)
    if res.piezometers is not None:
        pscale = 1.0 / site.units.pressure_to_kpa
        for name, (days, predicted, revised) in res.piezometer_curves.items():
            g = res.piezometers[res.piezometers["instrument"] == name]
            out[f"piezometer_{slug(name)}.png"] = fig.piezometer_figure(
                name, days, predicted, revised, (g["day"], g["measured_excess"]),
                unit=site.units.pressure, scale=pscale)
    return out
