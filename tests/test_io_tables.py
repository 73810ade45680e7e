"""Point tables to CSV and GeoJSON: unit suffixes, US conversion, CRS round trips."""
from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pyproj
import pytest
from shapely.geometry import LineString, Polygon, box

from fillstress import InputError
from fillstress.io.results import ResultsFolder
from fillstress.io.tables import (crs_unit_label, geojson_decimals, labelled_table, plan_unit,
                                  unit_label, write_geojson, write_points_geojson,
                                  write_table_csv)
from fillstress.site.receptors import borehole_points, pipe_points
from fillstress.units import SI, US

# Exact by definition: international foot 0.3048 m and pound 0.45359237 kg (1959
# international yard and pound agreement), standard gravity 9.80665 m/s² (3rd CGPM, 1901).
# 1 psf = 0.45359237 * 9.80665 / 0.3048**2 Pa = 47.880 258 98 Pa; NIST SP 811 (2008)
# Appendix B lists 4.788 026 E+01 Pa (recalled from memory), consistent with it.
PSF_IN_KPA = 0.45359237 * 9.80665 / 0.3048**2 / 1000.0
# 1 kip = 1000 lbf = 4.448 221 615 kN (same definitions; NIST SP 811: 4.448 222 E+03 N).
KIP_IN_KN = 0.45359237 * 9.80665


def _points():
    pts = pd.concat([pipe_points("Culvert-7", LineString([(0, 0), (9.144, 0)]), 1.524,
                                 spacing=3.048),
                     borehole_points("BH-3", 1.0, 2.0, 0.0, 3.048, 3.048)], ignore_index=True)
    pts["dsz"] = np.linspace(PSF_IN_KPA * 100, PSF_IN_KPA * 600, len(pts))
    return pts


def test_psf_factor_matches_the_published_value():
    assert PSF_IN_KPA == pytest.approx(0.04788026, rel=1e-6)


def test_us_conversion_of_every_quantity_kind():
    t = pd.DataFrame({"receptor_id": ["B1"], "depth": [3.048], "dsz": [PSF_IN_KPA * 250],
                      "settlement": [0.0254], "unit_weight": [0.45359237 * 9.80665e-3 / 0.3048**3 * 120],
                      "volume": [0.3048**3 * 8], "footprint_area": [0.3048**2 * 5],
                      "total_load": [KIP_IN_KN * 3], "stress_ratio": [0.4], "n_points": [7]})
    out = labelled_table(t, US).iloc[0]
    assert out["depth_ft"] == pytest.approx(10.0)
    assert out["dsz_psf"] == pytest.approx(250.0)
    assert out["settlement_in"] == pytest.approx(1.0)
    assert out["unit_weight_pcf"] == pytest.approx(120.0)
    assert out["volume_yd3"] == pytest.approx(8.0 / 27)     # 27 ft³ to the cubic yard
    assert out["footprint_area_ft2"] == pytest.approx(5.0)
    assert out["total_load_kip"] == pytest.approx(3.0)
    assert out["stress_ratio"] == 0.4 and out["n_points"] == 7


def test_si_labels_and_settlement_in_mm():
    t = pd.DataFrame({"settlement": [0.0125], "unit_weight": [19.5], "total_load": [10.0]})
    out = labelled_table(t, SI)
    assert list(out.columns) == ["settlement_mm", "unit_weight_kN_per_m3", "total_load_kN"]
    assert out["settlement_mm"].iloc[0] == pytest.approx(12.5)


def test_undeclared_numeric_column_is_refused_and_can_be_declared():
    t = pd.DataFrame({"receptor_id": ["P"], "wobble": [1.0]})
    with pytest.raises(InputError, match="'wobble' has no declared quantity"):
        labelled_table(t, SI)
    assert list(labelled_table(t, SI, {"wobble": None}).columns) == ["receptor_id", "wobble"]
    assert list(labelled_table(t, US, {"wobble": "pressure"}).columns) == ["receptor_id",
                                                                          "wobble_psf"]
    with pytest.raises(InputError, match="unknown quantity"):
        labelled_table(t, SI, {"wobble": "speed"})


