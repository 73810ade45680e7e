"""A run: from a site model to stresses, settlements, checks and a complete results folder.

`compute` does the numbers (no files); `write_results` writes them; `run_site_file` joins
both inside a results-folder transaction. `check_site_file` shows what a run would do.
"""
from __future__ import annotations

import re
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from .. import __version__
from ..errors import InputError
from ..progress import silent
from ..site.build import Site, load_site

ASSUMPTIONS = (
    "Vertical stress increase from linear elasticity: a homogeneous, isotropic, linear-elastic "
    "half-space (Boussinesq) or a half-space reinforced by thin rigid horizontal layers "
    "(Westergaard); the fill is a flexible surface load; each plan cell is a uniformly loaded "
    "rectangle and the cells add by superposition; fill stiffness and embedment are ignored. "
    "Settlement by one-dimensional consolidation (Terzaghi) of horizontal layers under the "
    "computed Δσz, with time by Terzaghi's 1-D theory for instantly placed stages.")
CAUTIONS = (
    "Results are for checking by a licensed geotechnical engineer; local codes and regulations "
    "govern. The elastic solutions do not represent stiff crusts over soft layers, rigid "
    "foundations, large strains, bearing failure or dynamic loads; check stability separately.")


# --- the numbers ----------------------------------------------------------------------
@dataclass
class RunResults:
    site: Site
    grid: object                          # LoadGrid of the final stage
    points: pd.DataFrame                  # every receptor point with its results (SI)
    slices: dict = field(default_factory=dict)       # plan-grid name → DataArray (kPa)
    buildings: list = field(default_factory=list)    # structures.BuildingSettlement
    pipes: list = field(default_factory=list)        # structures.PipeSettlement
    profiles: list = field(default_factory=list)     # dicts: receptor_id, influence depth
    time_curves: dict = field(default_factory=dict)  # receptor_id → (years, settlement m)
    convergence: dict = field(default_factory=dict)
    timings: dict = field(default_factory=dict)
    warnings: list = field(default_factory=list)     # shown by the command and the summary


def stress(site: Site, grid, xyz: np.ndarray, client=None) -> np.ndarray:
    """Δσz (kPa) at (N, 3) points for a load grid, with the site's method: direct
    summation, or the far-field method for very large problems (solve.auto), on Dask
    workers when a client is given."""
    from ..solve.auto import stress_at_points as serial
    if len(xyz) == 0:
        return np.zeros(0)
    if client is not None:
        from ..solve.distributed import distributed_points
        return distributed_points(grid, xyz, site.method, site.poisson, client=client)
    return serial(grid, xyz, site.method, site.poisson)


def compute(site: Site, progress=silent, client=None) -> RunResults:
    """Every number of a run, in SI; nothing is written.

    Parameters
    ----------
    site : Site
        From :func:`fillstress.site.build.load_site`.
    progress : progress factory, optional
        See :mod:`fillstress.progress`; silent by default.
    client : distributed.Client, optional
        Spread the point and slice work over Dask workers (results equal the serial path).

    Returns
    -------
    RunResults
        ``points`` (every receptor point with ``dsz`` in kPa and, with a soil profile,
        ``sigma_v0``, ``stress_ratio``, ``settlement`` in m), ``slices`` (plan grids),
        ``buildings``/``pipes`` checks, ``time_curves`` and ``convergence``.

    Examples
    --------
    >>> from fillstress.examples import example_site
    >>> res = compute(load_site(example_site("preload_surcharge")))
    >>> centre = res.points[res.points["point_id"] == "BH-01-d4"]
    >>> round(float(centre["dsz"].iloc[0]), 1)     # kPa at 2 m below the pad centre
    104.3
    """
    t0 = time.perf_counter()
    grid = site.load_grid()
    pts = site.points.copy()
    steps = 2 + len(site.plan_grids) + (2 if site.soil is not None else 0) + _conv_steps(site)
    with progress("computing", steps) as bar:
        pts["dsz"] = stress(site, grid, pts[["x", "y", "depth"]].to_numpy(float), client)
        bar.advance()
        res = RunResults(site, grid, pts)
        for plan in site.plan_grids:
            res.slices[plan.name] = _plan_slices(site, grid, plan, client)
            bar.advance()
        if site.soil is not None:
            _soil_results(res)
            bar.advance()
            _settlement_results(res, client)
            bar.advance()
        if _conv_steps(site):
            res.convergence = convergence_check(site, pts, client)
            bar.advance()
        bar.advance()
    res.timings["compute_s"] = time.perf_counter() - t0
    return res


def _conv_steps(site: Site) -> int:
    return int(bool((site.config.get("grid") or {}).get("convergence_check", True))
               and len(site.points) > 0)


