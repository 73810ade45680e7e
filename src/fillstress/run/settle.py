"""The settlement steps of a run: effective stress and stress ratios at the receptor
points, consolidation settlement of every stage, the building and pipe checks and the
settlement–time curves (all SI)."""
from __future__ import annotations

from typing import NamedTuple

import numpy as np
import pandas as pd

from .. import settlement as st
from . import history, timeline as tl
from ..kernels.spec import eta as westergaard_eta
from ..settlement import influence_depth
from ..structures import DEFAULT_LIMITS, building_settlement, pipe_settlement


def soil_results(res) -> None:
    """σ'v0, the stress ratio at every point and the influence depth of each profile."""
    p, soil = res.points, res.site.soil
    # σ'v0 is known only within the stated profile; deeper points get NaN, not a guess.
    depth = p["depth"].to_numpy(float)
    inside = depth <= soil.bottom_m
    sigma = np.full(len(p), np.nan)
    sigma[inside] = soil.sigma_v0_eff(depth[inside])
    p["sigma_v0"] = sigma
    with np.errstate(divide="ignore", invalid="ignore"):
        p["stress_ratio"] = np.where(p["sigma_v0"] > 0, p["dsz"] / p["sigma_v0"], np.nan)
    fraction = res.site.settings.influence_fraction
    for rid, g in p[p["role"].isin(["profile", "borehole"])].groupby("receptor_id", sort=False):
        g = g[g["sigma_v0"].notna()].sort_values("depth")
        if len(g) < 2:
            continue
        z = influence_depth(g["depth"].to_numpy(), g["dsz"].to_numpy(),
                            g["sigma_v0"].to_numpy(), fraction)
        res.profiles.append({"receptor_id": rid, "influence_depth": _float(z),
                             "fraction": fraction})


def _float(v):
    try:
        return float(v) if v is not None and np.isfinite(v) else float("nan")
    except TypeError:
        return float("nan")


def _settlement_points(points: pd.DataFrame) -> pd.DataFrame:
    """Where settlement is computed: every building and pipe point except the profile,
    and the ground surface at each borehole."""
    keep = points[points["receptor_kind"].isin(["building", "pipe"]) & (points["role"] != "profile")]
    holes = points[points["receptor_kind"] == "borehole"].groupby("receptor_id", sort=False).head(1)
    holes = holes.assign(depth=0.0)
    return pd.concat([keep, holes])


def column_layers(soil, x, y, top_depth: float, stage_grids, evaluate):
    """Settlement (m) by soil layer of the columns below plan points (x, y) from
    `top_depth` down, after each stage: shape (N, S, L); None when no compressible soil
    lies below `top_depth`. Unloading beyond σ'v0 (a deep excavation) leaves 1-D
    consolidation: such a column is NaN at that stage (heave), the others computed."""
    z, h = st.sublayers(soil, top_depth=top_depth)
    if len(z) == 0:
        return None
    n = len(x)
    xyz = np.column_stack([np.repeat(x, len(z)), np.repeat(y, len(z)), np.tile(z, n)])
    s0 = soil.sigma_v0_eff(z)
    out = []
    for g in stage_grids:
        dsz = evaluate(g, xyz).reshape(n, len(z))
        tension = np.any(s0 + dsz <= 0, axis=1)
        layers = st.settlement_by_layer(soil, z, h, np.where(tension[:, None], 0.0, dsz))
        layers[tension] = np.nan
        out.append(layers)
    return np.stack(out, axis=1)


