"""Write a run's results into its results folder (docs/results-folder.md), and build its
result tables. Values are SI inside; the io writers convert to the site's units.

Plan coordinates are written in site-CRS units: the io writers take internal metres and
the site CRS and scale x, y by the CRS's own axis unit (the US survey foot is not the
international foot). The VTK writers know no CRS, so their coordinates are pre-scaled.
"""
from __future__ import annotations

import contextlib
import importlib
import json
import math

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from ..grid import GridSpec
from ..io import geotiff, manifest, netcdf, tables, vtk
from ..io.atomic import write_atomic
from ..progress import describe, open_bar, silent
from ..report.forked import make_all
from ..report.html import write_run_report
from ..site.receptors import summarise
from ..scene_page import export_scene_html
from ..site.alignment import format_station

KIND_FILES = {"building": "buildings", "pipe": "pipes", "borehole": "boreholes"}


# --- coordinates for output -----------------------------------------------------------
def _coord_scale(site) -> float:
    """Factor that makes a unit-converting writer emit site-CRS coordinates."""
    return site.units.length_to_m / site.metres_per_unit


def _vtk_points(site, points: pd.DataFrame) -> pd.DataFrame:
    """x, y scaled so the VTK writers' unit-system conversion yields site-CRS units."""
    k = _coord_scale(site)
    return points.assign(x=points["x"] * k, y=points["y"] * k)


def _vtk_slice(site, da):
    k = _coord_scale(site)
    return da.assign_coords(x=da["x"] * k, y=da["y"] * k)


# --- tables ---------------------------------------------------------------------------
def bodies_table(site) -> pd.DataFrame:
    """One row per body; surface-difference bodies also give the cut found and the area
    where both surfaces were compared."""
    cuts = site.cut_reports
    rows = []
    for b in site.bodies:
        cut = cuts.get(b.name)
        rows.append({"body": b.name, "kind": b.kind, "stage": b.stage,
                     "excavation": b.excavation, "unit_weight": b.unit_weight,
                     "volume": b.volume, "footprint_area": b.footprint_area,
                     "max_height": b.max_height, "total_load": b.total_load,
                     "cut_volume": cut.volume_cut if cut else np.nan,
                     "cut_treated_as": cut.cut if cut else "",
                     "compared_area": cut.area_compared if cut else np.nan})
    return pd.DataFrame(rows)


# Output column ← field of the structures.py row (SI; the writers convert units).
BUILDING_COLUMNS = {"receptor_id": "receptor_id", "n_points": "n_points",
                    "settlement_max": "settlement_max_m", "settlement_min": "settlement_min_m",
                    "differential_settlement": "differential_m",
                    "angular_distortion": "angular_distortion", "tilt": "tilt",
                    "deflection_ratio": "deflection_ratio"}
PIPE_COLUMNS = {"receptor_id": "receptor_id", "n_points": "n_points",
                "settlement_max": "settlement_max_m", "chainage_at_max": "chainage_at_max_m",
                "differential_length": "differential_length_m",
                "differential_settlement": "differential_max_m",
                "differential_from": "differential_from_chainage_m",
                "differential_to": "differential_to_chainage_m", "gradient_max": "gradient_max",
                "angular_change_max": "angular_change_max",
                "curvature_radius_min": "curvature_radius_min_m"}


def _renamed(items, columns: dict, extra=lambda row: {}) -> pd.DataFrame:
    rows = []
    for item in items:
        r = item.as_row()
        rows.append({**{out: r[src] for out, src in columns.items()}, **extra(r)})
    return pd.DataFrame(rows)


def _building_flags(r: dict) -> dict:
    return {"distortion_between": f"{r['distortion_point_a']}–{r['distortion_point_b']}",
            "worst_limit_reached": r["worst_limit"] or "none",
            **{k: v for k, v in r.items() if k.startswith("exceeds_")}}


def building_summary(res) -> pd.DataFrame:
    return _renamed(res.buildings, BUILDING_COLUMNS, _building_flags)


def pipe_summary(res) -> pd.DataFrame:
    return _renamed(res.pipes, PIPE_COLUMNS)


