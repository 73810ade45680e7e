"""A synthetic but realistic results folder, written to the contract in docs/results-folder.md.

Everything here is invented: the site ("Quillmere Yard preload trial"), the fill, the
buildings, the pipe and the borehole. Δσz is computed with the Boussinesq point-load
formula summed over the fill cells (Boussinesq 1885, point load on a half-space:
Δσz = 3P z³ / (2π R⁵)), so the numbers look like real output without depending on
the solver being built in parallel. Settlement uses a one-line compression index
formula with invented parameters; it only has to be plausible, not exact.

``write_results_folder(path)`` returns the folder path; the module keeps the values it
wrote in ``FixtureTruth`` so tests can compare what the viewer and report show.
"""
from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

# Invented site, SI units.
X0, Y0, DX, DY, NX, NY = 4100.0, 7200.0, 2.0, 2.0, 30, 24
DEPTHS = (2.0, 6.0)
UNIT_WEIGHT = 19.5          # kN/m³, invented
NASTY_ID = 'Hall <script>alert("x")</script> & Co'
CRS_EPSG = 25833


@dataclass
class FixtureTruth:
    """What was written, for tests to compare against."""

    path: Path
    dsz: np.ndarray              # (depth, y, x), row 0 south, kPa
    thickness: np.ndarray        # (y, x), row 0 south, m
    x: np.ndarray
    y: np.ndarray
    depths: tuple
    building_ids: list = field(default_factory=list)
    pipe_id: str = ""
    borehole_id: str = ""


def _centres():
    x = X0 + (np.arange(NX) + 0.5) * DX
    y = Y0 + (np.arange(NY) + 0.5) * DY
    return x, y


def _fill_thickness(x, y):
    """A truncated pyramid stockpile: 4.5 m crest, 1:2 side slopes, crest 12 m x 8 m."""
    xx, yy = np.meshgrid(x, y)
    cx, cy = X0 + 26.0, Y0 + 24.0
    dist = np.maximum(np.abs(xx - cx) - 6.0, np.abs(yy - cy) - 4.0)
    return np.clip(4.5 - 0.5 * np.maximum(dist, 0.0), 0.0, None)


def _boussinesq_points(thickness, px, py, pz):
    """Δσz (kPa) at points from each fill cell taken as a point load at its centre."""
    x, y = _centres()
    xx, yy = np.meshgrid(x, y)
    loads = (thickness * UNIT_WEIGHT * DX * DY).ravel()
    keep = loads > 0
    sx, sy, q = xx.ravel()[keep], yy.ravel()[keep], loads[keep]
    px, py, pz = (np.atleast_1d(np.asarray(a, float)) for a in (px, py, pz))
    r2 = (px[:, None] - sx) ** 2 + (py[:, None] - sy) ** 2 + pz[:, None] ** 2
    return (3.0 * q * pz[:, None] ** 3 / (2.0 * np.pi * r2 ** 2.5)).sum(axis=1)


def _soil_columns(depth, dsz):
    """Invented soil: γ' = 9 kN/m³ below a water table at the surface (σ'v0 = 9 z),
    Cc/(1+e0) = 0.08 over a 1 m thick slice around the point (plausible, not exact)."""
    sigma_v0 = np.maximum(9.0 * np.asarray(depth), 1.0)
    ratio = dsz / sigma_v0
    settlement_mm = 1000.0 * 0.08 * np.log10(1.0 + ratio)
    return sigma_v0, ratio, settlement_mm


def _write_raster(path, south_first, crs):
    import rasterio
    from affine import Affine
    transform = Affine(DX, 0.0, X0, 0.0, -DY, Y0 + NY * DY)
    with rasterio.open(path, "w", driver="GTiff", height=NY, width=NX, count=1,
                       dtype="float32", crs=crs, transform=transform) as dst:
        dst.write(np.flipud(south_first).astype("float32"), 1)   # north-up on disk


def _geojson(path, features):
    """RFC 7946, as a run writes it: WGS 84 longitude/latitude, no crs member."""
    import shapely
    from pyproj import Transformer
    to_wgs84 = Transformer.from_crs(CRS_EPSG, 4326, always_xy=True)

    def lonlat(geom):
        shape = shapely.transform(shapely.geometry.shape(geom),
                                  lambda xy: np.column_stack(to_wgs84.transform(*xy.T)))
        return shapely.geometry.mapping(shape)

    path.write_text(json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": props, "geometry": lonlat(geom)}
        for props, geom in features]}))