def settlement_results(res, evaluate) -> None:
    """Settlement along the load history at the settlement points (stress path through the
    load states), the structure checks, the settlement–time curves and the calculation
    record; `evaluate(grid, xyz)` gives Δσz (kPa) at (N, 3) points."""
    site, soil = res.site, res.site.soil
    targets = _settlement_points(res.points)
    states = tl.load_states(site)
    active = np.array([s.active for s in states], dtype=float)            # (E, B)
    body_grids = [site.spec.load_grid(b.pressure) for b in site.bodies]
    stage_state = {s.stage: e for e, s in enumerate(states) if s.stage is not None}
    per_state = np.full((len(targets), len(states)), np.nan)
    points = {}                                  # row → (z, h, dsz per body, path)
    groups = []                                  # (rows, z, h, Δσz per body) by depth
    columns = _columns_by_depth(soil, targets)
    # body by body: evaluate prepares each body's grid once for the columns of all depths
    by_body = [[evaluate(g, xyz).reshape(len(idx), len(z)) if len(z) else None
                for idx, z, _, xyz in columns] for g in body_grids]
    for k, (idx, z, h, _) in enumerate(columns):
        if len(z) == 0:
            per_state[idx] = 0.0
            groups.append((idx, None, None, None))
            continue
        sub = targets.iloc[idx]
        per_body = np.stack([body[k] for body in by_body], axis=1)         # (N, B, K)
        dsz = np.einsum("eb,nbk->nek", active, per_body)                   # (N, E, K)
        groups.append((idx, z, h, per_body))
        # Unloading beyond σ'v0 (a deep excavation) leaves 1-D consolidation: those
        # points get no settlement and a warning, the others are computed as usual.
        tension = np.any(soil.sigma_v0_eff(z) + dsz <= 0, axis=(1, 2))
        if tension.any():
            res.warnings.append(
                f"unloading exceeds σ'v0 below {', '.join(sub['point_id'][tension].astype(str)[:5])}"
                f"{' …' if tension.sum() > 5 else ''}; no settlement there (heave)")
        path = st.stress_path(soil, z, h, np.where(tension[:, None, None], 0.0, dsz))
        totals = path.settlement.sum(axis=2)
        totals[tension] = np.nan
        per_state[idx] = totals
        for local, row in enumerate(idx):
            if not tension[local]:
                points[row] = (z, h, per_body[local], _one(path, local))
    targets = targets.assign(settlement=per_state[:, -1])
    for k, e in stage_state.items():
        targets[f"settlement_stage{k}"] = per_state[:, e]
    if any(not s.loads for s in states):
        with np.errstate(invalid="ignore"):           # points in heave are all NaN
            peak = np.max(per_state, axis=1)
        targets["settlement_rebound"] = peak - per_state[:, -1]
    cols = [c for c in targets.columns if c.startswith("settlement")]
    key = ["receptor_id", "point_id"]
    merged = res.points.drop(columns=[c for c in cols if c in res.points], errors="ignore")
    # boreholes: the surface settlement belongs to the borehole, shown on its first point
    res.points = merged.merge(targets[key + cols], on=key, how="left")
    res.settlement_columns = SettlementColumns(targets, active, groups)
    res.buildings, res.pipes = structure_checks(site, targets)
    history.settlement_record(res, targets, states, points)


def _columns_by_depth(soil, targets: pd.DataFrame) -> list:
    """(rows, sublayer mid-depths z, thicknesses h, (N·K, 3) points) of the settlement
    columns, one entry per founding depth of `targets` (z empty where no compressible
    soil lies below)."""
    out = []
    for depth, idx in targets.groupby("depth").indices.items():
        z, h = st.sublayers(soil, top_depth=float(depth))
        sub = targets.iloc[idx]
        xyz = np.column_stack([np.repeat(sub["x"].to_numpy(), len(z)),
                               np.repeat(sub["y"].to_numpy(), len(z)),
                               np.tile(z, len(sub))])
        out.append((idx, z, h, xyz))
    return out


def _one(path: st.StressPath, n: int) -> st.StressPath:
    """The stress path of point `n` alone."""
    return st.StressPath(path.settlement[n:n + 1], path.sigma[n:n + 1], path.sigma_max[n:n + 1],
                         path.strain[n:n + 1], path.s0, path.sp, path.is_index)


# Δσz below this fraction of the largest applied pressure is not analysed on a plan grid
# (and not compared by the run's half-cell convergence check): the one stated cut-off
NEGLIGIBLE_FRACTION = 0.01
_BLOCK = 16                  # cells a side of a load block, nodes a side of a plan tile


def state_grids(site) -> list:
    """The load grid of every load state (timeline.load_states), in their order."""
    return [site.spec.load_grid(sum((b.pressure for b, on in zip(site.bodies, s.active) if on),
                                    site.spec.zeros()))
            for s in tl.load_states(site)]