EXTRA_QUANTITIES = {"chainage_at_max": "length", "differential_length": "length",
                    "differential_from": "length", "differential_to": "length",
                    "gradient_max": None, "influence_depth": "length", "fraction": None,
                    "depth_at_max": "length", "elevation": "length", "cut_volume": "volume",
                    "compared_area": "area", "stress_ratio_max": None, "tilt": None,
                    "deflection_ratio": None, "angular_change_max": None,
                    "curvature_radius_min": "length", "utilisation_max": None,
                    "utilisation": None, "value": None, "limit_value": None}


def stress_summary(points: pd.DataFrame) -> pd.DataFrame:
    """Per receptor: the largest Δσz and the point, x, y, depth where it occurs (SI), and
    the largest settlement and stress ratio where they were computed."""
    out = summarise(points, "dsz").drop(columns="receptor_kind").rename(
        columns={"point_id": "point_at_max", "depth": "depth_at_max"})
    by = points.groupby("receptor_id", sort=False)
    for col in ("settlement", "stress_ratio"):
        if col in points:            # pandas max skips NaN (profile points, heave)
            out[f"{col}_max"] = by[col].max().reindex(out["receptor_id"]).to_numpy()
    return out


def kind_summary(res, kind: str) -> pd.DataFrame:
    pts = res.points[res.points["receptor_kind"] == kind]
    if kind == "building":
        # the building's Δσz is the one over its footprint at the foundation; the
        # vertical profile below it (role "profile") is in the points table
        pts = pts[pts["role"] != "profile"]
    summary = stress_summary(pts)
    extra = {"building": building_summary, "pipe": pipe_summary}.get(kind)
    if extra is not None and (res.buildings if kind == "building" else res.pipes):
        more = extra(res).drop(columns=["n_points", "settlement_max"])
        summary = summary.merge(more, on="receptor_id", how="left")
    if res.profiles:
        prof = pd.DataFrame(res.profiles)
        summary = summary.merge(prof, on="receptor_id", how="left")
    used = res.limits.by_receptor(kind) if res.limits is not None else None
    if used is not None and len(used):
        summary = summary.merge(used, on="receptor_id", how="left")
    return summary


# --- writing --------------------------------------------------------------------------
def column_quantities(frame: pd.DataFrame) -> dict:
    """Quantity of every numeric column: names carry it (settlement_*, *_at_max, …)."""
    q = dict(EXTRA_QUANTITIES)
    for c in frame.columns:
        if c in q or c in tables.DEFAULT_QUANTITIES:
            continue
        if c.startswith(("settlement", "differential_settlement")):
            q[c] = "settlement"
        elif c.startswith(("exceeds_", "stress_ratio")):
            q[c] = None
    return q


def write_all(res, folder, *, report=True, progress=silent, assumptions="", cautions="",
              version="") -> None:
    site = res.site
    steps = 4 + (2 if report else 0)
    with open_bar(progress, "writing results", steps) as bar:
        describe(bar, "tables, rasters, NetCDF cube, VTK")   # written side by side
        _write_side_by_side(res, folder, version, report)
        bar.advance(2)
        describe(bar, "summary")
        _write_summary_json(res, folder, assumptions, cautions)
        bar.advance()
        fields = dict(settings=_settings(site), units=site.units,
                      inputs=list(site.input_files), site_file=site.path,
                      crs=site.crs, grid=site.spec, assumptions=assumptions,
                      cautions=cautions)
        if report:
            # The report and scene read the folder through the same contract as any
            # finished results folder, manifest included; the final manifest then
            # checksums them too.
            manifest.write_manifest(folder, **fields)
            _write_report_and_scene(folder, bar, site)
        describe(bar, "manifest")
        manifest.write_manifest(folder, **fields)
        bar.advance()


def _write_side_by_side(res, folder, version, report) -> None:
    """The tables, rasters, cube and VTK files: shared with a forked second process where
    there are two cores (report.forked), the slowest first, the tables last (whichever
    process is free takes them). The libraries of the rasters, cube and VTK files, and
    the report's, are loaded here first: once, not in both processes, and found loaded
    by the report and the scene after."""
    site = res.site
    wanted = {"rasterio": _output(site, "geotiff"), "h5netcdf": _output(site, "netcdf"),
              "pyvista": _output(site, "vtk"),
              "matplotlib.backends.backend_agg": report and _output(site, "report")}
    for module in (m for m, used in wanted.items() if used):
        with contextlib.suppress(ImportError):          # its writer says what is missing
            importlib.import_module(module)
    make_all({"tables": lambda: _write_tables(res, folder),
              "rasters": lambda: _write_rasters(res, folder),
              "slice rasters": lambda: _write_slice_rasters(res, folder),
              "cube": lambda: _write_cube(res, folder, version),
              "vtk": lambda: _write_vtk(res, folder)},
             first=("vtk", "cube", "slice rasters", "rasters"))


