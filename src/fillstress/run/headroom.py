"""The headroom map of a run ([headroom]): the largest multiple of a template load that may be
placed centred on each map cell before the first limit in force is reached at any receptor,
everything already on the site in place (decide/headroom.py).

Stress limits (Δσz, Δσz/σ'v0 at every receptor point) are exact by reciprocity. The
settlement limits are linearised about the present state (decide.headroom.
settlement_sensitivity, tangent of the 1-D model): the largest settlement of a building or
pipe at each of its settlement points, and the quantities linear in those settlements — a
building's angular distortion β (structures.distortion_operator), differential settlement
(every pair of its points) and tilt (structures.tilt_operator), a pipe's differential
within each length in force (structures.pairs_within) and its curvature
(structures.curvature_operator). The `recheck` lowest cells of that map, and some spread
over the rest, are re-checked with the template placed for real on the full nonlinear
settlement. Where the full model allows less than the linearisation at a re-checked cell by
more than RECHECK_TOLERANCE, every settlement-governed cell is scaled by the worst ratio
found (re-checked cells take their full-model value) and the run warns: headroom.tif holds
the scaled map, headroom_linearised.tif the linearisation (docs/method-decisions.md,
"Headroom map"). The deflection ratio has no limit in [limits] and is not mapped.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..decide import headroom as hd
from ..decide.limits import limits_for
from ..decide.max_height import scale_at_limit
from ..grid import GridSpec
from ..settlement import consolidation_settlement
from ..solve import vertical_stress
from ..structures import (curvature_operator, distortion_operator, pairs_within,
                          tilt_operator)
from . import limits as lm
from .plan import PLAUSIBLE_FILL_M

MAPPED = ("stress_increase", "stress_ratio", "settlement", "angular_distortion",
          "differential_settlement", "tilt", "pipe_curvature")
RECHECK_TOLERANCE = 0.01    # full model below the linearisation by more: the map is scaled
# spread re-checks stay where the template weighs less than the highest earth fill
# (PLAUSIBLE_FILL_M at 20 kN/m³, common practice for a heavy fill)
HEAVIEST_FILL_KPA = PLAUSIBLE_FILL_M * 20.0


@dataclass(frozen=True)
class HeadroomResults:
    """The map (multiple, shape of `spec`; inf where no mapped limit is reached), the height
    it gives for a body or pile template (None for a rectangle), the receptor (kind, id,
    point or edge, limit label, quantity) governing each cell (index into `receptors`, -1 where inf) and the re-checked
    cells (x, y, lowest or spread, linearised and full multiple, settlement full ÷
    linearised). `linearised` is the map before the re-checks' correction, `factor` the
    scale put on its settlement limits (1.0: none) and `worst_ratio` the least settlement
    full ÷ linearised among the re-checks (nan: none)."""

    spec: GridSpec
    multiple: np.ndarray
    height: np.ndarray | None
    governing: np.ndarray
    receptors: list
    checks: pd.DataFrame
    template: str
    linearised: np.ndarray
    factor: float = 1.0
    worst_ratio: float = math.nan
    template_height: float | None = None

    @property
    def unsafe(self) -> bool:
        """The full model allowed less than the linearisation beyond the tolerance."""
        return bool(self.worst_ratio < 1.0 - RECHECK_TOLERANCE)

    def least(self) -> dict | None:
        """The smallest multiple of the map (SI: x, y in internal metres, height in m) and
        what governs it; None when no mapped limit is reached anywhere."""
        finite = np.isfinite(self.multiple)
        if not finite.any():
            return None
        j, i = np.unravel_index(int(np.argmin(np.where(finite, self.multiple, np.inf))),
                                self.multiple.shape)
        kind, rid, point, limit, quantity = self.receptors[self.governing[j, i]]
        m = float(self.multiple[j, i])
        return {"multiple": m, "x": float(self.spec.x_centres[i]),
                "y": float(self.spec.y_centres[j]),
                "height": None if self.template_height is None else m * self.template_height,
                "limit": limit, "limit_type": ("stress" if quantity in lm.POINT_QUANTITIES
                                               else quantity),
                "receptor_kind": kind, "receptor_id": rid, "point_id": point}


def headroom_results(res) -> HeadroomResults:
    """The headroom map of a run after its settlement and limits steps."""
    site, how = res.site, res.site.settings.headroom
    spec = map_lattice(site.spec, how.step, how.extent)
    template, height = template_of(site, how, spec)
    receptors = []
    stress = _stress_map(res, template, spec, receptors)
    stress_maps = [] if stress is None else [stress]
    groups = _settlement_groups(res, template, spec)
    combinations = _combinations(site, groups)
    settle_maps = (_settlement_maps(groups, spec, receptors)
                   + _combination_maps(groups, combinations, spec, receptors))
    lin_settle = _least(settle_maps, spec.shape)
    linearised, _ = _least(stress_maps + settle_maps, spec.shape)
    checks, settled, factor, worst = _recheck(res, template, spec, (groups, combinations),
                                              lin_settle, stress, how.recheck)
    safe = hd.HeadroomMap(settled, lin_settle[1], spec.x_centres, spec.y_centres)
    multiple, governing = _least(stress_maps + [safe], spec.shape)
    return HeadroomResults(spec, multiple, None if height is None else multiple * height,
                           governing, receptors, checks, template_label(how, site.units),
                           linearised, factor, worst, height)


def headroom_warnings(found: HeadroomResults) -> list[str]:
    """The run's warning when the full model allowed less than the linearised map."""
    if not found.unsafe:
        return []
    cut = 100 * (1 - found.worst_ratio)
    scaled = (f"the settlement-limited cells of headroom.tif are scaled by "
              f"{found.factor:.3g} (the linearisation is in headroom_linearised.tif)")
    return [f"headroom: the full settlement model allows up to {cut:.0f} % less than the "
            f"linearised map at the re-checked cells (worst full ÷ linearised "
            f"{found.worst_ratio:.3g}; headroom_checks.csv); {scaled}; settlement-governed "
            "values between re-checked cells are linearised and may be unsafe"]


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
    if how.kind == "pile":
        pile = how.pile
        return hd.pile_template(pile.toe(), pile.repose_angle, pile.height, pile.unit_weight,
                                spec.dx, spec.dy), pile.height
    body = next(b for b in site.bodies if b.name == how.body)
    return coarsened(body.pressure, how.step), body.max_height