def plan_settlement(site, nodes, slicer) -> dict:
    """Final settlement (m) at the ground surface over every plan grid, along the load
    history (a surcharge removed on its day rebounds on Cr, as at the receptor points).

    ``nodes(plan)`` is a plan grid's (y, x) DataArray of nodes (coordinates, CRS) and
    ``slicer(plan, grids, keep)(depths)`` Δσz of every load grid of `grids` (the load
    states) at the nodes `keep` (bool (y, x)) and `depths`: a list, one (depth, node)
    array per grid. `slicer` is asked once per plan grid (so it may keep what does not
    depend on the depth, such as the pressure transforms) and the depths come as many at
    a time as the plan grid has slices, so the memory stays what the run estimate counted
    for its slices. Sublayers settle independently (1-D compression), so their
    settlements add up by the rule the receptor points use. NaN (nodata) marks nodes where
    unloading exceeds σ'v0 (heave) and nodes in tiles where an upper bound on |Δσz|
    (`stress_bound`) stays below ``NEGLIGIBLE_FRACTION`` of the largest applied pressure at
    every sublayer: those are not analysed; attrs ``not_analysed_below_kpa`` and
    ``not_analysed_settlement_bound_m`` (the settlement of the column under that stress at
    every sublayer) state the cut-off.
    """
    z, h = st.sublayers(site.soil, top_depth=0.0)
    if len(z) == 0:
        return {}
    s0 = site.soil.sigma_v0_eff(z)
    grids = state_grids(site)
    cutoff = _cutoff(grids)
    out = {}
    for plan in site.plan_grids:
        surface = nodes(plan)
        keep = analysed_nodes(site, grids, surface.x.values, surface.y.values, z)
        values_at = slicer(plan, grids, keep)
        step = max(1, len(plan.depths))
        total = np.zeros(int(keep.sum()))
        tension = np.zeros(total.shape, bool)
        for k in range(0, len(z), step):
            part = slice(k, k + step)
            dsz = np.stack([v.T for v in values_at(tuple(float(d) for d in z[part]))],
                           axis=1)                                          # (N kept, E, K)
            heave = np.any(s0[part] + dsz <= 0, axis=(1, 2))
            path = st.stress_path(site.soil, z[part], h[part],
                                  np.where(heave[:, None, None], 0.0, dsz))
            total += path.settlement[:, -1].sum(axis=1)
            tension |= heave
        total[tension] = np.nan
        full = np.full(keep.shape, np.nan)
        full[keep] = total
        settled = surface.copy(data=full)
        settled.attrs = {"units": "m", "long_name": "final settlement of the ground surface",
                         "positive": "down"}       # not the Δσz slice's attributes it came from
        out[plan.name] = settled.assign_attrs(
            not_analysed_below_kpa=cutoff, not_analysed_nodes=int((~keep).sum()),
            not_analysed_settlement_bound_m=_column_settlement(site.soil, z, h, cutoff))
    return out


def _cutoff(grids) -> float:
    return NEGLIGIBLE_FRACTION * max(float(np.abs(g.pressure).max()) for g in grids)


def analysed_nodes(site, grids, x, y, z) -> np.ndarray:
    """The plan nodes (y, x) whose settlement is analysed under the load `grids`: where
    the bound on |Δσz| down to the deepest sublayer (`z`) reaches the cut-off."""
    return stress_bound(site, grids, x, y, float(z[-1])) >= _cutoff(grids)


def _column_settlement(soil, z, h, dsz: float) -> float:
    """Settlement (m) of the soil column under Δσz = `dsz` at every sublayer (settlement
    grows with Δσz, so it bounds every node whose Δσz stays below `dsz`)."""
    path = st.stress_path(soil, z, h, np.full((1, 1, len(z)), dsz))
    return float(path.settlement[0, -1].sum())


def stress_bound(site, grids, x, y, max_depth: float) -> np.ndarray:
    """Upper bound (kPa) on |Δσz| at depths 0 to `max_depth` below the nodes (y, x) of a
    plan lattice, any of the load `grids`, shape (len(y), len(x)).

    Each block of ``_BLOCK``² cells acts with its total |load| Q at its nearest distance d
    from a tile of ``_BLOCK``² nodes, through the point-load influence maximised over depth
    (`_point_bound`); a point-load influence falls with the distance, so every cell of the
    block gives at most that. A node within a loaded block's plan gets +inf.
    """
    spec = site.spec
    load = np.max([np.abs(g.pressure) for g in grids], axis=0) * spec.dx * spec.dy
    bj, bi = np.nonzero(_block_sums(load) > 0)
    q = _block_sums(load)[bj, bi]
    bx0, by0 = spec.x0 + bi * _BLOCK * spec.dx, spec.y0 + bj * _BLOCK * spec.dy
    bx1, by1 = bx0 + _BLOCK * spec.dx, by0 + _BLOCK * spec.dy
    tx0, tx1 = _tile_ranges(np.asarray(x, float))
    ty0, ty1 = _tile_ranges(np.asarray(y, float))
    gap_x = np.maximum(0.0, np.maximum(bx0[None, :] - tx1[:, None], tx0[:, None] - bx1[None, :]))
    gap_y = np.maximum(0.0, np.maximum(by0[None, :] - ty1[:, None], ty0[:, None] - by1[None, :]))
    tiles = np.empty((len(ty0), len(tx0)))
    for j in range(len(ty0)):                      # one row of tiles at a time bounds memory
        d = np.hypot(gap_x, gap_y[j][None, :])
        tiles[j] = _point_bound(d, max_depth, site.method, site.poisson) @ q
    return np.repeat(np.repeat(tiles, _BLOCK, axis=0), _BLOCK, axis=1)[:len(y), :len(x)]