def _points_frame(rows):
    df = pd.DataFrame(rows)
    sv, ratio, s = _soil_columns(df["depth_m"], df["dsz_kPa"])
    df["sigma_v0_kPa"], df["stress_ratio"], df["settlement_mm"] = sv, ratio, s
    return df


def _point_geojson(path, df):
    feats = [({k: (v.item() if hasattr(v, "item") else v) for k, v in row.items()},
              {"type": "Point", "coordinates": [row["x_m"], row["y_m"]]})
             for row in df.to_dict("records")]
    _geojson(path, feats)


def _buildings(thickness):
    """Two buildings: corners and centroid at foundation level, a centroid profile."""
    specs = [(NASTY_ID, (4104.0, 7204.0, 4114.0, 7212.0), 1.5),
             ("Quillmere Depot", (4138.0, 7226.0, 4152.0, 7240.0), 2.0)]
    rows, feats, summary = [], [], []
    for rid, (x1, y1, x2, y2), fdepth in specs:
        ring = [[x1, y1], [x2, y1], [x2, y2], [x1, y2], [x1, y1]]
        feats.append(({"receptor_id": rid, "foundation_depth_m": fdepth},
                      {"type": "Polygon", "coordinates": [ring]}))
        pts = [("corner", cx, cy, fdepth) for cx, cy in ring[:4]]
        cx, cy = (x1 + x2) / 2, (y1 + y2) / 2
        pts.append(("centroid", cx, cy, fdepth))
        pts += [("profile", cx, cy, d) for d in (fdepth, 3.0, 5.0, 8.0, 12.0)]
        role, px, py, pz = zip(*pts)
        dsz = _boussinesq_points(thickness, px, py, pz)
        for k, (r, a, b, c, v) in enumerate(zip(role, px, py, pz, dsz)):
            rows.append({"receptor_id": rid, "point_id": f"{rid}-{k:02d}", "role": r,
                         "x_m": a, "y_m": b, "depth_m": c, "dsz_kPa": v})
    df = _points_frame(rows)
    for rid, grp in df.groupby("receptor_id", sort=False):
        top = grp.loc[grp["dsz_kPa"].idxmax()]
        found = grp[grp["role"].isin(["corner", "centroid"])]
        diff = float(found["settlement_mm"].max() - found["settlement_mm"].min())
        distortion = diff / 1000.0 / 10.0
        summary.append({"receptor_id": rid, "n_points": len(grp),
                        "dsz_max_kPa": top["dsz_kPa"], "x_m": top["x_m"], "y_m": top["y_m"],
                        "depth_m": top["depth_m"],
                        "settlement_max_mm": float(found["settlement_mm"].max()),
                        "differential_settlement_mm": diff,
                        "angular_distortion": distortion,
                        # 1/500: common practice limit for angular distortion of framed buildings
                        "flag": "angular distortion above 1/500" if distortion > 1 / 500 else ""})
    return df, feats, pd.DataFrame(summary)


def _pipe(thickness):
    rid = "Culvert QY-3"
    xs = np.linspace(4101.0, 4159.0, 30)
    ys = np.linspace(7230.0, 7220.0, 30)
    crown, diameter = 1.8, 0.6
    chain = np.concatenate([[0.0], np.cumsum(np.hypot(np.diff(xs), np.diff(ys)))])
    dsz = _boussinesq_points(thickness, xs, ys, np.full(xs.size, crown))
    df = _points_frame([{"receptor_id": rid, "point_id": f"{rid}-{k:02d}", "role": "chainage",
                         "x_m": a, "y_m": b, "depth_m": crown, "chainage_m": c, "dsz_kPa": v}
                        for k, (a, b, c, v) in enumerate(zip(xs, ys, chain, dsz))])
    feat = ({"receptor_id": rid, "depth_m": crown, "diameter_m": diameter},
            {"type": "LineString", "coordinates": [[xs[0], ys[0]], [xs[-1], ys[-1]]]})
    top = df.loc[df["dsz_kPa"].idxmax()]
    summary = pd.DataFrame([{"receptor_id": rid, "n_points": len(df), "dsz_max_kPa": top["dsz_kPa"],
                             "x_m": top["x_m"], "y_m": top["y_m"], "depth_m": top["depth_m"],
                             "settlement_max_mm": df["settlement_mm"].max(), "flag": ""}])
    return df, [feat], summary


