"""The maximum height of each body (``[limits] max_heights = true``): the factor on one body's
height, every other body in place, at which the first limit in force is reached.

Stress limits (Δσz, Δσz/σ'v0) are linear in the body's height (elastic superposition), so
their factor is exact (decide.max_height.linear_scale). Settlement limits are not: the
settlement points' per-body Δσz kept by the settlement step are scaled for the body, the
settlement recomputed along the load history (e–log σ' stress path), the building and pipe
checks redone and the largest utilisation found by a monotone root search
(decide.max_height.scale_at_limit) to a relative tolerance of `RTOL`. Excavations are not
searched (a larger cut unloads: the question is a different one).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .. import settlement as st
from ..decide.limits import limits_for
from ..decide.max_height import linear_scale, scale_at_limit
from .plan import PLAUSIBLE_FILL_M
from . import limits as lm
from .settle import structure_checks

RTOL = 1e-4              # relative tolerance on the factor of a settlement limit


@dataclass(frozen=True)
class MaxHeight:
    """One body's factor on its height at the first limit (inf: none reached below
    PLAUSIBLE_FILL_M, the highest earth fill there is), the height it gives (m), the limit
    and where."""

    body: str
    scale: float
    max_height_m: float
    limit: str
    receptor_kind: str
    receptor_id: str
    tolerance: float

    def as_row(self) -> dict:
        finite = math.isfinite(self.scale)
        return {"body": self.body, "scale": self.scale if finite else np.nan,
                "max_height": self.max_height_m if finite else np.nan,
                "governing_limit": self.limit if finite else "none reached",
                "receptor_kind": self.receptor_kind, "receptor_id": self.receptor_id,
                "tolerance": self.tolerance}


def max_heights(res, evaluate) -> list[MaxHeight]:
    """Every fill body's maximum height; `evaluate(grid, xyz)` gives Δσz (kPa) at points."""
    site = res.site
    pts = res.points[res.points["role"] != "profile"]
    xyz = pts[["x", "y", "depth"]].to_numpy(float)
    out = []
    for b, body in enumerate(site.bodies):
        if body.excavation:
            continue
        own = evaluate(site.spec.load_grid(body.pressure), xyz) if len(xyz) else np.zeros(0)
        found = [_stress_scale(site, pts, own), _settlement_scale(res, b)]
        scale, limit, kind, rid, tol = min((f for f in found if f is not None),
                                           key=lambda f: f[0], default=(math.inf, "", "", "", 0.0))
        if scale * body.max_height > PLAUSIBLE_FILL_M:      # no earth fill stands that high
            scale, limit, kind, rid = math.inf, "", "", ""
        out.append(MaxHeight(body.name, scale, scale * body.max_height, limit, kind, rid, tol))
    return out


def table(found: list[MaxHeight]) -> pd.DataFrame:
    """max_heights.csv (SI; the writer converts the height)."""
    return pd.DataFrame([m.as_row() for m in found],
                        columns=["body", "scale", "max_height", "governing_limit",
                                 "receptor_kind", "receptor_id", "tolerance"])


def _stress_scale(site, pts: pd.DataFrame, own: np.ndarray):
    """(factor, limit, kind, receptor, 0) of the stress limits, exact by linearity."""
    settings = site.settings
    body, limit, other, where = [], [], [], []
    total = pts["dsz"].to_numpy(float)
    sigma = pts["sigma_v0"].to_numpy(float) if "sigma_v0" in pts else np.full(len(pts), np.nan)
    for (kind, rid), idx in pts.groupby(["receptor_kind", "receptor_id"], sort=False).indices.items():
        lims = limits_for(str(rid), lm.general_limits(settings, kind),
                          {k: lm.applying(kind, v) for k, v in settings.limit_overrides.items()})
        for lim in lims:
            if lim.quantity not in lm.POINT_QUANTITIES:
                continue
            scale = np.ones(len(idx)) if lim.quantity == "stress_increase" else sigma[idx]
            keep = np.isfinite(scale) & (scale > 0)
            body += list(own[idx][keep] / scale[keep])
            other += list((total[idx] - own[idx])[keep] / scale[keep])
            limit += [lim.value] * int(keep.sum())
            where += [(lim.label, kind, str(rid))] * int(keep.sum())
    if not body:
        return None
    s, k = linear_scale(body, limit, other)
    return None if k < 0 else (s, *where[k], 0.0)


def _settlement_scale(res, b: int):
    """(factor, limit, kind, receptor, RTOL) of the settlement limits at buildings and
    pipes, by a root search on the full settlement; None without any."""
    cols = res.settlement_columns
    if cols is None or not (res.buildings or res.pipes):
        return None
    settings = res.site.settings

    def rows(scale: float):
        buildings, pipes = _checks_at(res, cols, b, scale)
        return lm.check_receptors(settings, {}, buildings, pipes)

    def largest(scale: float) -> float:
        found = rows(scale)
        return found.governing.row.utilisation if found.governing is not None else 0.0

    if rows(1.0).governing is None:
        return None                         # no settlement limit at any building or pipe
    r = scale_at_limit(largest, rtol=RTOL, max_doublings=40)
    if not r.found:
        return math.inf, "", "", "", RTOL
    g = rows(r.scale).governing
    return r.scale, g.row.limit.label, g.kind, g.row.receptor_id, RTOL


def _checks_at(res, cols, b: int, scale: float):
    """Building and pipe checks with body `b`'s Δσz scaled by `scale` at every state."""
    soil = res.site.soil
    active = cols.active.copy()
    active[:, b] *= scale
    settled = np.full(len(cols.targets), np.nan)
    for idx, z, h, per_body in cols.groups:
        if z is None:
            settled[idx] = 0.0
            continue
        dsz = np.einsum("eb,nbk->nek", active, per_body)
        tension = np.any(soil.sigma_v0_eff(z) + dsz <= 0, axis=(1, 2))
        path = st.stress_path(soil, z, h, np.where(tension[:, None, None], 0.0, dsz))
        final = path.settlement[:, -1].sum(axis=1)
        final[tension] = np.nan
        settled[idx] = final
    return structure_checks(res.site, cols.targets.assign(settlement=settled))