def _block_sums(a: np.ndarray) -> np.ndarray:
    ny, nx = (-(-n // _BLOCK) * _BLOCK for n in a.shape)
    padded = np.zeros((ny, nx))
    padded[:a.shape[0], :a.shape[1]] = a
    return padded.reshape(ny // _BLOCK, _BLOCK, nx // _BLOCK, _BLOCK).sum(axis=(1, 3))


def _tile_ranges(v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """First and last coordinate of each run of ``_BLOCK`` nodes."""
    starts = np.arange(0, len(v), _BLOCK)
    return v[starts], v[np.minimum(starts + _BLOCK, len(v)) - 1]


def _point_bound(d: np.ndarray, max_depth: float, method: str, poisson) -> np.ndarray:
    """Largest Δσz/Q (1/m²) of a point load at plan distance `d` over depths 0 to
    `max_depth`: Boussinesq 3z³/(2πR⁵) peaks at z = √1.5·d, Westergaard
    ηz/(2π(η²z² + d²)^1.5) at ηz = d/√2 (both rise with z up to there); +inf at d = 0."""
    with np.errstate(divide="ignore", invalid="ignore"):
        if method == "westergaard":
            et = westergaard_eta(poisson or 0.0)
            zc = np.minimum(max_depth, d / (et * np.sqrt(2.0))) if et > 0 else 0.0 * d + max_depth
            c = et * zc
            out = c / (2.0 * np.pi * (c * c + d * d) ** 1.5)
        else:
            zc = np.minimum(max_depth, np.sqrt(1.5) * d)
            out = 3.0 * zc ** 3 / (2.0 * np.pi * (d * d + zc * zc) ** 2.5)
    return np.where(d > 0, out, np.inf)


class SettlementColumns(NamedTuple):
    """What the settlement step computed at its points, kept to recompute the settlement
    with one body scaled (run/decisions.py): the points, the bodies in place at each load
    state (E, B) and by point depth (rows, sublayer mid-depths z, thicknesses h, Δσz of
    each body (N, B, K); z None where no compressible soil lies below)."""

    targets: pd.DataFrame
    active: np.ndarray
    groups: list


class StructureCheck(NamedTuple):
    """One building or pipe check prepared on the settlement points (`rows` of the
    targets): everything but the settlement, so a check can be redone for other
    settlements (run/odds.py) without the point table."""

    kind: str
    receptor_id: str
    rows: np.ndarray                 # into the targets, in check order (pipes: chainage)
    xy: np.ndarray
    point_ids: list
    outline: np.ndarray | None       # buildings
    dsz: np.ndarray | None           # pipes: Δσz at the crown
    length: float | None             # pipes: the differential length
    limits: dict | None              # buildings: distortion limits


def structure_plan(site, targets: pd.DataFrame) -> list[StructureCheck]:
    """The building and pipe checks of `site` on the points of `targets`."""
    limits = {**DEFAULT_LIMITS, **site.settings.distortion_limits}
    rid = targets["receptor_id"].to_numpy()
    out = []
    for b in site.receptors.buildings:
        rows = np.flatnonzero(rid == b.id)
        out.append(StructureCheck("building", b.id, rows, targets[["x", "y"]].to_numpy()[rows],
                                  targets["point_id"].to_numpy()[rows].tolist(),
                                  np.asarray(b.geometry.exterior.coords), None, None, limits))
    chainage = targets["chainage"].to_numpy(float) if "chainage" in targets else None
    for pipe in site.receptors.pipes:
        rows = np.flatnonzero(rid == pipe.id)
        rows = rows[np.argsort(chainage[rows], kind="stable")]
        out.append(StructureCheck("pipe", pipe.id, rows, chainage[rows],
                                  [], None, targets["dsz"].to_numpy()[rows],
                                  pipe.differential_length, None))
    return out


def run_checks(plan: list[StructureCheck], settlement: np.ndarray) -> tuple[list, list]:
    """(buildings, pipes) of the prepared checks for a settlement (m) at every target;
    points in heave (NaN) are left out, and a receptor with fewer than two points left."""
    buildings, pipes = [], []
    for c in plan:
        s = settlement[c.rows]
        keep = np.isfinite(s)
        if keep.sum() < 2:
            continue
        if c.kind == "building":
            buildings.append(building_settlement(
                c.receptor_id, c.xy[keep], s[keep],
                point_ids=[p for p, k in zip(c.point_ids, keep) if k], limits=c.limits,
                outline=c.outline))
        else:
            pipes.append(pipe_settlement(c.receptor_id, c.xy[keep], s[keep], c.dsz[keep],
                                         c.length))
    return buildings, pipes


def structure_checks(site, targets: pd.DataFrame) -> tuple[list, list]:
    """The building and pipe checks (structures.py) on the settlement of `targets`."""
    return run_checks(structure_plan(site, targets), targets["settlement"].to_numpy(float))