def _plan_slices(site: Site, grid, plan, client=None):
    """FFT slices on the cell centres of the analysis grid, cut to the plan extent."""
    from ..solve import stress_slices
    from .plan import memory_cap, plan_pad, slices_need_tiles
    pad = plan_pad(site, plan)
    cap = memory_cap(site) if slices_need_tiles(site, plan) else None
    if client is not None:
        from ..solve.distributed import distributed_slices
        da = distributed_slices(grid, plan.depths, site.method, site.poisson, client=client,
                                pad=pad, memory_cap=cap)
    elif cap is not None:
        from ..solve.tiled import tiled_slices
        da = tiled_slices(grid, plan.depths, site.method, site.poisson, pad=pad,
                          memory_cap=cap)
    else:
        da = stress_slices(grid, plan.depths, method=site.method, poisson=site.poisson,
                           pad=pad)
    step = max(1, round(plan.spacing / site.spec.dx))
    return da.sel(x=slice(plan.xmin, plan.xmax), y=slice(plan.ymin, plan.ymax)).isel(
        x=slice(None, None, step), y=slice(None, None, step))


def convergence_check(site: Site, pts: pd.DataFrame, client=None) -> dict:
    """Recompute the receptor stresses on a grid of half the cell size; report the largest
    relative change where Δσz is at least 1 % of the largest applied pressure."""
    fine_spec = site.spec.refined(2)
    fine = site.load_grid(spec=fine_spec)
    xyz = pts[["x", "y", "depth"]].to_numpy(float)
    coarse_vals = pts["dsz"].to_numpy()
    fine_vals = stress(site, fine, xyz, client)
    qmax = float(np.abs(fine.pressure).max()) or 1.0
    mask = np.abs(fine_vals) >= 0.01 * qmax
    rel = np.abs(coarse_vals - fine_vals)[mask] / np.abs(fine_vals[mask]) if mask.any() else [0.0]
    k = int(np.argmax(rel))
    where = pts[mask].iloc[k]["point_id"] if mask.any() else ""
    return {"cell": site.spec.dx, "fine_cell": fine_spec.dx, "points_compared": int(mask.sum()),
            "max_relative_change": float(np.max(rel)), "at_point": str(where),
            "threshold_fraction_of_qmax": 0.01}


def _soil_results(res: RunResults) -> None:
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
    from ..settlement import influence_depth
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


def _settlement_results(res: RunResults, client=None) -> None:
    from .. import settlement as st
    site, soil = res.site, res.site.soil
    targets = _settlement_points(res.points)
    stage_grids = [site.load_grid(k) for k in site.stages]
    per_stage = np.zeros((len(targets), len(stage_grids)))
    by_layer_stage = {}
    for depth, idx in targets.groupby("depth").indices.items():
        z, h = st.sublayers(soil, top_depth=float(depth))
        if len(z) == 0:
            continue
        sub = targets.iloc[idx]
        xyz = np.column_stack([np.repeat(sub["x"].to_numpy(), len(z)),
                               np.repeat(sub["y"].to_numpy(), len(z)),
                               np.tile(z, len(sub))])
        s0 = soil.sigma_v0_eff(z)
        for s, g in enumerate(stage_grids):
            dsz = stress(site, g, xyz, client).reshape(len(sub), len(z))
            # Unloading beyond σ'v0 (a deep excavation) leaves 1-D consolidation: those
            # points get no settlement and a warning, the others are computed as usual.
            tension = np.any(s0 + dsz <= 0, axis=1)
            if tension.any():
                res.warnings.append(
                    f"stage {site.stages[s]}: unloading exceeds σ'v0 below "
                    f"{', '.join(sub['point_id'][tension].astype(str)[:5])}"
                    f"{' …' if tension.sum() > 5 else ''}; no settlement there (heave)")
            layers = st.settlement_by_layer(soil, z, h, np.where(tension[:, None], 0.0, dsz))
            layers[tension] = np.nan
            per_stage[idx, s] = layers.sum(axis=1)       # rows sum to the total settlement
            by_layer_stage.setdefault(depth, []).append(layers)
        by_layer_stage[depth] = (idx, np.stack(by_layer_stage[depth], axis=1))  # (N, S, L)
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


def _structure_checks(res: RunResults, targets: pd.DataFrame) -> None:
    from ..structures import building_settlement, pipe_settlement
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
            point_ids=g["point_id"].tolist(), limits=_limit_names(limits)))
    for pipe in res.site.receptors.get("pipes", []):
        g = targets[targets["receptor_id"] == pipe["id"]].sort_values("chainage")
        if len(g) < 2:
            continue
        res.pipes.append(pipe_settlement(pipe["id"], g["chainage"].to_numpy(),
                                         g["settlement"].to_numpy(), g["dsz"].to_numpy(),
                                         pipe["differential_length"]))


def _limit_names(limits: dict) -> dict:
    """Site-file limit keys → the Bjerrum (1963) limit names of structures.py."""
    from ..structures import BJERRUM_1963_LIMITS
    keys = {"limit_no_cracking": "no_cracking", "limit_first_cracking": "panel_wall_cracking",
            "limit_structural_damage": "structural_damage"}
    return {**BJERRUM_1963_LIMITS, **{keys[k]: v for k, v in limits.items()}}


