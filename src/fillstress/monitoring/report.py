"""The monitoring report page (HTML): what the readings say, the fits and the forecast."""
from __future__ import annotations

import math

from ..report import monitoring as page_parts
from ..report.html import simple_page
from ..report.tables import html_table, plain
from .wording import ASSUMPTIONS, CAUTIONS, slug


def _mm(res, v) -> str:
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return ""
    return f"{v / res.site.units.settlement_to_m:.0f}"


def _day(v) -> str:
    return "" if v is None or (isinstance(v, float) and math.isnan(v)) else f"{v:.0f}"


def _interval(mid, low, high) -> str:
    if isinstance(mid, float) and math.isnan(mid):
        return ""
    if not all(math.isfinite(v) for v in (low, high)):
        return f"{mid:.2f} (interval not determined)"
    return f"{mid:.2f} ({low:.2f} … {high:.2f})"


def monitoring_page(res, summary: dict, pictures: dict) -> str:
    """The report as one HTML string; `pictures` maps figure file names to PNG bytes."""
    u = res.site.units.settlement
    fit = res.site_fit
    head = [("site", res.site.name), ("day 0", summary.get("day0") or "as in the readings"),
            ("last reading", f"day {res.now_day:.0f}"),
            ("construction record", "given" if res.recorded else "not given: design assumed"),
            ("instruments", f"{len(res.instruments)} settlement, "
                            f"{0 if res.piezometers is None else res.piezometers['instrument'].nunique()}"
                            " piezometer(s)")]
    if fit is not None:
        head += [("site fit: compressibility factor f_c (95 %)",
                  _interval(fit.f_c, *fit.f_c_ci)),
                 ("site fit: cv factor f_cv (95 %)", _interval(fit.f_cv, *fit.f_cv_ci)),
                 ("site fit: RMS of residuals", f"{_mm(res, fit.rms)} {u} over {fit.n} readings")]
    sections = [("Method", _method(res)), ("Readings against prediction", _comparison(res, pictures)),
                ("Back-analysis", _back(res, pictures)), ("Revised forecast", _forecast(res))]
    if res.piezometers is not None:
        sections.append(("Piezometers", _piezometers(res, pictures)))
    if res.structures is not None:
        sections.append(("Buildings and pipes", _structures(res)))
    sections.append(("Assumptions", page_parts.paragraph(ASSUMPTIONS)))
    return simple_page(f"Monitoring: {res.site.name}", head, sections,
                       [CAUTIONS, *res.cautions], by="fillstress monitor")


def _method(res) -> str:
    return "".join(page_parts.paragraph(t) for t in (
        "Settlement is shown from each instrument's first (baseline) reading. The design "
        "prediction places each stage whole on its design day; the prediction as built uses "
        "the construction record; the revised forecast rescales the consolidating layers' "
        "compressibility (f_c) and cv (f_cv) to fit the readings.",
        "Asaoka (1978): readings after the last placement, resampled to equal steps Δt, "
        "fitted by s_j = β0 + β1·s_j−1; ultimate settlement β0/(1 − β1); the implied cv is "
        "−4·H_dr²·ln β1/(π²·Δt) (first term of Terzaghi's series) for the main consolidating "
        "layer. Hyperbolic method of Tan (1971): (t − t0)/(s − s0) = α + β·(t − t0), "
        "ultimate s0 + 1/β. Both estimate the ultimate settlement from the baseline and are "
        "low while the degree of consolidation is below about 60 %."))


def _comparison(res, pictures) -> str:
    rows = [[r.instrument, r.kind, _day(r.last_day), _mm(res, r.measured_last),
             _mm(res, r.predicted_last), plain(r.measured_over_predicted)]
            for r in res.instruments.itertuples()]
    out = html_table(["instrument", "kind", "last reading (day)", f"measured ({res.site.units.settlement})",
                      f"predicted as built ({res.site.units.settlement})", "measured ÷ predicted"], rows)
    if "plates_map.png" in pictures:
        out += page_parts.image(pictures["plates_map.png"],
                                "Settlement plates coloured by measured ÷ predicted at the last reading")
    for r in res.instruments.itertuples():
        key = f"instrument_{slug(r.instrument)}.png"
        if key in pictures:
            out += page_parts.image(pictures[key], f"{r.instrument}: readings, design "
                                    "prediction, prediction as built and revised forecast")
    return out


