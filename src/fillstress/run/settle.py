"""The settlement steps of a run: effective stress and stress ratios at the receptor
points, consolidation settlement of every stage, the building and pipe checks and the
settlement–time curves (all SI)."""
from __future__ import annotations

import numpy as np
import pandas as pd

from .. import settlement as st
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
    """Settlement of every stage at the settlement points, the structure checks and the
    settlement–time curves; `evaluate(grid, xyz)` gives Δσz (kPa) at (N, 3) points."""
    site, soil = res.site, res.site.soil
    targets = _settlement_points(res.points)
    stage_grids = [site.load_grid(k) for k in site.stages]
    per_stage = np.zeros((len(targets), len(stage_grids)))
    by_layer_stage = {}
    for depth, idx in targets.groupby("depth").indices.items():
        sub = targets.iloc[idx]
        layers = column_layers(soil, sub["x"].to_numpy(), sub["y"].to_numpy(), float(depth),
                               stage_grids, evaluate)
        if layers is None:
            continue
        for s in range(len(stage_grids)):
            tension = np.isnan(layers[:, s]).any(axis=1)
            if tension.any():
                res.warnings.append(
                    f"stage {site.stages[s]}: unloading exceeds σ'v0 below "
                    f"{', '.join(sub['point_id'][tension].astype(str)[:5])}"
                    f"{' …' if tension.sum() > 5 else ''}; no settlement there (heave)")
        per_stage[idx] = layers.sum(axis=2)              # rows sum to the total settlement
        by_layer_stage[depth] = (idx, layers)
    targets = targets.assign(settlement=per_stage[:, -1])
    for s, k in enumerate(site.stages):
        targets[f"settlement_stage{k}"] = per_stage[:, s]
    cols = [c for c in targets.columns if c.startswith("settlement")]
    key = ["receptor_id", "point_id"]
    merged = res.points.drop(columns=[c for c in cols if c in res.points], errors="ignore")
    # boreholes: the surface settlement belongs to the borehole, shown on its first point
    res.points = merged.merge(targets[key + cols], on=key, how="left")
    _structure_checks(res, targets)
    _time_curves(res, targets, by_layer_stage)


def plan_settlement(site, slices_at) -> dict:
    """Final settlement (m) at the ground surface over every plan grid.

    Δσz of the final fill at the sublayer mid-depths of the whole profile comes from
    ``slices_at(plan, depths)`` (FFT slices on the plan grid's nodes, dims depth, y, x),
    as many depths at a time as the plan grid has slices, so the memory stays what the run
    estimate counted for its slices. Sublayers settle independently (1-D compression), so
    their settlements add up by the rule the receptor points use; nodes where unloading
    exceeds σ'v0 (heave) get NaN.
    """
    z, h = st.sublayers(site.soil, top_depth=0.0)
    if len(z) == 0:
        return {}
    s0 = site.soil.sigma_v0_eff(z)
    out = {}
    for plan in site.plan_grids:
        step = max(1, len(plan.depths))
        total = tension = da = None
        for k in range(0, len(z), step):
            part = slice(k, k + step)
            da = slices_at(plan, tuple(float(d) for d in z[part]))
            dsz = np.moveaxis(np.asarray(da.values, float), 0, -1).reshape(-1, len(z[part]))
            heave = np.any(s0[part] + dsz <= 0, axis=1)
            layers = st.settlement_by_layer(site.soil, z[part], h[part],
                                            np.where(heave[:, None], 0.0, dsz))
            total = layers.sum(axis=1) + (0.0 if total is None else total)
            tension = heave if tension is None else tension | heave
        total[tension] = np.nan
        surface = da.isel(depth=0, drop=True)
        out[plan.name] = surface.copy(data=total.reshape(surface.shape))
    return out


def _structure_checks(res, targets: pd.DataFrame) -> None:
    limits = {**DEFAULT_LIMITS, **res.site.settings.distortion_limits}
    targets = targets[targets["settlement"].notna()]     # points in heave have none
    for b in res.site.receptors.buildings:
        g = targets[targets["receptor_id"] == b.id]
        if len(g) < 2:
            continue
        res.buildings.append(building_settlement(
            b.id, g[["x", "y"]].to_numpy(), g["settlement"].to_numpy(),
            point_ids=g["point_id"].tolist(), limits=limits,
            outline=np.asarray(b.geometry.exterior.coords)))
    for pipe in res.site.receptors.pipes:
        g = targets[targets["receptor_id"] == pipe.id].sort_values("chainage")
        if len(g) < 2:
            continue
        res.pipes.append(pipe_settlement(pipe.id, g["chainage"].to_numpy(),
                                         g["settlement"].to_numpy(), g["dsz"].to_numpy(),
                                         pipe.differential_length))


def _time_curves(res, targets, by_layer_stage) -> None:
    """Settlement–time curves at each borehole and building centroid (stages in days)."""
    site = res.site
    if not any(L.compressible and L.cv_m2_per_yr for L in site.soil.layers):
        res.warnings.append("no compressible layer has cv: no settlement–time curves")
        return
    days = site.stage_start_days()
    cv, hdr = st.time_parameters(site.soil, no_cv="immediate")
    starts = np.asarray(days, float) / 365.25
    years = np.unique(np.r_[0.0, np.geomspace(1 / 365.25, 50.0, 120), starts])
    wanted = targets["role"].isin(["centroid", "borehole"]).to_numpy()
    for depth, (idx, layers) in by_layer_stage.items():
        for local, row in enumerate(idx):
            if not wanted[row] or np.isnan(layers[local]).any():
                continue
            inc = st.stage_increments(layers[local])
            curve = st.settlement_time_curve(inc, starts, years, cv, hdr)
            res.time_curves[targets.iloc[row]["receptor_id"]] = (years * 365.25, curve)