def template_label(how, units) -> str:
    """The template in words, in the site's units ('pile on a 30 m × 20 m toe, ...')."""
    def length(v):
        return f"{units.length_out(v):g} {units.length}"

    if how.kind == "body":
        return f"body {how.body}"
    if how.kind == "rectangle":
        return (f"rectangle {length(how.size[0])} × {length(how.size[1])} at "
                f"{units.pressure_out(how.pressure):g} {units.pressure}")
    pile = how.pile
    toe = (f"circular toe {length(pile.diameter)} across" if pile.diameter is not None else
           f"{length(pile.size[0])} × {length(pile.size[1])} toe")
    return (f"pile on a {toe}, {length(pile.height)} high at {pile.repose_angle:g}°, "
            f"{units.out(pile.unit_weight, 'unit_weight'):g} {units.unit_weight}")


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
            receptors += [(kind, str(rid), str(p), lim.label, lim.quantity)
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


@dataclass(frozen=True)
class _Group:
    """Building and pipe settlement points of one depth group: their rows of the targets,
    plan points, sublayers, Δσz in place (n, K), present settlement (n,), the template's
    linearised settlement on every map cell (n, ny, nx) and the settlement limit (nan: none)."""

    rows: np.ndarray
    frame: pd.DataFrame
    z: np.ndarray
    h: np.ndarray
    now: np.ndarray
    current: np.ndarray
    response: np.ndarray
    limit: np.ndarray


def _settlement_groups(res, template, spec) -> list[_Group]:
    """The settlement points of buildings and pipes (not in tension), group by group."""
    cols, site = res.settlement_columns, res.site
    if cols is None:
        return []
    now_state = cols.active[-1]
    out = []
    for idx, z, h, per_body in cols.groups:
        if z is None:
            continue
        sub = cols.targets.iloc[idx]
        now = np.einsum("b,nbk->nk", now_state, per_body)
        keep = (sub["receptor_kind"].isin(["building", "pipe"]).to_numpy()
                & ~np.any(site.soil.sigma_v0_eff(z) + now <= 0, axis=1))
        if not keep.any():
            continue
        sub, now = sub[keep], now[keep]
        sens = hd.settlement_sensitivity(site.soil, z, h, now)
        response = hd.settlement_response(template, spec, sub[["x", "y"]].to_numpy(float), z,
                                          sens, site.method, site.poisson)
        limit = np.array([_settlement_limit(site.settings, k, r) for k, r in
                          zip(sub["receptor_kind"], sub["receptor_id"])])
        out.append(_Group(np.asarray(idx)[keep], sub, z, h, now,
                          consolidation_settlement(site.soil, z, h, now), response, limit))
    return out


def _settlement_maps(groups, spec, receptors) -> list:
    """The linearised settlement-limit map of each group with a settlement limit."""
    out = []
    for g in groups:
        has = np.isfinite(g.limit)
        if not has.any():
            continue
        m = hd.response_headroom_map(spec, g.response[has], g.limit[has], g.current[has])
        first = len(receptors)
        sub = g.frame[has]
        receptors += [(k, str(r), str(p), "settlement", "settlement") for k, r, p in
                      zip(sub["receptor_kind"], sub["receptor_id"], sub["point_id"])]
        out.append(_offset(m, first))
    return out


@dataclass(frozen=True)
class _Combination:
    """A limit on a quantity linear in a receptor's point settlements: its points (group,
    position in it), the operator from their settlements to the quantity's rows (E, N), the
    label of each row, the limit, its label and quantity; `norm`: the limit is on the length
    of the rows' vector (tilt), else on every |row| (β of each edge, the differential of
    each pair, the curvature at each inner point of a pipe)."""

    kind: str
    receptor_id: str
    parts: list
    operator: np.ndarray
    row_ids: list
    limit: float
    label: str
    quantity: str
    norm: bool = False

    def __post_init__(self):
        object.__setattr__(self, "rows", hd.sparse_rows(self.operator))   # a few terms a row

    def settlements(self, per_group: list) -> np.ndarray:
        """This receptor's point settlements out of per-group arrays (first axis: points)."""
        return np.concatenate([per_group[g][k] for g, k in self.parts])

    def value(self, settled: list) -> float:
        """The quantity for the groups' settlements (m): largest |row|, or the length."""
        q = self.rows @ self.settlements(settled)
        return float(np.hypot(*q)) if self.norm else float(np.abs(q).max(initial=0.0))


def _combinations(site, groups) -> list[_Combination]:
    """Every linear settlement limit in force at the buildings and pipes on the map: the
    lowest of each quantity (and, for pipes, of each differential length)."""
    out = []
    for b in site.receptors.buildings:
        out += _building_combinations(site, groups, b)
    for pipe in site.receptors.pipes:
        out += _pipe_combinations(site, groups, pipe)
    return out


def _points_of(groups, rid: str, order_by=None):
    """(parts, plan xy, point ids, chainage) of one receptor's settlement points, in
    chainage order when `order_by` is "chainage"."""
    parts = [(g, np.flatnonzero(groups[g].frame["receptor_id"].astype(str).to_numpy() == rid))
             for g in range(len(groups))]
    parts = [(g, k) for g, k in parts if len(k)]
    if not parts:
        return [], np.zeros((0, 2)), np.array([], dtype=str), np.zeros(0)
    frame = pd.concat([groups[g].frame.iloc[k] for g, k in parts])
    chainage = frame["chainage"].to_numpy(float) if "chainage" in frame else np.zeros(len(frame))
    if order_by == "chainage":
        order = np.argsort(chainage, kind="stable")
        where = [(g, i) for g, k in parts for i in k]
        parts = [(g, np.array([i])) for g, i in (where[o] for o in order)]
        frame, chainage = frame.iloc[order], chainage[order]
    return parts, frame[["x", "y"]].to_numpy(float), frame["point_id"].astype(str).to_numpy(), \
        chainage


def _lowest(settings, kind, rid, quantity, length=None):
    """The lowest limit of `quantity` in force at a receptor, of a differential judged over
    `length` (None: a pipe's own differential length); None where there is none."""
    found = [lim for lim in _limits_at(settings, kind, rid) if lim.quantity == quantity
             and lim.length_m == length]
    return min(found, key=lambda lim: lim.value) if found else None


def _pair_rows(n: int, pairs: np.ndarray) -> np.ndarray:
    rows = np.zeros((len(pairs), n))
    rows[np.arange(len(pairs)), pairs[:, 0]] = 1.0
    rows[np.arange(len(pairs)), pairs[:, 1]] = -1.0
    return rows


def _pair_ids(ids, pairs) -> list:
    return [f"{ids[a]}–{ids[c]}" for a, c in pairs]


def _building_combinations(site, groups, b) -> list[_Combination]:
    """Angular distortion (each wall edge), differential settlement (every pair of points)
    and tilt (the tilt plane's gradient) of one building with two or more points."""
    rid = str(b.id)
    parts, xy, ids, _ = _points_of(groups, rid)
    if len(ids) < 2:
        return []
    out = []
    beta = _lowest(site.settings, "building", rid, "angular_distortion")
    if beta is not None:
        operator, edges = distortion_operator(xy, outline=np.asarray(b.geometry.exterior.coords))
        out.append(_Combination("building", rid, parts, operator, _pair_ids(ids, edges),
                                beta.value, beta.label, beta.quantity))
    diff = _lowest(site.settings, "building", rid, "differential_settlement")
    if diff is not None:
        pairs = np.array([(i, j) for i in range(len(ids)) for j in range(i + 1, len(ids))])
        out.append(_Combination("building", rid, parts, _pair_rows(len(ids), pairs),
                                _pair_ids(ids, pairs), diff.value, diff.label, diff.quantity))
    tilt = _lowest(site.settings, "building", rid, "tilt")
    if tilt is not None:
        out.append(_Combination("building", rid, parts, tilt_operator(xy), ["tilt plane"],
                                tilt.value, tilt.label, tilt.quantity, norm=True))
    return out


def _pipe_combinations(site, groups, pipe) -> list[_Combination]:
    """Differential settlement within each length in force (pairs of points at most that
    far apart in chainage) and curvature (each inner point) of one pipe."""
    rid = str(pipe.id)
    parts, _, ids, chainage = _points_of(groups, rid, order_by="chainage")
    if len(ids) < 2:
        return []
    out = []
    lengths = {lim.length_m for lim in _limits_at(site.settings, "pipe", rid)
               if lim.quantity == "differential_settlement"}
    for length in sorted(lengths, key=lambda v: (v is not None, v or 0.0)):
        lim = _lowest(site.settings, "pipe", rid, "differential_settlement", length)
        pairs = pairs_within(chainage, pipe.differential_length if length is None else length)
        if len(pairs):
            out.append(_Combination("pipe", rid, parts, _pair_rows(len(ids), pairs),
                                    _pair_ids(ids, pairs), lim.value, lim.label, lim.quantity))
    bend = _lowest(site.settings, "pipe", rid, "pipe_curvature")
    if bend is not None and len(ids) >= 3:
        out.append(_Combination("pipe", rid, parts, curvature_operator(chainage),
                                [str(p) for p in ids[1:-1]], bend.value, bend.label,
                                bend.quantity))
    return out


def _combination_maps(groups, combinations, spec, receptors) -> list:
    """The linearised map of each linear settlement limit: the quantity of the present
    settlement plus m times that of the template's linearised settlement reaching the
    limit (decide.headroom.combination_headroom_map; two-sided: β, a differential or a
    curvature may turn either way)."""
    out = []
    for c in combinations:
        m = hd.combination_headroom_map(spec, c.operator,
                                        c.settlements([g.response for g in groups]),
                                        c.settlements([g.current for g in groups]), c.limit,
                                        norm=c.norm)
        first = len(receptors)
        receptors += [(c.kind, c.receptor_id, r, c.label, c.quantity) for r in c.row_ids]
        out.append(_offset(m, first))
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


def _recheck(res, template, spec, points, lin_settle, stress, count):
    """The `count` re-checked cells of the map of the settlement limits (settlement and
    angular distortion) on the full settlement (the stress limits, exact, taken with them):
    (table, that map made safe by them, factor applied, worst full ÷ linearised)."""
    columns = ["x", "y", "selection", "linearised_multiple", "full_multiple", "difference",
               "settlement_ratio"]
    none = pd.DataFrame(columns=columns), lin_settle[0], 1.0, math.nan
    if not np.isfinite(lin_settle[0]).any() or count == 0:
        return none
    cells, lowest = hd.recheck_cells(lin_settle[0], count, HEAVIEST_FILL_KPA / template.max())
    if len(cells) == 0:
        return none
    full_settle = np.array([_full_multiple(res.site, template, spec, cell, *points)
                            for cell in cells])
    settled, factor, worst = hd.scaled_by_rechecks(lin_settle[0], cells, full_settle,
                                                   RECHECK_TOLERANCE)
    rc = (cells[:, 0], cells[:, 1])
    exact = stress.multiple[rc] if stress is not None else np.full(len(cells), np.inf)
    lin, full = np.minimum(lin_settle[0][rc], exact), np.minimum(full_settle, exact)
    with np.errstate(invalid="ignore", divide="ignore"):
        diff = np.where(lin == full, 0.0, (full - lin) / lin)
        ratio = np.where(full_settle == lin_settle[0][rc], 1.0, full_settle / lin_settle[0][rc])
    return pd.DataFrame({"x": spec.x_centres[cells[:, 1]], "y": spec.y_centres[cells[:, 0]],
                         "selection": np.where(lowest, "lowest", "spread"),
                         "linearised_multiple": lin, "full_multiple": full,
                         "difference": diff, "settlement_ratio": ratio},
                        columns=columns), settled, factor, worst


def _full_multiple(site, template, spec, cell, groups, combinations) -> float:
    """The template placed for real on `cell` (direct solver at every settlement point's
    sublayers) and the multiple at which the full 1-D settlement first reaches a settlement
    or angular distortion limit (decide.max_height.scale_at_limit)."""
    placed = hd.placed_template(template, spec, cell)
    added = []
    for g in groups:
        xy = g.frame[["x", "y"]].to_numpy(float)
        pts = np.column_stack([np.repeat(xy, g.z.size, axis=0), np.tile(g.z, len(xy))])
        added.append(vertical_stress(placed, pts, site.method, site.poisson).reshape(g.now.shape))

    def utilisation(scale: float) -> float:
        settled = [consolidation_settlement(site.soil, g.z, g.h, g.now + scale * a)
                   for g, a in zip(groups, added)]
        worst = max((float(np.nanmax(s / g.limit)) for g, s in zip(groups, settled)
                     if np.isfinite(g.limit).any()), default=0.0)
        for c in combinations:
            worst = max(worst, c.value(settled) / c.limit)
        return worst

    return scale_at_limit(utilisation, rtol=1e-6).scale


def governing_table(found: HeadroomResults) -> pd.DataFrame:
    """headroom_governing.csv: each receptor and limit that governs some cells, the cells it
    governs and its smallest multiple and where (SI)."""
    return _governing_rows(found).drop(columns="receptor")


def governing_codes(found: HeadroomResults) -> np.ndarray:
    """headroom_governing.tif: per cell the row of headroom_governing.csv (1: its first)
    whose limit governs it, 0 where no mapped limit is reached."""
    codes = np.zeros(found.governing.shape)
    for row, r in enumerate(_governing_rows(found)["receptor"], start=1):
        codes[found.governing == r] = row
    return codes


def _governing_rows(found: HeadroomResults) -> pd.DataFrame:
    rows = []
    cell_area = found.spec.dx * found.spec.dy
    for r in np.unique(found.governing[found.governing >= 0]):
        mask = found.governing == r
        values = np.where(mask, found.multiple, np.inf)
        j, i = np.unravel_index(int(np.argmin(values)), values.shape)
        kind, rid, point, limit, quantity = found.receptors[r]
        rows.append({"receptor_kind": kind, "receptor_id": rid, "point_id": point,
                     "limit": limit, "quantity": quantity, "cells": int(mask.sum()),
                     "area": float(mask.sum() * cell_area),
                     "multiple_min": float(values[j, i]),
                     "x_at_min": float(found.spec.x_centres[i]),
                     "y_at_min": float(found.spec.y_centres[j]), "receptor": int(r)})
    frame = pd.DataFrame(rows, columns=["receptor_kind", "receptor_id", "point_id", "limit",
                                        "quantity", "cells", "area", "multiple_min", "x_at_min",
                                        "y_at_min", "receptor"])
    return frame.sort_values("multiple_min", kind="stable").reset_index(drop=True)
