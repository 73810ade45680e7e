"""The limits step of a run: the utilisation (value ÷ limit) of every limit in force at every
receptor, after the settlement steps, and the governing one (decide.limits).

Point quantities (Δσz and Δσz/σ'v0, the largest over a receptor's points: a building's
foundation points, a pipe's crown, a borehole's depths) apply to every receptor; the
settlement quantities to the building and pipe checks (structures.py). At buildings the
published limits (decide.limits.BUILDING_LIMITS) apply unless the site turns them off, each
replaced by a limit the site gives for the same quantity; a per-receptor override replaces
every general limit of its quantity at that receptor.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..decide.limits import Limit, LimitCheck, UtilisationRow, check_limits, limits_for

POINT_QUANTITIES = ("stress_increase", "stress_ratio")
# point-table column whose largest value over a receptor is each point quantity
POINT_COLUMNS = {"stress_increase": "dsz", "stress_ratio": "stress_ratio"}
# quantity → unit quantity of units.UnitSystem.unit (None: a ratio; "1/length": curvature)
OUTPUT_QUANTITY = {"stress_increase": "pressure", "stress_ratio": None, "settlement": "settlement",
                   "differential_settlement": "settlement", "angular_distortion": None,
                   "tilt": None, "pipe_curvature": "1/length"}


@dataclass(frozen=True)
class KindRow:
    """One utilisation row and the kind of its receptor (building, pipe, borehole)."""

    kind: str
    row: UtilisationRow


@dataclass(frozen=True)
class LimitResults:
    """Every (receptor, limit) row of a run, and the governing row (largest utilisation;
    None when no limit applied anywhere)."""

    rows: tuple[KindRow, ...]
    governing: KindRow | None

    def table(self, units) -> pd.DataFrame:
        """limits.csv: one row per receptor and limit, values in the site's units."""
        out = []
        for r in self.rows:
            label, factor = unit_of(r.row.limit.quantity, units)
            out.append({"receptor_kind": r.kind, "receptor_id": r.row.receptor_id,
                        "limit": r.row.limit.label, "quantity": r.row.limit.quantity,
                        "value": r.row.value / factor, "limit_value": r.row.limit.value / factor,
                        "unit": label, "utilisation": r.row.utilisation,
                        "source": r.row.limit.source, "governing": r is self.governing})
        return pd.DataFrame(out, columns=["receptor_kind", "receptor_id", "limit", "quantity",
                                          "value", "limit_value", "unit", "utilisation",
                                          "source", "governing"])

    def by_receptor(self, kind: str) -> pd.DataFrame:
        """Per receptor of `kind`: its largest utilisation and the limit that gives it."""
        best = {}
        for r in self.rows:
            rid = r.row.receptor_id
            if r.kind == kind and (rid not in best or r.row.utilisation > best[rid].utilisation):
                best[rid] = r.row
        return pd.DataFrame({"receptor_id": list(best),
                             "utilisation_max": [b.utilisation for b in best.values()],
                             "governing_limit": [b.limit.label for b in best.values()]})


def unit_of(quantity: str, units) -> tuple[str, float]:
    """(label, SI value of one unit) of a limit quantity in the site's unit system."""
    q = OUTPUT_QUANTITY[quantity]
    if q is None:
        return "1", 1.0
    if q == "1/length":
        label, factor = units.unit("length")
        return f"1/{label}", 1.0 / factor
    return units.unit(q)


# quantities each kind of receptor has (a differential over a stated length is a pipe's)
APPLIES = {"building": {"stress_increase", "stress_ratio", "settlement", "angular_distortion",
                        "tilt", "differential_settlement"},
           "pipe": {"stress_increase", "stress_ratio", "settlement", "differential_settlement",
                    "pipe_curvature"},
           "borehole": set(POINT_QUANTITIES)}


def applying(kind: str, limits) -> tuple[Limit, ...]:
    """The limits of `limits` a receptor of `kind` has a value for."""
    return tuple(lim for lim in limits if lim.quantity in APPLIES[kind]
                 and not (kind == "building" and lim.length_m is not None))


