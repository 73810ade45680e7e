"""The headroom map of a run ([headroom]): the largest multiple of a template load that may be
placed centred on each map cell before the first limit in force is reached at any receptor,
everything already on the site in place (decide/headroom.py).

Stress limits (Δσz, Δσz/σ'v0 at every receptor point) are exact by reciprocity. The
settlement limit (largest settlement of a building or pipe, at each of its settlement points)
is linearised about the present state (decide.headroom.settlement_sensitivity, tangent of
the 1-D model) and the `recheck` lowest cells of that map are re-checked with the template
placed for real on the full nonlinear settlement. Differential settlement, distortion, tilt
and pipe curvature are not mapped (stated in the report and in headroom_checks' note).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..decide import headroom as hd
from ..decide.limits import limits_for
from ..grid import GridSpec
from ..settlement import consolidation_settlement
from . import limits as lm

MAPPED = ("stress_increase", "stress_ratio", "settlement")


@dataclass(frozen=True)
class HeadroomResults:
    """The map (multiple, shape of `spec`; inf where no mapped limit is reached), the height
    it gives for a body template (None for a rectangle), the receptor (kind, id, point,
    limit) governing each cell (index into `receptors`, -1 where inf) and the re-checked
    cells (x, y, linearised and full multiple)."""

    spec: GridSpec
    multiple: np.ndarray
    height: np.ndarray | None
    governing: np.ndarray
    receptors: list
    checks: pd.DataFrame
    template: str


def headroom_results(res) -> HeadroomResults:
    """The headroom map of a run after its settlement and limits steps."""
    site, how = res.site, res.site.settings.headroom
    spec = map_lattice(site.spec, how.step, how.extent)
    template, height = template_of(site, how, spec)
    maps, receptors = [], []
    stress = _stress_map(res, template, spec, receptors)
    if stress is not None:
        maps.append(stress)
    settle_maps = [m for m in _settlement_maps(res, template, spec, receptors)]
    lin_settle = _least([m for m, _ in settle_maps], spec.shape)
    multiple, governing = _least(maps + [m for m, _ in settle_maps], spec.shape)
    checks = _recheck(res, template, spec, settle_maps, lin_settle, stress, how.recheck)
    label = (f"body {how.body}" if how.kind == "body" else
             f"rectangle {how.size[0]:g} m × {how.size[1]:g} m at {how.pressure:g} kPa")
    return HeadroomResults(spec, multiple, None if height is None else multiple * height,
                           governing, receptors, checks, label)


def map_lattice(grid: GridSpec, step: int, extent=None) -> GridSpec:
    """The map's cells: `step` × `step` analysis cells each, over `extent` (m; default the
    grid), aligned on the analysis cells."""
    i0, j0, i1, j1 = 0, 0, grid.nx, grid.ny
    if extent is not None:
        i0 = max(0, int(np.floor((extent[0] - grid.x0) / grid.dx + 1e-9)))
        j0 = max(0, int(np.floor((extent[1] - grid.y0) / grid.dy + 1e-9)))
        i1 = min(grid.nx, int(np.ceil((extent[2] - grid.x0) / grid.dx - 1e-9)))
        j1 = min(grid.ny, int(np.ceil((extent[3] - grid.y0) / grid.dy - 1e-9)))
    return GridSpec(grid.x0 + i0 * grid.dx, grid.y0 + j0 * grid.dy, step * grid.dx,
                    step * grid.dy, max(1, -(-(i1 - i0) // step)), max(1, -(-(j1 - j0) // step)),
                    grid.crs)


def template_of(site, how, spec: GridSpec):
    """(cell pressures on the map cell, height of the template at multiple 1 or None)."""
    if how.kind == "rectangle":
        return hd.rectangle_template(*how.size, how.pressure, spec.dx, spec.dy), None
    body = next(b for b in site.bodies if b.name == how.body)
    return coarsened(body.pressure, how.step), body.max_height


def coarsened(pressure: np.ndarray, step: int) -> np.ndarray:
    """The loaded part of a cell-pressure array averaged onto cells of `step` × `step`
    (the load is kept).

    Examples
    --------
    >>> coarsened(np.array([[0, 0, 0], [0, 4.0, 8.0]]), 2).tolist()   # 12 kPa·cell kept
    [[3.0]]
    """
    rows, cols = np.nonzero(pressure > 0)
    p = pressure[rows.min():rows.max() + 1, cols.min():cols.max() + 1]
    ny, nx = -(-p.shape[0] // step) * step, -(-p.shape[1] // step) * step
    padded = np.zeros((ny, nx))
    padded[:p.shape[0], :p.shape[1]] = p
    return padded.reshape(ny // step, step, nx // step, step).mean(axis=(1, 3))


def _limits_at(settings, kind: str, rid: str):
    return limits_for(str(rid), lm.general_limits(settings, kind),
                      {k: lm.applying(kind, v) for k, v in settings.limit_overrides.items()})


def _stress_map(res, template, spec, receptors):
    """The stress-limit map by reciprocity (exact); None without a stress limit."""
    site = res.site
    pts = res.points[res.points["role"] != "profile"]
    xyz, limit, current = [], [], []
    for (kind, rid), g in pts.groupby(["receptor_kind", "receptor_id"], sort=False):
        for lim in _limits_at(site.settings, kind, rid):
            if lim.quantity not in lm.POINT_QUANTITIES:
                continue
            scale = (np.ones(len(g)) if lim.quantity == "stress_increase"
                     else g["sigma_v0"].to_numpy(float) if "sigma_v0" in g
                     else np.full(len(g), np.nan))
            keep = np.isfinite(scale) & (scale > 0)
            xyz.append(g[["x", "y", "depth"]].to_numpy(float)[keep])
            limit.append(lim.value * scale[keep])
            current.append(g["dsz"].to_numpy(float)[keep])
            receptors += [(kind, str(rid), str(p), lim.label)
                          for p in g["point_id"].to_numpy()[keep]]
    if not xyz or not sum(len(x) for x in xyz):
        return None
    first = len(receptors) - sum(len(x) for x in xyz)
    m = hd.headroom_map(template, spec, np.concatenate(xyz), np.concatenate(limit),
                        np.concatenate(current), site.method, site.poisson)
    return _offset(m, first)


def _offset(m: hd.HeadroomMap, first: int) -> hd.HeadroomMap:
    return hd.HeadroomMap(m.multiple, np.where(m.governing >= 0, m.governing + first, -1),
                          m.x, m.y)


def _settlement_maps(res, template, spec, receptors):
    """[(linearised map, (xy, z, h, Δσz now, limit))] per group of settlement points of
    equal depth that have a settlement limit."""
    cols, site = res.settlement_columns, res.site
    if cols is None:
        return []
    now_state = cols.active[-1]
    out = []
    for idx, z, h, per_body in cols.groups:
        if z is None:
            continue
        sub = cols.targets.iloc[idx]
        limit = np.array([_settlement_limit(site.settings, k, r) for k, r in
                          zip(sub["receptor_kind"], sub["receptor_id"])])
        now = np.einsum("b,nbk->nk", now_state, per_body)
        keep = np.isfinite(limit) & ~np.any(site.soil.sigma_v0_eff(z) + now <= 0, axis=1)
        if not keep.any():
            continue
        xy, now, limit = sub[["x", "y"]].to_numpy(float)[keep], now[keep], limit[keep]
        current = consolidation_settlement(site.soil, z, h, now)
        sens = hd.settlement_sensitivity(site.soil, z, h, now)
        m = hd.settlement_headroom_map(template, spec, xy, z, sens, limit, current,
                                       site.method, site.poisson)
        first = len(receptors)
        receptors += [(k, str(r), str(p), "settlement") for k, r, p in
                      zip(sub["receptor_kind"][keep], sub["receptor_id"][keep],
                          sub["point_id"][keep])]
        out.append((_offset(m, first), (xy, z, h, now, limit)))
    return out


def _settlement_limit(settings, kind: str, rid) -> float:
    if kind not in ("building", "pipe"):
        return np.nan
    found = [lim.value for lim in _limits_at(settings, kind, rid) if lim.quantity == "settlement"]
    return min(found) if found else np.nan


def _least(maps, shape):
    """(multiple, governing) least over maps: a cell's smallest multiple and its receptor."""
    best, who = np.full(shape, np.inf), np.full(shape, -1, dtype=np.int64)
    for m in maps:
        better = m.multiple < best
        best[better], who[better] = m.multiple[better], m.governing[better]
    return best, who