def _time_curves(res: RunResults, targets, by_layer_stage) -> None:
    """Settlement–time curves at each borehole and building centroid (stages in days)."""
    from .. import settlement as st
    site = res.site
    if not any(L.compressible and L.cv_m2_per_yr for L in site.soil.layers):
        res.warnings.append("no compressible layer has cv: no settlement–time curves")
        return
    days = list((site.config.get("settlement") or {}).get("stage_days") or [0.0])
    if len(days) != len(site.stages):
        res.warnings.append(f"[settlement] stage_days gives {len(days)} start time(s) for "
                            f"{len(site.stages)} stage(s); missing stages start with the "
                            "last given, extra times are ignored")
        days = (days + [days[-1]] * len(site.stages))[:len(site.stages)]
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


# --- the files ------------------------------------------------------------------------
def run_site_file(path, out=None, *, overwrite=False, report=True, progress=silent,
                  workers=None, scheduler=None) -> "RunSummary":
    """Load a site file, compute, and write a complete results folder.

    Parameters
    ----------
    path : path-like
        The site file (TOML).
    out : path-like, optional
        Results folder; default ``results-<site file stem>`` in the current folder. An
        existing folder is refused unless `overwrite`, and then replaced only once the new
        one is complete.
    report : bool
        Also write ``report.html`` and ``scene.html``.
    progress : progress factory, optional
    workers, scheduler : int or str, optional
        Run on a local Dask cluster of `workers` processes or on the scheduler at
        `scheduler`.

    Returns
    -------
    RunSummary

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from fillstress.examples import example_site
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "res"
    >>> summary = run_site_file(example_site("preload_surcharge"), out, report=False)
    >>> (out / "manifest.json").is_file(), (out / "boreholes_points.csv").is_file()
    (True, True)
    """
    from ..io.atomic import ResultsFolder
    from .plan import check_fits
    site = load_site(path)
    out = Path(out) if out else Path(f"results-{Path(path).stem}")
    folder = ResultsFolder(out, overwrite=overwrite)      # refuses an existing folder now
    check_fits(site)                                      # refuses, with numbers, before work
    if workers and scheduler:
        raise InputError("give --workers or --scheduler, not both", argument="--workers")
    if workers or scheduler:
        from ..solve.distributed import connect
        with connect(scheduler or workers) as client:
            res = compute(site, progress, client)
    else:
        res = compute(site, progress)
    with folder:
        t0 = time.perf_counter()
        write_results(res, folder, report=report, progress=progress)
        res.timings["write_s"] = time.perf_counter() - t0
    return RunSummary(res, out)


def write_results(res: RunResults, folder, *, report=True, progress=silent) -> None:
    from . import files as writers
    writers.write_all(res, folder, report=report, progress=progress,
                      assumptions=ASSUMPTIONS, cautions=CAUTIONS, version=__version__)


# --- what the command prints -----------------------------------------------------------
@dataclass
class RunSummary:
    results: RunResults
    folder: Path

    def tables(self):
        from .files import summary_tables
        return summary_tables(self.results)

    def closing_lines(self):
        r = self.results
        lines = []
        if r.convergence:
            c = r.convergence
            u = r.site.units
            lines.append(f"convergence: halving the cell ({u.length_out(c['cell']):g} → "
                         f"{u.length_out(c['fine_cell']):g} {u.length}) "
                         f"changes Δσz by at most {100 * c['max_relative_change']:.2f} % "
                         f"(at {c['at_point']})")
        lines += [f"warning: {w}" for w in r.warnings]
        lines.append(f"results written to {self.folder}")
        lines.append(CAUTIONS.split(";")[0] + ".")
        return lines


@dataclass
class CheckReport:
    site: Site

    def tables(self):
        from .files import body_rows, check_rows
        return [body_rows(self.site), check_rows(self.site)]

    def closing_lines(self):
        return ["site file is valid; nothing was computed or written"]


def check_site_file(path) -> CheckReport:
    """Validate a site file and describe the run without computing it.

    Examples
    --------
    >>> from fillstress.examples import example_site
    >>> report = check_site_file(example_site("stockpile_yard"))
    >>> [row[0] for row in report.tables()[0][2]]
    ['ore_east', 'coal_west', 'aggregate_north']
    """
    return CheckReport(load_site(path))


def stress_at_points(path, xyz, stage=None):
    """(title, columns, rows) of Δσz at x, y, depth triples given in site units."""
    site = load_site(path)
    arr = np.asarray(xyz, float).reshape(-1, 3)
    u = site.units
    pts = np.column_stack([arr[:, 0] * site.metres_per_unit, arr[:, 1] * site.metres_per_unit,
                           u.length_si(arr[:, 2])])
    if np.any(pts[:, 2] < 0):
        raise InputError("depth must be >= 0 below the existing ground", argument="xyz")
    dsz = stress(site, site.load_grid(stage), pts)
    rows = [[f"{a:.2f}", f"{b:.2f}", f"{c:.2f}", f"{u.pressure_out(d):.2f}"]
            for (a, b, c), d in zip(arr, dsz)]
    return (f"Δσz, {site.name} (stage {stage or site.stages[-1]}, {site.method})",
            ["x", "y", f"depth ({u.length})", f"Δσz ({u.pressure})"], rows)


def slug(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9_-]+", "_", text).strip("_") or "site"