def general_limits(settings, kind: str) -> tuple[Limit, ...]:
    """The limits in force at every receptor of `kind` before overrides: the site's, and at
    buildings the published ones it does not replace."""
    own = applying(kind, settings.limits)
    if kind != "building":
        return own
    return limits_for("", settings.building_limits, {"": own})


def limit_results(res) -> LimitResults:
    """Utilisation of every limit in force at every receptor of a run (`res`: RunResults
    after the settlement steps)."""
    return check_receptors(res.site.settings, _point_maxima(res.points), res.buildings,
                           res.pipes)


def check_receptors(settings, maxima: dict, buildings, pipes) -> LimitResults:
    """Utilisation rows of the point maxima ({kind: {id: {quantity: value}}}) and the
    building and pipe checks against the limits in force."""
    structures = {"building": {b.receptor_id: b for b in buildings},
                  "pipe": {p.receptor_id: p for p in pipes}, "borehole": {}}
    rows = []
    for kind, results in structures.items():
        limits = general_limits(settings, kind)
        overrides = {rid: applying(kind, lims) for rid, lims in settings.limit_overrides.items()}
        ids = maxima.get(kind, {})
        checks = [check_limits(ids, _only(limits, True), _only(overrides, True)),
                  check_limits(results, _only(limits, False), _only(overrides, False))]
        rows += _in_receptor_order(kind, list(ids) or list(results), checks)
    governing = max(rows, key=lambda r: r.row.utilisation) if rows else None
    return LimitResults(tuple(rows), governing)


def _only(limits, point: bool):
    """The point (`point`) or structure limits of a sequence, or of each entry of a mapping
    receptor → limits."""
    if isinstance(limits, dict):
        return {rid: _only(lims, point) for rid, lims in limits.items()}
    return tuple(lim for lim in limits if (lim.quantity in POINT_QUANTITIES) == point)


def _in_receptor_order(kind: str, ids: list, checks: list[LimitCheck]) -> list[KindRow]:
    rows = [r for c in checks for r in c.rows]
    order = {rid: k for k, rid in enumerate(ids)}
    rows.sort(key=lambda r: order.get(r.receptor_id, len(order)))   # stable: limit order kept
    return [KindRow(kind, r) for r in rows]


def _point_maxima(points: pd.DataFrame) -> dict:
    """{kind: {receptor id: {quantity: largest value}}} over each receptor's points (a
    building's vertical profile below it left out, as in its summary); NaN (no soil, below
    the profile) gives no value."""
    out = {}
    pts = points[points["role"] != "profile"]
    for (kind, rid), g in pts.groupby(["receptor_kind", "receptor_id"], sort=False):
        values = {}
        for q, col in POINT_COLUMNS.items():
            if col in g and g[col].notna().any():
                values[q] = float(np.nanmax(g[col].to_numpy(float)))
        out.setdefault(kind, {})[str(rid)] = values
    return out


def limits_in_force(settings, units) -> list[list[str]]:
    """[where, text] rows of every limit in force, for `fillstress check`."""
    rows = [[f"limits: {kind}s", describe(lim, units)] for kind in APPLIES
            for lim in general_limits(settings, kind)]
    return rows + [[f"limits: at {rid}", describe(lim, units)]
                   for rid, lims in settings.limit_overrides.items() for lim in lims]


def describe(lim: Limit, units) -> str:
    """'settlement ≤ 65 mm (Skempton & MacDonald (1956): ...)'."""
    label, factor = unit_of(lim.quantity, units)
    over = "" if lim.length_m is None else f" within {units.length_out(lim.length_m):g} {units.length}"
    unit = "" if label == "1" else f" {label}"
    ratio = f" (1/{1 / lim.value:,.0f})" if lim.quantity in ("angular_distortion", "tilt") else ""
    if lim.quantity == "pipe_curvature":
        ratio = f" (radius ≥ {units.length_out(1 / lim.value):.4g} {units.length})"
    return f"{lim.label} ≤ {lim.value / factor:.4g}{unit}{ratio}{over} — {lim.source}"