def _back(res, pictures) -> str:
    u = res.site.units.settlement
    rows = [[r.instrument, _mm(res, r.predicted_ultimate), _mm(res, r.revised_ultimate),
             _mm(res, r.asaoka_ultimate),
             plain(r.asaoka_cv), _mm(res, r.hyperbolic_ultimate),
             _interval(r.f_c, r.f_c_low, r.f_c_high), _interval(r.f_cv, r.f_cv_low, r.f_cv_high),
             _mm(res, r.fit_rms)] for r in res.instruments.itertuples()]
    out = html_table(["instrument", f"predicted ultimate ({u})", f"fitted model ultimate ({u})",
                      f"Asaoka ultimate ({u})",
                      "Asaoka cv (m²/year)", f"hyperbolic ultimate ({u})", "f_c (95 %)",
                      "f_cv (95 %)", f"fit RMS ({u})"], rows)
    for name in res.asaoka:
        out += page_parts.image(pictures[f"asaoka_{slug(name)}.png"],
                                f"{name}: Asaoka plot (residuals in asaoka.csv)")
    return out


def _forecast(res) -> str:
    st, u = res.settings, res.site.units.settlement
    rows = [[r.instrument, _mm(res, r.final_design), _mm(res, r.final_revised),
             plain(r.degree_now), _day(r.day_target_degree), _day(r.day_residual_limit)]
            for r in res.instruments.itertuples()]
    limit = ("" if st.residual_limit_m is None else
             f"residual ≤ {_mm(res, st.residual_limit_m)} {u} over {st.design_life_years:g} years (day)")
    heads = ["instrument", f"final, design ({u})", f"final, revised ({u})", "U now",
             f"U = {st.target_degree:.0%} (day)", limit or "residual limit (not set)"]
    note = page_parts.paragraph(
        "Final settlements are totals from day 0 under all placements; U now is the revised "
        "degree of consolidation at the last reading. The day U reaches the target is when "
        "a surcharge may come off; the residual-limit day is the first after which the "
        "settlement over the design life stays within the limit (primary consolidation "
        "only). A blank day lies beyond 200 years.")
    return note + html_table(heads, rows)


def _piezometers(res, pictures) -> str:
    p = res.piezometers
    last = p.groupby("instrument", sort=False).tail(1)
    scale = 1.0 / res.site.units.pressure_to_kpa
    unit = res.site.units.pressure
    rows = [[r.instrument, f"{r.depth:.1f}", _day(r.day), f"{r.measured_excess * scale:.1f}",
             f"{r.predicted_excess * scale:.1f}", f"{r.revised_excess * scale:.1f}", r.datum]
            for r in last.itertuples()]
    out = html_table(["piezometer", "depth (m)", "last reading (day)",
                      f"measured excess ({unit})", f"predicted ({unit})",
                      f"revised cv ({unit})", "hydrostatic datum"], rows)
    for name in res.piezometer_curves:
        out += page_parts.image(pictures[f"piezometer_{slug(name)}.png"],
                                f"{name}: excess pore pressure against the predicted dissipation")
    return out


def _structures(res) -> str:
    u = res.site.units.settlement
    cols = [c for c in res.structures.columns if c not in ("receptor_id", "kind")]
    rows = [[r["receptor_id"], r["kind"]] +
            [plain(r[c]) if c.startswith("distortion") else _mm(res, r[c]) for c in cols]
            for _, r in res.structures.iterrows()]
    heads = ["receptor", "kind"] + [c.replace("_", " ") + ("" if c.startswith("distortion")
                                                           else f" ({u})") for c in cols]
    return page_parts.paragraph("Settlement at the buildings and pipes with the site fit, "
                                "against the design.") + html_table(heads, rows)