def _borehole(thickness):
    rid = "BH-Q7"
    bx, by, top_d, bottom_d = 4128.0, 7222.0, 0.0, 15.0
    depths = np.arange(0.5, 15.01, 1.5)
    dsz = _boussinesq_points(thickness, np.full(depths.size, bx), np.full(depths.size, by), depths)
    df = _points_frame([{"receptor_id": rid, "point_id": f"{rid}-{k:02d}", "role": "borehole",
                         "x_m": bx, "y_m": by, "depth_m": d, "dsz_kPa": v}
                        for k, (d, v) in enumerate(zip(depths, dsz))])
    feat = ({"receptor_id": rid, "top_depth_m": top_d, "bottom_depth_m": bottom_d},
            {"type": "Point", "coordinates": [bx, by]})
    top = df.loc[df["dsz_kPa"].idxmax()]
    summary = pd.DataFrame([{"receptor_id": rid, "n_points": len(df), "dsz_max_kPa": top["dsz_kPa"],
                             "x_m": bx, "y_m": by, "depth_m": top["depth_m"],
                             "settlement_max_mm": df["settlement_mm"].max(), "flag": ""}])
    return df, [feat], summary


def _settlement_time(tables):
    """Curves at the borehole and each building: final settlement × (1 − e^(−t/400 d)),
    an invented, plausible shape (not a consolidation solution)."""
    days = np.r_[0.0, np.geomspace(1.0, 20000.0, 40)]
    rows = []
    for kind in ("boreholes", "buildings"):
        for rec in tables[kind].to_dict("records"):
            final = rec["settlement_max_mm"]
            rows += [{"receptor_id": rec["receptor_id"], "days": d,
                      "settlement_mm": final * (1.0 - np.exp(-d / 400.0))} for d in days]
    return pd.DataFrame(rows)


def _write_cube(path, x, y, dsz, thickness):
    import xarray as xr
    sv = np.maximum(9.0 * np.asarray(DEPTHS), 1.0)[:, None, None]
    ds = xr.Dataset(
        {"dsz_plan": (("depth", "y", "x"), dsz, {"units": "kPa", "long_name": "vertical stress increase"}),
         "stress_ratio_plan": (("depth", "y", "x"), dsz / sv, {"units": "1"}),
         "sigma_v0_plan": (("depth",), sv[:, 0, 0], {"units": "kPa"}),
         "fill_thickness": (("y", "x"), thickness, {"units": "m"})},
        coords={"depth": ("depth", np.array(DEPTHS), {"units": "m"}),
                "y": ("y", y, {"units": "m"}), "x": ("x", x, {"units": "m"})},
        attrs={"units": "kPa"})
    ds.to_netcdf(path)


def _write_vtk(folder, x, y, dsz, thickness, building_feats, pipe_feats, bh_feats):
    import pyvista as pv
    vtk_dir = folder / "vtk"
    vtk_dir.mkdir()
    xx, yy = np.meshgrid(x, y)
    surf = pv.StructuredGrid(xx, yy, thickness).extract_surface(algorithm="dataset_surface")
    surf.point_data["thickness"] = thickness.ravel(order="F")
    surf.save(vtk_dir / "fill_surface.vtp")
    rect = pv.RectilinearGrid(x, y, -np.array(DEPTHS)[::-1])
    rect.point_data["dsz"] = dsz[::-1].ravel()
    rect.save(vtk_dir / "stress_plan.vtr")
    for name, feats in (("buildings", building_feats), ("pipes", pipe_feats)):
        pts = np.array([[c[0], c[1], 0.0] for _, g in feats for c in
                        (g["coordinates"][0] if g["type"] == "Polygon" else g["coordinates"])])
        pv.PolyData(pts).save(vtk_dir / f"{name}.vtp")
    bx, by = bh_feats[0][1]["coordinates"]
    pv.Line((bx, by, 0.0), (bx, by, -15.0)).save(vtk_dir / "boreholes.vtp")


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _summary_json(bodies, tables):
    return {
        "site": {"name": "Quillmere Yard preload trial", "job": "QY-2031-04",
                 "prepared_for": "Quillmere Harbour Board <b>draft</b>"},
        "bodies": bodies.to_dict("records"),
        "receptors": {kind: df.to_dict("records") for kind, df in tables.items()},
        # as the writer puts them (writers._soil_rows, run.convergence_check)
        "soil": [{"name": "soft grey clay", "top_m": 0.0, "bottom_m": 9.0, "model": "index",
                  "unit_weight_kN_per_m3": 19.0},
                 {"name": "dense sand", "top_m": 9.0, "bottom_m": 20.0, "model": "modulus",
                  "unit_weight_kN_per_m3": 20.5}],
        "convergence": {"points_compared": 58, "max_relative_change": 0.008,
                        "at_point": "BH-Q7-02", "threshold_fraction_of_qmax": 0.01,
                        "cell_m": 2.0, "fine_cell_m": 1.0},
    }