def test_infinite_values_are_refused():
    with pytest.raises(InputError, match="infinite"):
        labelled_table(pd.DataFrame({"dsz": [np.inf]}), SI)


def test_points_csv_round_trip_in_us_units(tmp_path):
    pts = _points()
    path = write_table_csv(tmp_path / "pipes_points.csv", pts, US)
    back = pd.read_csv(path)
    assert list(back.columns) == ["receptor_kind", "receptor_id", "point_id", "role", "x_ft",
                                  "y_ft", "depth_ft", "chainage_ft", "dsz_psf"]
    assert back["chainage_ft"].iloc[:4].tolist() == pytest.approx([0, 10, 20, 30])
    assert back["chainage_ft"].iloc[4:].isna().all()  # boreholes have no chainage
    assert back["depth_ft"].iloc[:4].tolist() == pytest.approx([5.0] * 4)
    assert back["dsz_psf"].to_numpy() == pytest.approx(np.linspace(100, 600, len(pts)))
    assert back["point_id"].tolist() == pts["point_id"].tolist()


def test_plan_unit_follows_the_crs_not_the_unit_system():
    # US survey foot = 1200/3937 m (US Federal Register, 1959 notice); EPSG:2263 uses it.
    assert plan_unit("EPSG:2263", US) == ("ft", pytest.approx(1200 / 3937, rel=1e-12))
    assert plan_unit("EPSG:2263", SI) == ("ftUS", pytest.approx(1200 / 3937, rel=1e-12))
    assert plan_unit("EPSG:32633", US) == ("m", 1.0)  # never "ft" for metres
    assert plan_unit(None, SI) == ("m", 1.0)
    assert plan_unit(None, US) == ("ft", 0.3048)
    assert unit_label(SI, "plan", "EPSG:2263") == "ftUS"
    assert crs_unit_label("EPSG:2263") == "ftUS"


def test_points_geojson_in_a_survey_foot_crs_matches_pyproj(tmp_path):
    # A borehole at E 990 000 ftUS, N 210 000 ftUS in EPSG:2263, held internally in metres.
    f = 1200 / 3937
    pts = borehole_points("BH-Harrow", 990000 * f, 210000 * f, 0.0, 3.048, 1.524)
    path = write_points_geojson(tmp_path / "boreholes_points.geojson", pts, US,
                                crs="EPSG:2263", site_coordinates=True)
    back = gpd.read_file(path)
    assert back.crs.to_epsg() == 2263
    assert back.geometry.x.to_numpy() == pytest.approx(990000.0, abs=1e-6)
    # Column suffix "ft" (the unit system's kind), values in survey feet (the CRS's unit).
    assert back["x_ft"].to_numpy() == pytest.approx(990000.0, abs=1e-6)
    assert back["depth_ft"].tolist() == pytest.approx([0.0, 5.0, 10.0])
    # Georeferencing check independent of fillstress: pyproj's own answer for the point.
    lon, lat = pyproj.Transformer.from_crs(2263, 4326, always_xy=True).transform(990000, 210000)
    ll = back.to_crs(4326).geometry.iloc[0]
    assert (ll.x, ll.y) == (pytest.approx(lon, abs=1e-9), pytest.approx(lat, abs=1e-9))


def test_receptor_geometry_geojson_round_trip(tmp_path):
    frame = gpd.GeoDataFrame({"receptor_id": ["Granary", "Forge"],
                              "foundation_depth": [1.2, 0.6096]},
                             geometry=[box(500, 600, 512, 608), box(520, 600, 530, 604)],
                             crs="EPSG:32633")
    path = write_geojson(tmp_path / "buildings.geojson", frame, US, site_coordinates=True)
    back = gpd.read_file(path)
    assert back.crs.to_epsg() == 32633
    assert back["receptor_id"].tolist() == ["Granary", "Forge"]
    assert back["foundation_depth_ft"].tolist() == pytest.approx([1.2 / 0.3048, 2.0])
    assert back.geometry.iloc[0].equals_exact(box(500, 600, 512, 608), 1e-9)