def _write_tables(res, folder) -> None:
    site, u = res.site, res.site.units
    bodies = bodies_table(site)
    tables.write_table_csv(folder.path("bodies.csv"), bodies, u, column_quantities(bodies))
    layers = {}
    for kind, name in KIND_FILES.items():
        pts = res.points[res.points["receptor_kind"] == kind]
        if pts.empty:
            continue
        q = column_quantities(pts)
        tables.write_table_csv(folder.path(f"{name}_points.csv"), pts, u, q, crs=site.crs)
        tables.write_points_geojson(folder.path(f"{name}_points.geojson"), pts, u,
                                    crs=site.crs, quantities=q, **_geojson_options(site))
        summary = kind_summary(res, kind)
        tables.write_table_csv(folder.path(f"{name}_summary.csv"), summary, u,
                               column_quantities(summary), crs=site.crs)
        layers[name] = _receptor_layer(res, kind, name, summary)
        tables.write_geojson(folder.path(f"{name}.geojson"), layers[name], u, crs=site.crs,
                             quantities=column_quantities(layers[name].drop(columns="geometry")),
                             **_geojson_options(site))
        layers[f"{name}_points"] = gpd.GeoDataFrame(
            pts.reset_index(drop=True), geometry=gpd.points_from_xy(pts["x"], pts["y"]))
    if layers and _output(site, "geopackage"):
        tables.write_geopackage(folder.path("layers.gpkg"), layers, u, crs=site.crs,
                                quantities={k: column_quantities(v.drop(columns="geometry"))
                                            for k, v in layers.items()})
    write_corridor_tables(res, folder)
    if res.limits is not None and res.limits.rows:   # values converted row by row
        tables.write_table_csv(folder.path("limits.csv"), res.limits.table(u), u,
                               column_quantities(pd.DataFrame()))
    if res.max_heights:
        from .decisions import table
        heights = table(res.max_heights)
        tables.write_table_csv(folder.path("max_heights.csv"), heights, u,
                               {"scale": None, "tolerance": None})
    if res.odds is not None:                          # values converted row by row
        from .odds import TABLE_QUANTITIES
        for name, frame in (("odds", res.odds.table(u)),
                            ("odds_parameters", res.odds.parameter_table(u)),
                            ("odds_convergence", res.odds.convergence_table())):
            tables.write_table_csv(folder.path(f"{name}.csv"), frame, u, TABLE_QUANTITIES)
    if res.headroom is not None:
        _write_headroom_tables(res, folder)
    if res.time_curves:
        rows = [{"receptor_id": rid, "days": d, "settlement": s}
                for rid, (days, curve) in res.time_curves.items() for d, s in zip(days, curve)]
        curves = _with_degree(pd.DataFrame(rows), res.record.get("consolidation_times"))
        tables.write_table_csv(folder.path("settlement_time.csv"), curves, u,
                               {"days": None, "settlement": "settlement", "degree": None})
    for name, frame in res.record.items():
        tables.write_table_csv(folder.path(RECORD_FILES[name]), frame, u, _record_quantities(frame))


# The settlement calculation record (run/history.py) → file names.
RECORD_FILES = {"sublayers": "settlement_sublayers.csv", "load_states": "load_states.csv",
                "consolidation_times": "consolidation_times.csv", "preload": "preload.csv",
                "drain_design": "drain_design.csv", "soil_profile": "soil_profile.csv",
                "drains": "drains.csv"}


def _record_quantities(frame: pd.DataFrame) -> dict:
    q = column_quantities(frame)
    for c in frame.columns:
        if c.startswith(("depth_", "spacing")) or c in ("dw", "de"):
            q[c] = "length"
        elif c.startswith(("sigma_", "dsz_")) or c in ("modulus", "unloading_modulus"):
            q[c] = "pressure"
        elif c == "mv":
            q[c] = "compressibility"
        elif c in ("cv", "ch"):
            q[c] = "consolidation"
        elif c.endswith("unit_weight"):
            q[c] = "unit_weight"
        elif c not in q and c not in tables.DEFAULT_QUANTITIES and pd.api.types.is_numeric_dtype(frame[c]):
            q[c] = None                    # days, strains, degrees, counts: no unit
    return q


