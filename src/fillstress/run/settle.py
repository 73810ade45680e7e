"""The settlement steps of a run: effective stress and stress ratios at the receptor
points, consolidation settlement of every stage, the building and pipe checks and the
settlement–time curves (all SI)."""
from __future__ import annotations

import numpy as np
import pandas as pd

from .. import settlement as st
from . import timeline as tl
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
    fraction = res.site.config["soil"]["influence_fraction"]
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


def settlement_results(res, evaluate) -> None:
    """Settlement along the load history at the settlement points (stress path through the
    load states), the structure checks, the settlement–time curves and the calculation
    record; `evaluate(grid, xyz)` gives Δσz (kPa) at (N, 3) points."""
    site, soil = res.site, res.site.soil
    targets = _settlement_points(res.points)
    states = tl.load_states(site)
    _warn_stage_days(res)
    active = np.array([s.active for s in states], dtype=float)            # (E, B)
    body_grids = [site.spec.load_grid(b.pressure) for b in site.bodies]
    stage_state = {s.stage: e for e, s in enumerate(states) if s.stage is not None}
    per_state = np.full((len(targets), len(states)), np.nan)
    points = {}                                  # row → (z, h, dsz per body, path)
    for depth, idx in targets.groupby("depth").indices.items():
        z, h = st.sublayers(soil, top_depth=float(depth))
        if len(z) == 0:
            per_state[idx] = 0.0
            continue
        sub = targets.iloc[idx]
        xyz = np.column_stack([np.repeat(sub["x"].to_numpy(), len(z)),
                               np.repeat(sub["y"].to_numpy(), len(z)),
                               np.tile(z, len(sub))])
        per_body = np.stack([evaluate(g, xyz).reshape(len(sub), len(z)) for g in body_grids],
                            axis=1)                                        # (N, B, K)
        dsz = np.einsum("eb,nbk->nek", active, per_body)                   # (N, E, K)
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
    _structure_checks(res, targets)
    from . import history
    history.settlement_record(res, targets, states, points)


def _one(path: st.StressPath, n: int) -> st.StressPath:
    """The stress path of point `n` alone."""
    return st.StressPath(path.settlement[n:n + 1], path.sigma[n:n + 1], path.sigma_max[n:n + 1],
                         path.strain[n:n + 1], path.s0, path.sp, path.is_index)


def _warn_stage_days(res) -> None:
    site = res.site
    days = (site.config.get("settlement") or {}).get("stage_days")
    if days and len(days) != len(site.stages):
        res.warnings.append(f"[settlement] stage_days gives {len(days)} start time(s) for "
                            f"{len(site.stages)} stage(s); missing stages start with the "
                            "last given, extra times are ignored")


def _structure_checks(res, targets: pd.DataFrame) -> None:
    s_cfg = res.site.config.get("settlement") or {}
    limits = {k: s_cfg[k] for k in ("limit_no_cracking", "limit_first_cracking",
                                    "limit_structural_damage") if s_cfg.get(k) is not None}
    targets = targets[targets["settlement"].notna()]     # points in heave have none
    for b in res.site.receptors.get("buildings", []):
        g = targets[targets["receptor_id"] == b["id"]]
        if len(g) < 2:
            continue
        res.buildings.append(building_settlement(
            b["id"], g[["x", "y"]].to_numpy(), g["settlement"].to_numpy(),
            point_ids=g["point_id"].tolist(), limits=_limit_names(limits),
            outline=np.asarray(b["geometry"].exterior.coords)))
    for pipe in res.site.receptors.get("pipes", []):
        g = targets[targets["receptor_id"] == pipe["id"]].sort_values("chainage")
        if len(g) < 2:
            continue
        res.pipes.append(pipe_settlement(pipe["id"], g["chainage"].to_numpy(),
                                         g["settlement"].to_numpy(), g["dsz"].to_numpy(),
                                         pipe["differential_length"]))


def _limit_names(limits: dict) -> dict:
    """Site-file limit keys → the Bjerrum (1963) limit names of structures.py, with the
    Skempton & MacDonald (1956) limits beside them."""
    keys = {"limit_no_cracking": "no_cracking", "limit_first_cracking": "panel_wall_cracking",
            "limit_structural_damage": "structural_damage"}
    return {**DEFAULT_LIMITS, **{keys[k]: v for k, v in limits.items()}}
