"""The settlement steps of a run: effective stress and stress ratios at the receptor
points, consolidation settlement of every stage, the building and pipe checks and the
settlement–time curves (all SI)."""
from __future__ import annotations

from typing import NamedTuple

import numpy as np
import pandas as pd

from .. import settlement as st
from . import history, timeline as tl
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
    for depth, idx in targets.groupby("depth").indices.items():
        z, h = st.sublayers(soil, top_depth=float(depth))
        if len(z) == 0:
            per_state[idx] = 0.0
            groups.append((idx, None, None, None))
            continue
        sub = targets.iloc[idx]
        xyz = np.column_stack([np.repeat(sub["x"].to_numpy(), len(z)),
                               np.repeat(sub["y"].to_numpy(), len(z)),
                               np.tile(z, len(sub))])
        per_body = np.stack([evaluate(g, xyz).reshape(len(sub), len(z)) for g in body_grids],
                            axis=1)                                        # (N, B, K)
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


def _one(path: st.StressPath, n: int) -> st.StressPath:
    """The stress path of point `n` alone."""
    return st.StressPath(path.settlement[n:n + 1], path.sigma[n:n + 1], path.sigma_max[n:n + 1],
                         path.strain[n:n + 1], path.s0, path.sp, path.is_index)


def plan_settlement(site, slices_at) -> dict:
    """Final settlement (m) at the ground surface over every plan grid, along the load
    history (a surcharge removed on its day rebounds on Cr, as at the receptor points).

    Δσz at the sublayer mid-depths of the whole profile comes from
    ``slices_at(plan, depths, grid)`` (FFT slices of load grid `grid` on the plan grid's
    nodes, dims depth, y, x), one load state and as many depths at a time as the plan grid
    has slices, so the memory stays what the run estimate counted for its slices. Sublayers
    settle independently (1-D compression), so their settlements add up by the rule the
    receptor points use; nodes where unloading exceeds σ'v0 (heave) get NaN.
    """
    z, h = st.sublayers(site.soil, top_depth=0.0)
    if len(z) == 0:
        return {}
    s0 = site.soil.sigma_v0_eff(z)
    grids = [site.spec.load_grid(sum((b.pressure for b, on in zip(site.bodies, s.active) if on),
                                     site.spec.zeros()))
             for s in tl.load_states(site)]
    out = {}
    for plan in site.plan_grids:
        step = max(1, len(plan.depths))
        total = tension = da = None
        for k in range(0, len(z), step):
            part = slice(k, k + step)
            depths = tuple(float(d) for d in z[part])
            states = []
            for g in grids:
                da = slices_at(plan, depths, g)
                states.append(np.moveaxis(np.asarray(da.values, float), 0, -1).reshape(-1, len(depths)))
            dsz = np.stack(states, axis=1)                                  # (N, E, K)
            heave = np.any(s0[part] + dsz <= 0, axis=(1, 2))
            path = st.stress_path(site.soil, z[part], h[part],
                                  np.where(heave[:, None, None], 0.0, dsz))
            total = path.settlement[:, -1].sum(axis=1) + (0.0 if total is None else total)
            tension = heave if tension is None else tension | heave
        total[tension] = np.nan
        surface = da.isel(depth=0, drop=True)
        out[plan.name] = surface.copy(data=total.reshape(surface.shape))
    return out


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