def _recheck(res, template, spec, settle_maps, lin_settle, stress, count) -> pd.DataFrame:
    """The `count` lowest cells of the settlement map re-checked on the full settlement
    (the stress limits, exact, taken with them)."""
    columns = ["x", "y", "linearised_multiple", "full_multiple", "difference"]
    if not settle_maps or count == 0:
        return pd.DataFrame(columns=columns)
    cells = hd.lowest_cells(hd.HeadroomMap(lin_settle[0], None, None, None), count)
    if len(cells) == 0:
        return pd.DataFrame(columns=columns)
    site = res.site
    full = np.full(len(cells), np.inf)
    for _, (xy, z, h, now, limit) in settle_maps:
        full = np.minimum(full, hd.recheck_settlement(template, spec, cells, xy, site.soil, z,
                                                      h, now, limit, site.method,
                                                      site.poisson))
    rc = (cells[:, 0], cells[:, 1])
    exact = stress.multiple[rc] if stress is not None else np.full(len(cells), np.inf)
    lin, full = np.minimum(lin_settle[0][rc], exact), np.minimum(full, exact)
    with np.errstate(invalid="ignore", divide="ignore"):
        diff = np.where(lin == full, 0.0, (full - lin) / lin)
    return pd.DataFrame({"x": spec.x_centres[cells[:, 1]], "y": spec.y_centres[cells[:, 0]],
                         "linearised_multiple": lin, "full_multiple": full,
                         "difference": diff}, columns=columns)


def governing_table(found: HeadroomResults) -> pd.DataFrame:
    """headroom_governing.csv: each receptor and limit that governs some cells, the cells it
    governs and its smallest multiple and where (SI)."""
    rows = []
    cell_area = found.spec.dx * found.spec.dy
    for r in np.unique(found.governing[found.governing >= 0]):
        mask = found.governing == r
        values = np.where(mask, found.multiple, np.inf)
        j, i = np.unravel_index(int(np.argmin(values)), values.shape)
        kind, rid, point, limit = found.receptors[r]
        rows.append({"receptor_kind": kind, "receptor_id": rid, "point_id": point,
                     "limit": limit, "cells": int(mask.sum()),
                     "area": float(mask.sum() * cell_area),
                     "multiple_min": float(values[j, i]),
                     "x_at_min": float(found.spec.x_centres[i]),
                     "y_at_min": float(found.spec.y_centres[j])})
    frame = pd.DataFrame(rows, columns=["receptor_kind", "receptor_id", "point_id", "limit",
                                        "cells", "area", "multiple_min", "x_at_min",
                                        "y_at_min"])
    return frame.sort_values("multiple_min", kind="stable").reset_index(drop=True)