def _with_degree(curves: pd.DataFrame, times) -> pd.DataFrame:
    """U = s(t) / final primary settlement beside each settlement–time row."""
    if times is None or curves.empty:
        return curves
    final = times.set_index("receptor_id")["settlement_final"]
    with np.errstate(divide="ignore", invalid="ignore"):
        degree = curves["settlement"] / curves["receptor_id"].map(final).to_numpy()
    return curves.assign(degree=degree)


def _receptor_layer(res, kind, name, summary) -> gpd.GeoDataFrame:
    """Receptor geometry (footprints, pipe lines, borehole points) with its results: the
    receptor's row of `summary` (Δσz, settlement, tilt, distortion, ...)."""
    items = res.site.receptors.by_table()[name]
    if kind == "building":
        attrs = [{"receptor_id": r.id, "foundation_depth": r.depth} for r in items]
    elif kind == "pipe":
        attrs = [{"receptor_id": r.id, "depth": float(np.max(r.depth)),
                  "diameter": r.diameter} for r in items]
    else:
        attrs = [{"receptor_id": r.id, "top_depth": r.top, "bottom_depth": r.bottom}
                 for r in items]
    frame = gpd.GeoDataFrame(attrs, geometry=[r.geometry for r in items])
    return frame.merge(summary.drop(columns=["x", "y"], errors="ignore"), on="receptor_id",
                       how="left")


def _write_rasters(res, folder) -> None:
    """The rasters on the analysis lattice: fill, surface pressure, existing ground and
    the headroom maps."""
    site, u = res.site, res.site.units
    if not _output(site, "geotiff"):
        return
    spec = site.spec                      # internal metres; the writer converts to CRS units
    geotiff.write_geotiff(folder.path("fill_thickness.tif"), site.fill_thickness(), spec,
                          quantity="length", units=u, description="fill thickness",
                          crs=site.crs)
    geotiff.write_geotiff(folder.path("surface_pressure.tif"), res.grid.pressure, spec,
                          quantity="pressure", units=u, description="surface pressure",
                          crs=site.crs)
    ground = site.ground_elevation_grid()
    if ground is not None:
        geotiff.write_geotiff(folder.path("ground_elevation.tif"), ground, spec,  # NaN = no data
                              quantity="length", units=u, description="existing ground",
                              crs=site.crs)
    if res.headroom is not None:
        _write_headroom_rasters(res, folder)


def _write_slice_rasters(res, folder) -> None:
    """slices/: Δσz at each depth and the settlement plan of every plan grid."""
    site, u = res.site, res.site.units
    if not _output(site, "geotiff"):
        return
    for name, da in res.slices.items():
        sub = _slice_spec(site, da)
        for depth in da["depth"].values:
            label = f"{u.length_out(depth):05.2f}{u.length}"
            geotiff.write_geotiff(folder.path(f"slices/dsz_{name}_z{label}.tif"),
                                  da.sel(depth=depth).values, sub, quantity="pressure",
                                  units=u, description=f"dsz at depth {label}", crs=site.crs)
    for name, da in res.plan_settlement.items():          # the settlement plan of each grid
        geotiff.write_geotiff(folder.path(f"slices/settlement_{name}.tif"), da.values,
                              _slice_spec(site, da), quantity="settlement", units=u,
                              description="final settlement at the ground surface; nodata: heave, or "
                              "dsz below the run's stated cut-off (not analysed)",
                              crs=site.crs)


def _write_headroom_tables(res, folder) -> None:
    """headroom_governing.csv and headroom_checks.csv (run/headroom.py)."""
    from .headroom import governing_table
    site, u = res.site, res.site.units
    tables.write_table_csv(folder.path("headroom_governing.csv"), governing_table(res.headroom),
                           u, {"cells": None, "area": "area", "multiple_min": None, "x_at_min": "plan",
                               "y_at_min": "plan"}, crs=site.crs)
    tables.write_table_csv(folder.path("headroom_checks.csv"), res.headroom.checks, u,
                           {"linearised_multiple": None, "full_multiple": None,
                            "difference": None, "settlement_ratio": None}, crs=site.crs)