def write_results_folder(folder) -> FixtureTruth:
    """Write the whole results folder into `folder` (created) and return what was written."""
    folder = Path(folder)
    (folder / "slices").mkdir(parents=True)
    from pyproj import CRS
    crs = CRS.from_epsg(CRS_EPSG)
    x, y = _centres()
    thickness = _fill_thickness(x, y)
    xx, yy = np.meshgrid(x, y)
    dsz = np.stack([_boussinesq_points(thickness, xx.ravel(), yy.ravel(), np.full(xx.size, d))
                    .reshape(NY, NX) for d in DEPTHS])

    _write_raster(folder / "fill_thickness.tif", thickness, crs)
    _write_raster(folder / "surface_pressure.tif", thickness * UNIT_WEIGHT, crs)
    for k, d in enumerate(DEPTHS):
        _write_raster(folder / "slices" / f"dsz_plan_z{d:05.2f}m.tif", dsz[k], crs)
    _write_cube(folder / "stress_cube.nc", x, y, dsz, thickness)

    volume = float(thickness.sum() * DX * DY)
    bodies = pd.DataFrame([{"body": "east stockpile", "kind": "stockpile", "stage": 1,
                            "unit_weight_kN_per_m3": UNIT_WEIGHT, "volume_m3": volume,
                            "footprint_area_m2": float((thickness > 0).sum() * DX * DY),
                            "max_height_m": float(thickness.max()),
                            "total_load_kN": volume * UNIT_WEIGHT}])
    bodies.to_csv(folder / "bodies.csv", index=False)

    b_pts, b_feats, b_sum = _buildings(thickness)
    p_pts, p_feats, p_sum = _pipe(thickness)
    h_pts, h_feats, h_sum = _borehole(thickness)
    _geojson(folder / "buildings.geojson", b_feats)
    _geojson(folder / "pipes.geojson", p_feats)
    _geojson(folder / "boreholes.geojson", h_feats)
    tables = {"buildings": b_sum, "pipes": p_sum, "boreholes": h_sum}
    for kind, pts in (("buildings", b_pts), ("pipes", p_pts), ("boreholes", h_pts)):
        pts.to_csv(folder / f"{kind}_points.csv", index=False)
        _point_geojson(folder / f"{kind}_points.geojson", pts)
        tables[kind].to_csv(folder / f"{kind}_summary.csv", index=False)
    _write_vtk(folder, x, y, dsz, thickness, b_feats, p_feats, h_feats)
    _settlement_time(tables).to_csv(folder / "settlement_time.csv", index=False)

    (folder / "summary.json").write_text(json.dumps(_summary_json(bodies, tables), indent=1))
    outputs = {p.relative_to(folder).as_posix(): _sha256(p)
               for p in sorted(folder.rglob("*")) if p.is_file()}
    manifest = {
        "program": "fillstress", "version": "0.1.0", "created": "2031-04-17T09:12:44Z",
        "site_file": "quillmere_yard.toml",
        "settings": {"method": "boussinesq", "cell_m": DX, "depths_m": list(DEPTHS),
                     "geojson_crs": "EPSG:4326"},
        "units": {"system": "SI", "length": "m", "pressure": "kPa", "unit_weight": "kN/m3",
                  "settlement": "mm", "plan": "m"},
        "inputs": {"quillmere_yard.toml": "3f" * 32, "east_pile_<crest>.geojson": "a7" * 32},
        "outputs": outputs,
        "crs": crs.to_wkt(),
        "grid": {"x0": X0, "y0": Y0, "dx": DX, "dy": DY, "nx": NX, "ny": NY},
        "assumptions": ["Soil is a homogeneous, isotropic, linear-elastic half-space.",
                        "Fill acts as a flexible load on the existing ground surface."],
        "cautions": ["Trial data <i>only</i>."],
    }
    (folder / "manifest.json").write_text(json.dumps(manifest, indent=1))
    return FixtureTruth(folder, dsz, thickness, x, y, DEPTHS,
                        building_ids=list(b_sum["receptor_id"]), pipe_id=p_sum["receptor_id"][0],
                        borehole_id=h_sum["receptor_id"][0])