def test_geojson_needs_a_geodataframe(tmp_path):
    with pytest.raises(InputError):
        write_geojson(tmp_path / "x.geojson", pd.DataFrame({"a": [1]}), SI)


# --- RFC 7946 GeoJSON ---------------------------------------------------------------

FT_US = 1200 / 3937                    # metres per US survey foot (exact by definition)


def _positions(coords):
    """Every position of a GeoJSON coordinates array."""
    if coords and isinstance(coords[0], (int, float)):
        return [coords]
    return [p for c in coords for p in _positions(c)]


def _signed_area(ring):
    """Shoelace area of a ring in lon/lat: positive when counterclockwise."""
    xy = np.asarray(ring, dtype=float)[:, :2]
    return 0.5 * float(np.sum(xy[:-1, 0] * xy[1:, 1] - xy[1:, 0] * xy[:-1, 1]))


def rfc7946_problems(doc, decimals):
    """What in a parsed GeoJSON document breaks RFC 7946 as fillstress writes it: a
    ``crs`` member (section 4 removed it), positions outside longitude/latitude ranges or
    with more than `decimals` decimals (section 11.2), open or short rings, and polygon
    rings against the right-hand rule (section 3.1.6: exterior counterclockwise, holes
    clockwise)."""
    problems = []
    if doc.get("type") != "FeatureCollection":
        problems.append("not a FeatureCollection")
    if "crs" in doc:
        problems.append("crs member")
    for k, feat in enumerate(doc.get("features", [])):
        geom = feat["geometry"]
        for lon, lat, *_ in _positions(geom["coordinates"]):
            if not (-180 <= lon <= 180 and -90 <= lat <= 90):
                problems.append(f"feature {k}: ({lon}, {lat}) is not longitude/latitude")
            for v in (lon, lat):
                if len(repr(float(v)).split(".")[1]) > decimals:
                    problems.append(f"feature {k}: {v!r} has more than {decimals} decimals")
        polygons = {"Polygon": [geom["coordinates"]],
                    "MultiPolygon": geom["coordinates"]}.get(geom["type"], [])
        for rings in polygons:
            for r, ring in enumerate(rings):
                if len(ring) < 4 or ring[0] != ring[-1]:
                    problems.append(f"feature {k}: ring {r} is not a closed linear ring")
                elif (_signed_area(ring) > 0) != (r == 0):
                    problems.append(f"feature {k}: ring {r} against the right-hand rule")
    return problems


def _clockwise_yard():
    """A building 80 x 50 ftUS near E 960 000, N 205 000 ftUS (EPSG:2263) in internal
    metres, exterior ring clockwise and a courtyard hole counterclockwise: both against
    the right-hand rule, for the writer to turn."""
    e, n = 960000.0, 205000.0
    shell = [(e, n), (e, n + 50), (e + 80, n + 50), (e + 80, n)]
    hole = [(e + 30, n + 20), (e + 50, n + 20), (e + 50, n + 30), (e + 30, n + 30)]
    ft = Polygon(shell, [hole])
    return ft, Polygon([(x * FT_US, y * FT_US) for x, y in shell],
                       [[(x * FT_US, y * FT_US) for x, y in hole]])