def _write_headroom_rasters(res, folder) -> None:
    """headroom.tif (the multiple; no data where no mapped limit is reached) and, for a
    body template, headroom_height.tif (the height that multiple gives)."""
    site, u, found = res.site, res.site.units, res.headroom
    safe = " (settlement limits scaled by the re-checks)" if found.factor < 1 else ""
    geotiff.write_geotiff(folder.path("headroom.tif"), _nodata_where_inf(found.multiple),
                          found.spec, quantity=None, units=u,
                          description=f"largest multiple of the {found.template}{safe}",
                          crs=site.crs)
    if found.factor < 1:
        geotiff.write_geotiff(folder.path("headroom_linearised.tif"),
                              _nodata_where_inf(found.linearised), found.spec, quantity=None,
                              units=u, description=f"largest multiple of the {found.template}"
                              ", settlement limits linearised (not re-checked)", crs=site.crs)
    from .headroom import governing_codes
    codes = governing_codes(found)
    geotiff.write_geotiff(folder.path("headroom_governing.tif"),
                          np.where(codes > 0, codes, np.nan), found.spec, quantity=None,
                          units=u, description="row of headroom_governing.csv whose limit "
                          "governs the cell", crs=site.crs)
    if found.height is not None:
        geotiff.write_geotiff(folder.path("headroom_height.tif"),
                              _nodata_where_inf(found.height),
                              found.spec, quantity="length", units=u,
                              description=f"height of the {found.template} at its largest "
                                          "multiple", crs=site.crs)


def _nodata_where_inf(values: np.ndarray) -> np.ndarray:
    return np.where(np.isfinite(values), values, np.nan)


def _headroom_json(res) -> dict | None:
    """summary.json's headroom: the template, the least multiple, where and what governs it
    (plan coordinates in site-CRS units, the height in the site length unit), the re-checks
    and the correction put on the settlement limits."""
    found = res.headroom
    if found is None:
        return None
    site, u = res.site, res.site.units
    least = found.least()
    if least is not None:
        least = {**least, "x": least["x"] / site.metres_per_unit,
                 "y": least["y"] / site.metres_per_unit,
                 "height": None if least["height"] is None else u.length_out(least["height"])}
        least[f"height_{u.length}"] = least.pop("height")
    ratio = found.worst_ratio
    return {"template": found.template,
            f"map_cell_{u.length}": u.length_out(found.spec.dx),
            "map_cells": int(found.multiple.size),
            "least": least,
            "governing_limit_type": None if least is None else least["limit_type"],
            "rechecked_cells": int(len(found.checks)),
            "worst_settlement_full_over_linearised": None if math.isnan(ratio) else ratio,
            "settlement_scale_applied": found.factor,
            "linearisation_unsafe": found.unsafe}


def _slice_spec(site, da) -> GridSpec:
    """Lattice (internal metres) whose cell centres are the slice's x, y coordinates."""
    x, y = da["x"].values, da["y"].values
    dx = float(x[1] - x[0]) if len(x) > 1 else site.spec.dx
    dy = float(y[1] - y[0]) if len(y) > 1 else site.spec.dy
    return GridSpec(x[0] - dx / 2, y[0] - dy / 2, dx, dy, len(x), len(y), site.crs)


def _write_cube(res, folder, version="") -> None:
    if not res.slices or not _output(res.site, "netcdf"):
        return
    netcdf.write_stress_cube(folder.path("stress_cube.nc"), **cube_arguments(res, version))


def cube_arguments(res, version="") -> dict:
    """The arguments of :func:`fillstress.io.netcdf.stress_dataset` (and of the writer of
    ``stress_cube.nc``) for a run: every stage's slices, fill, σ'v0 and settlement."""
    site = res.site
    made_by = f"fillstress {version}".strip()
    attrs = {"title": f"Vertical stress increase below the fill of {site.name}",
             "source": f"{made_by}, method {site.method}",
             "history": f"{made_by}: fillstress run {site.path.name}"}
    slices, stages = ((res.stage_slices, site.stages) if res.stage_slices
                      else (res.slices, site.stages[-1:]))
    return dict(slices=slices, grid=site.spec, stages=stages,
                fill_thickness=[site.fill_thickness(k) for k in stages],
                units=site.units, crs=site.crs, attrs=attrs,
                sigma_v0=_slice_sigma_v0(site, res.slices), settlement=res.plan_settlement)


