"""Readable table headings and unit text for the report.

Column names in a results folder carry their unit as a suffix (``dsz_max_psf``,
``volume_yd3``; docs/results-folder.md). The report shows them as words with the unit
in brackets (``max Δσz (psf)``, ``volume (yd³)``), so every header states its unit.
"""
from __future__ import annotations

from ..io.results import UnitLabels
from ..io.tables import unit_label
from ..units import unit_text

#: Quantities whose labels can end a column name (the writer's labels, io.tables).
_SUFFIXED_QUANTITIES = ("length", "area", "volume", "pressure", "unit_weight", "settlement",
                        "force", "compressibility", "consolidation")

#: Column bases (name without the unit suffix) and the words shown for them.
BASE_WORDS = {
    "receptor_id": "receptor", "receptor_kind": "kind", "point_id": "point",
    "n_points": "sample points", "dsz": "Δσz", "dsz_max": "max Δσz",
    "sigma_v0": "σ′v0 (initial effective)", "stress_ratio": "Δσz / σ′v0",
    "stress_ratio_max": "max Δσz / σ′v0", "x": "x, east", "y": "y, north",
    "depth_at_max": "depth of max Δσz", "chainage_at_max": "chainage of max Δσz",
    "settlement_max": "max settlement", "settlement_min": "min settlement",
    "differential_settlement": "differential settlement",
    "differential_length": "differential over length",
    "differential_from": "differential from chainage",
    "differential_to": "differential to chainage",
    "angular_distortion": "angular distortion", "distortion_between": "distortion between",
    "gradient_max": "max settlement gradient", "worst_limit_reached": "worst limit reached",
    "influence_depth": "influence depth", "fraction": "influence fraction of σ′v0",
    "unit_weight": "unit weight", "volume": "volume", "footprint_area": "footprint area",
    "max_height": "max height", "total_load": "total load", "top": "top depth",
    "bottom": "bottom depth", "cell": "cell size", "margin": "margin around the loads",
    "poisson": "Poisson's ratio", "convergence_check": "convergence check",
    "units": "unit system", "foundation_depth": "foundation depth",
    "sigma_p": "σ′p", "sigma_final": "σ′ final", "sigma_max": "largest past σ′",
    "cc": "Cc", "cr": "Cr", "e0": "e0", "ocr": "OCR", "c_alpha": "Cα",
    "c_alpha_eps": "Cα/(1+e0)", "c_alpha_ratio_surcharged": "Cα′/Cα after surcharge",
    "cv": "cv", "ch": "ch", "mu": "μ", "mv": "mv", "modulus": "modulus M",
    "unloading_modulus": "unloading modulus", "tilt": "tilt ω",
    "deflection_ratio": "deflection ratio Δ/L", "angular_change_max": "max angular change",
    "curvature_radius_min": "min radius of curvature",
}


def _unit_labels(units: UnitLabels) -> list[str]:
    labels = {unit_label(units.system, q) for q in _SUFFIXED_QUANTITIES}
    labels |= {units.plan, units.plan_suffix, "days"}
    return sorted(labels, key=len, reverse=True)       # longest first: "_mm" before "_m"


def split_unit(column: str, units: UnitLabels) -> tuple[str, str | None]:
    """(base, unit label) of a column name; unit None when it has no unit suffix.

    Examples
    --------
    >>> u = UnitLabels("m", "kPa", "kN/m3", "mm")
    >>> split_unit("settlement_max_mm", u), split_unit("stress_ratio_max", u)
    (('settlement_max', 'mm'), ('stress_ratio_max', None))
    """
    for label in _unit_labels(units):
        if column.endswith("_" + label) and len(column) > len(label) + 1:
            return column[: -len(label) - 1], label
    return column, None


def _base_words(base: str) -> str:
    if base in BASE_WORDS:
        return BASE_WORDS[base]
    if base.startswith("exceeds_"):
        return "exceeds " + base[len("exceeds_"):].replace("_", " ")
    if base.startswith("settlement_stage"):
        return "settlement after stage " + base[len("settlement_stage"):]
    if base.startswith("dsz_state"):
        return "Δσz, state " + base[len("dsz_state"):]
    return base.replace("_", " ")


def heading(column: str, units: UnitLabels) -> str:
    """Words and unit for a column name; plan coordinates get the CRS's unit.

    Examples
    --------
    >>> u = UnitLabels("ft", "psf", "pcf", "in", plan="ftUS")
    >>> heading("dsz_max_psf", u), heading("volume_yd3", u), heading("x_ft", u)
    ('max Δσz (psf)', 'volume (yd³)', 'x, east (US survey ft)')
    """
    base, label = split_unit(str(column), units)
    if base in ("x", "y") and label is not None:
        label = units.plan                          # x_ft in a survey-foot CRS holds ftUS
    words = _base_words(base)
    return f"{words} ({unit_text(label)})" if label else words