def test_geojson_is_rfc7946_and_returns_to_the_site_crs_within_its_precision(tmp_path):
    import json
    in_feet, in_metres = _clockwise_yard()
    frame = gpd.GeoDataFrame({"receptor_id": ["Tannery"], "foundation_depth": [1.2192]},
                             geometry=[in_metres])
    decimals = geojson_decimals(1.524)                     # 5 ft cells
    path = write_geojson(tmp_path / "buildings.geojson", frame, US, crs="EPSG:2263",
                         decimals=decimals)
    doc = json.loads(path.read_text())
    assert rfc7946_problems(doc, decimals) == []
    # the check itself sees a crs member, projected numbers and a clockwise exterior
    bad = {"type": "FeatureCollection", "crs": {}, "features": [{"geometry": {
        "type": "Polygon", "coordinates": [[[0, 0], [0, 1], [1, 1], [1, 0], [0, 0]]]}},
        {"geometry": {"type": "Point", "coordinates": [960000.0, 205000.0]}}]}
    assert len(rfc7946_problems(bad, decimals)) == 3
    # Back to the site CRS with pyproj alone: within the rounding of `decimals` decimals
    # of a degree (half a unit in each of lon and lat, at most 111.7 km a degree).
    to_site = pyproj.Transformer.from_crs(4326, 2263, always_xy=True)
    tolerance_ft = 0.5 * 10.0 ** -decimals * 111_700 * np.sqrt(2) / FT_US
    assert tolerance_ft < 0.04                             # ~1 cm: survey precision
    back = np.array(to_site.transform(*np.array(doc["features"][0]["geometry"]
                                                 ["coordinates"][0]).T)).T
    want = np.array(in_feet.exterior.coords)
    # the writer may start the turned ring at another vertex: compare as vertex sets
    gap = np.linalg.norm(back[:, None, :] - want[None, :, :], axis=2).min(axis=1)
    assert gap.max() < tolerance_ft
    read = gpd.read_file(path)
    assert read.crs.to_epsg() == 4326
    assert read.to_crs(2263).geometry[0].symmetric_difference(in_feet).area < \
        tolerance_ft * in_feet.length
    assert read["foundation_depth_ft"].tolist() == pytest.approx([4.0])


def test_results_folder_reads_rfc7946_features_back_in_the_site_crs(tmp_path):
    import json
    in_feet, in_metres = _clockwise_yard()
    frame = gpd.GeoDataFrame({"receptor_id": ["Tannery"]}, geometry=[in_metres])
    write_geojson(tmp_path / "buildings.geojson", frame, US, crs="EPSG:2263")
    manifest = {"units": {"system": "US", "length": "ft", "pressure": "psf",
                          "unit_weight": "pcf", "settlement": "in", "plan": "ftUS"},
                "crs": pyproj.CRS("EPSG:2263").to_wkt(), "settings": {}}
    (tmp_path / "manifest.json").write_text(json.dumps(manifest))
    # a folder that does not say its GeoJSON is WGS 84 is read as site coordinates
    legacy = ResultsFolder(tmp_path).features("buildings")[0].geometry
    assert abs(legacy.exterior.coords[0][0]) <= 180
    manifest["settings"]["geojson_crs"] = "EPSG:4326"
    (tmp_path / "manifest.json").write_text(json.dumps(manifest))
    feature = ResultsFolder(tmp_path).features("buildings")[0]
    assert feature.receptor_id == "Tannery"
    tolerance_ft = 0.5 * 10.0 ** -7 * 111_700 * np.sqrt(2) / FT_US
    assert feature.geometry.symmetric_difference(in_feet).area < tolerance_ft * in_feet.length
    assert len(feature.geometry.interiors) == 1
    del manifest["crs"]
    (tmp_path / "manifest.json").write_text(json.dumps(manifest))
    with pytest.raises(InputError, match="buildings.geojson.*names no site CRS"):
        ResultsFolder(tmp_path).features("buildings")


def test_geojson_of_a_site_without_crs_is_in_its_own_length_unit(tmp_path):
    """A local US site: no CRS to reproject from, so plan coordinates in feet, as the CSV."""
    pts = borehole_points("BH-9", 30.48, 60.96, 0.0, 3.048, 3.048)
    path = write_points_geojson(tmp_path / "boreholes_points.geojson", pts, US)
    back = gpd.read_file(path)
    assert back.geometry.x.tolist() == pytest.approx([100.0, 100.0])
    assert back["x_ft"].tolist() == pytest.approx([100.0, 100.0])


def test_geojson_decimals_follow_the_cell():
    # 0.5e-7 degree * 111.7 km = 5.6 mm <= 1 cm; 0.25 m cells want 2.5 mm: 8 decimals
    assert [geojson_decimals(c) for c in (None, 10.0, 1.0, 0.25, 0.01)] == [7, 7, 7, 8, 9]
    with pytest.raises(InputError, match="cell_m"):
        geojson_decimals(0.0)