def _slice_sigma_v0(site, slices) -> dict | None:
    """σ'v0 (kPa) at every slice depth of each plan grid, NaN below the stated profile."""
    if site.soil is None:
        return None
    out = {}
    for name, da in slices.items():
        depth = np.asarray(da["depth"].values, float)
        inside = depth <= site.soil.bottom_m
        out[name] = np.where(inside, site.soil.sigma_v0_eff(np.minimum(depth, site.soil.bottom_m)),
                             np.nan)
    return out


def _write_vtk(res, folder) -> None:
    """The VTK files, ``vtk/run.vtm`` opening all of them, and with several stages
    ``vtk/run.pvd``: one time step per stage (earlier stages' fill and slices under
    ``vtk/stage<k>/``; the receptors and their final results are shared)."""
    site, u = res.site, res.site.units
    if not _output(site, "vtk"):
        return
    k = _coord_scale(site)
    s = site.spec
    scaled = GridSpec(s.x0 * k, s.y0 * k, s.dx * k, s.dy * k, s.nx, s.ny, site.crs)
    ground = site.ground_elevation_grid(filled=True)
    receptors = _write_vtk_receptors(res, folder, k)

    def loads(stage, prefix):
        """Fill surface and stress grids of `stage` → their files (relative to vtk/)."""
        files = {"fill_surface": f"{prefix}fill_surface.vtp"}
        vtk.write_fill_surface(folder.path(f"vtk/{files['fill_surface']}"),
                               site.fill_thickness(stage), scaled, ground=ground, units=u)
        for name in res.slices:
            da = (res.stage_slices[name].sel(stage=stage) if res.stage_slices
                  else res.slices[name])
            files[f"stress_{name}"] = f"{prefix}stress_{name}.vtr"
            vtk.write_stress_grid(folder.path(f"vtk/{files[f'stress_{name}']}"),
                                  _vtk_slice(site, da), u)
        return {**files, **receptors}

    final = site.stages[-1]
    vtk.write_bundle(folder.path("vtk/run.vtm"), loads(final, ""))
    if len(site.stages) > 1 and res.stage_slices:
        steps = {final: "run.vtm"}
        for stage in site.stages[:-1]:
            steps[stage] = f"run_stage{stage}.vtm"     # beside run.vtm: same relative names
            vtk.write_bundle(folder.path(f"vtk/{steps[stage]}"), loads(stage, f"stage{stage}/"))
        vtk.write_bundle(folder.path("vtk/run.pvd"), steps, stages=site.stages)


def _write_vtk_receptors(res, folder, k) -> dict:
    """Buildings (with their results), pipes, boreholes and the plan grids' surface
    settlement → files relative to vtk/."""
    site, u = res.site, res.site.units
    pts = _vtk_points(site, res.points)
    files = {}
    b = site.receptors.buildings
    if b:
        frame = gpd.GeoDataFrame({"receptor_id": [r.id for r in b],
                                  "foundation_depth": [r.depth for r in b]},
                                 geometry=[_scale_geom(r.geometry, k) for r in b])
        results = kind_summary(res, "building")
        keep = ["receptor_id", *(c for c in vtk.RESULT_ARRAYS if c in results)]
        frame = frame.merge(results[keep], on="receptor_id", how="left")
        vtk.write_buildings(folder.path("vtk/buildings.vtp"), frame, u)
        files["buildings"] = "buildings.vtp"
    for kind, writer in (("pipe", vtk.write_pipes), ("borehole", vtk.write_boreholes)):
        if (pts["receptor_kind"] == kind).any():
            name = KIND_FILES[kind]
            writer(folder.path(f"vtk/{name}.vtp"), pts[pts["receptor_kind"] == kind], u)
            files[name] = f"{name}.vtp"
    for name, da in res.plan_settlement.items():      # final settlement: every stage shows it
        vtk.write_settlement_grid(folder.path(f"vtk/settlement_{name}.vtr"),
                                  _vtk_slice(site, da), u)
        files[f"settlement_{name}"] = f"settlement_{name}.vtr"
    return files


def _scale_geom(geom, k):
    return shapely.transform(geom, lambda c: c * k)


def _write_summary_json(res, folder, assumptions, cautions) -> None:
    site = res.site
    data = {
        "site": {"name": site.name, "description": site.description,
                 "units": site.units.name, "method": site.method, "poisson": site.poisson,
                 "cell": site.units.length_out(site.spec.dx), "stages": site.stages},
        "bodies": json.loads(tables.labelled_table(bodies_table(site), site.units,
                                                   EXTRA_QUANTITIES).to_json(orient="records")),
        "soil": _soil_rows(site),
        "convergence": _convergence_out(res),
        "receptors": _receptor_json(res),
        "warnings": res.warnings,
        **({"headroom": _headroom_json(res)} if res.headroom is not None else {}),
        "timings_s": res.timings,
        "assumptions": assumptions, "cautions": cautions,
    }
    write_atomic(folder.path("summary.json"),
                 lambda p: p.write_text(json.dumps(data, indent=2, default=_json_default)))


def _receptor_json(res) -> dict:
    """Per kind, the receptor summaries in output units (plan coordinates in the CSVs)."""
    out = {}
    for kind, name in KIND_FILES.items():
        if (res.points["receptor_kind"] == kind).any():
            summary = kind_summary(res, kind).drop(columns=["x", "y"])
            out[name] = json.loads(tables.labelled_table(
                summary, res.site.units, column_quantities(summary)).to_json(orient="records"))
    return out


def _convergence_out(res) -> dict:
    """The convergence check with its cell sizes in the site's length unit."""
    c, u = dict(res.convergence), res.site.units
    for key in ("cell", "fine_cell"):
        if key in c:
            c[f"{key}_{u.length}"] = u.length_out(c.pop(key))
    return c


def _json_default(v):
    if isinstance(v, (np.floating, np.integer)):
        return v.item()
    if isinstance(v, np.ndarray):
        return v.tolist()
    return str(v)


def _soil_rows(site) -> list[dict]:
    if site.soil is None:
        return []
    u = site.units
    return [{"name": L.name, f"top_{u.length}": u.length_out(L.top_m),
             f"bottom_{u.length}": u.length_out(L.bottom_m), "model": L.kind,
             f"unit_weight_{u.unit_weight}": L.unit_weight / u.unit_weight_to_kn_m3}
            for L in site.soil.layers]


def _write_report_and_scene(folder, bar, site) -> None:
    """The report and the scene, each unless the site file's [outputs] turns it off. They
    share one view of the folder, so the cube and rasters are read once, not twice; the
    scene is made beside the report's sections (by the second process on two cores)."""
    from ..io.results import ResultsFolder
    finished = ResultsFolder(folder.root)
    describe(bar, "report and 3D scene")
    scene = {"scene": lambda: export_scene_html(finished, folder.path("scene.html"))
             } if _output(site, "scene") else {}
    if _output(site, "report"):
        write_run_report(finished, folder.path("report.html"), beside=scene)
    elif scene:
        scene["scene"]()
    bar.advance(2)


def _output(site, key) -> bool:
    return getattr(site.settings, key)


def _geojson_options(site) -> dict:
    """RFC 7946 with the decimals the cell resolves, unless [outputs] keeps the site CRS."""
    return {"site_coordinates": site.settings.geojson_crs == "site",
            "decimals": tables.geojson_decimals(site.spec.dx)}


def _settings(site) -> dict:
    return {"method": site.method, "poisson": site.poisson, "cell_m": site.spec.dx,
            "margin_m": site.settings.margin, "stages": site.stages,
            "convergence_check": site.settings.convergence_check,
            "units": site.units.name, "geojson_crs": _geojson_crs(site)}


def _geojson_crs(site) -> str:
    """What the GeoJSON files' coordinates are (io.results reads them back by it)."""
    if site.crs is None or site.settings.geojson_crs == "site":
        return "site"
    return "EPSG:4326"


def write_corridor_tables(res, folder) -> None:
    """The alignment tables as CSV in site units, with a station label column
    (``10+50``); Δσz columns named by their depth in site units (``dsz_at_5ft_psf``)."""
    site, u = res.site, res.site.units
    for name, frame in res.corridor.items():
        if frame.empty:
            continue
        renamed = {f"dsz_z{d:g}": f"dsz_at_{u.length_out(d):g}{u.length}"
                   for d in site.alignment.profile_depths}
        frame = frame.rename(columns=renamed)
        frame.insert(1, "station_label", [format_station(u.length_out(v), u.name)
                                          for v in frame["station"]])
        q = {**column_quantities(frame), **dict.fromkeys(renamed.values(), "pressure"),
             **dict.fromkeys(["station", "offset", "ground_elevation", "fill_height"],
                             "length")}
        tables.write_table_csv(folder.path(f"{name}.csv"), frame, u, q, crs=site.crs)
