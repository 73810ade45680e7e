"""Body statistics, staged pressure (loads add), cell-size rule, and the footprint reader."""
import json

import geopandas
import numpy as np
import pyproj
import pytest
import shapely

from fillstress.errors import InputError
from fillstress.grid import GridSpec
from fillstress.shapes.bodies import (MAX_DEFAULT_CELLS, Body, choose_cell, refine,
                                     stage_pressure)
from fillstress.io.footprints import read_footprints
from fillstress.shapes.footprints import footprint_thickness

SPEC = GridSpec(0.0, 0.0, 1.0, 1.0, 10, 8)


def _pad(x0, x1, h):
    return footprint_thickness(shapely.box(x0, 1, x1, 6), h, SPEC)


def test_body_stats_from_a_prism():
    b = Body("west pad", "footprint", 19.5, 1, _pad(0.5, 4.5, 2.0), SPEC)
    assert b.volume == pytest.approx(4 * 5 * 2.0)
    assert b.total_load == pytest.approx(19.5 * 40.0)
    # grid estimate of the area: every touched cell counts whole
    assert b.footprint_area == pytest.approx(5 * 5)
    assert Body("w", "footprint", 19.5, 1, b.thickness, SPEC, footprint_area_m2=20.0).footprint_area == 20.0
    assert b.max_height == pytest.approx(2.0)


def test_stage_pressure_stacks_overlapping_bodies():
    base = Body("base", "footprint", 20.0, 1, _pad(0, 6, 1.0), SPEC)
    top = Body("surcharge", "footprint", 18.0, 2, _pad(3, 9, 2.0), SPEC)
    p1 = stage_pressure([base, top], SPEC, 1)
    p2 = stage_pressure([base, top], SPEC, 2)
    np.testing.assert_allclose(p1, base.pressure)
    np.testing.assert_allclose(p2, base.pressure + top.pressure)
    assert p2[3, 4] == pytest.approx(20.0 * 1.0 + 18.0 * 2.0)  # overlap: loads add
    assert stage_pressure([base, top], SPEC, 0).sum() == 0.0
    assert p2.sum() * SPEC.cell_area == pytest.approx(base.total_load + top.total_load)


def test_body_and_stage_errors():
    t = _pad(0, 6, 1.0)
    cases = [
        (dict(unit_weight=0.0), "unit_weight"),
        (dict(stage=-1), "stage"),
        (dict(stage=1.5), "stage"),
        (dict(thickness=np.zeros((3, 3))), "shape"),
        (dict(thickness=np.full(SPEC.shape, np.nan)), "NaN"),
        (dict(thickness=-t, excavation=True), "positive thickness"),
        (dict(name=""), "name"),
    ]
    base = dict(name="b", kind="footprint", unit_weight=20.0, stage=1, thickness=t, spec=SPEC)
    for change, message in cases:
        with pytest.raises(InputError, match=message):
            Body(**{**base, **change})
    other = GridSpec(0.0, 0.0, 2.0, 2.0, 5, 4)
    with pytest.raises(InputError, match="another grid"):
        stage_pressure([Body(**base)], other, 1)
    with pytest.raises(InputError, match="not a Body"):
        stage_pressure(["b"], SPEC, 1)


@pytest.mark.parametrize("feature, depth, expected", [
    (30.0, 4.0, 2.0),      # min(3.0, 2.0)
    (8.0, None, 0.5),      # 0.8 → 0.5
    (100.0, 30.0, 10.0),   # min(10, 15)
    (12.0, 0.9, 0.25),     # 0.45 → 0.25
    (5000.0, 500.0, 20.0),  # upper bound
    (0.3, 0.05, 0.1),      # lower bound
])
def test_default_cell_size(feature, depth, expected):
    assert choose_cell(feature, depth).cell_m == expected


FOOT = 0.3048


@pytest.mark.parametrize("feature_ft, depth_ft, expected_ft, rule", [
    (100.0, 13.1, 5.0, "depth rule"),    # 6.55 ft → 5 ft, not 2 m = 6.56 ft
    (30.0, None, 2.5, "feature rule"),   # 3 ft → 2.5 ft
    (120.0, 1.0, 0.5, "depth rule"),     # 0.5 ft exactly
    (2.0, 0.2, 0.5, "depth rule: half the shallowest receptor depth (0.2 ft), held to the "
                    "smallest"),         # 0.1 ft, bounded below by 0.1 m → 0.5 ft
])
def test_default_cell_is_a_round_number_of_feet_on_a_feet_site(feature_ft, depth_ft,
                                                                expected_ft, rule):
    choice = choose_cell(feature_ft * FOOT, depth_ft and depth_ft * FOOT, unit_m=FOOT,
                         unit="ft")
    assert choice.cell_m / FOOT == pytest.approx(expected_ft, rel=1e-12)
    assert choice.rule.startswith(rule)


def test_default_cell_is_coarsened_to_bound_the_cells_of_a_long_grid():
    """A 3-mile corridor's bounding box (16,000 × 9,000 ft) with a 1 ft pipe cover: the
    depth rule's 0.5 ft would give 576 million cells; the work bound takes the round
    number of feet next above sqrt(area / MAX_DEFAULT_CELLS) = 8.5 ft, i.e. 10 ft."""
    area = 16_000 * 9_000 * FOOT**2
    choice = choose_cell(60 * FOOT, 1.0 * FOOT, area_m2=area, unit_m=FOOT, unit="ft")
    assert choice.cell_m / FOOT == pytest.approx(10.0)
    assert area / choice.cell_m**2 <= MAX_DEFAULT_CELLS
    assert choice.rule.startswith("work bound") and "576,000,000 cells" in choice.rule
    small = choose_cell(60 * FOOT, 1.0 * FOOT, area_m2=400 * 300 * FOOT**2, unit_m=FOOT,
                        unit="ft")
    assert small.cell_m / FOOT == pytest.approx(0.5) and small.rule.startswith("depth")


def test_default_cell_size_and_refine_errors():
    with pytest.raises(InputError, match="smallest_feature_m"):
        choose_cell(0.0, 2.0)
    with pytest.raises(InputError, match="shallowest_depth_m"):
        choose_cell(10.0, -1.0)
    assert refine(SPEC, 4).shape == (32, 40)
    with pytest.raises(InputError, match="factor"):
        refine(SPEC, 1)


# --- footprint layers ------------------------------------------------------------------
def _write(tmp_path, name, frame):
    path = tmp_path / name
    frame.to_file(path)
    return path


def test_read_footprints_round_trip_and_foot_target(tmp_path):
    pads = geopandas.GeoDataFrame(
        {"name": ["quarry apron", "silo ring"], "height_m": [2.5, 4.0]},
        geometry=[shapely.box(500000, 6000000, 500040, 6000025),
                  shapely.Point(500100, 6000050).buffer(12).difference(
                      shapely.Point(500100, 6000050).buffer(5))],
        crs="EPSG:32632")
    path = _write(tmp_path, "pads.geojson", pads)
    got = read_footprints(path)
    assert got.height_m.tolist() == [2.5, 4.0]
    assert got.sloping_top.tolist() == [False, False]
    np.testing.assert_allclose(got.area, pads.area, rtol=1e-12)
    # A foot target CRS: internal coordinates are the pyproj coordinates × the foot
    # factor (pyproj's axis unit_conversion_factor), i.e. metres in that projection.
    target = pyproj.CRS("EPSG:2229")
    f = target.axis_info[0].unit_conversion_factor
    tr = pyproj.Transformer.from_crs(32632, target, always_xy=True)
    got_ft = read_footprints(path, target_crs=target)
    x, y = tr.transform(500000.0, 6000000.0)
    bx = got_ft.geometry[0].exterior.coords
    assert min(np.hypot(px - x * f, py - y * f) for px, py in bx) < 1e-6
    assert got_ft.crs.axis_info[0].unit_name == "metre"


def test_read_footprints_sloping_from_vertex_z(tmp_path):
    poly = shapely.Polygon([(0, 0, 1.0), (20, 0, 3.0), (20, 10, 3.0), (0, 10, 1.0)])
    path = _write(tmp_path, "ramp.geojson",
                  geopandas.GeoDataFrame({"id": [1]}, geometry=[poly], crs="EPSG:32632"))
    got = read_footprints(path, height_to_m=0.5)
    assert bool(got.sloping_top[0]) and got.height_m[0] == pytest.approx(1.5)
    assert shapely.get_coordinates(got.geometry[0], include_z=True)[1, 2] == pytest.approx(1.5)


def _geojson(tmp_path, name, features):
    doc = {"type": "FeatureCollection", "features": features,
           "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32632"}}}
    path = tmp_path / name
    path.write_text(json.dumps(doc))
    return path


def _feature(coords, **props):
    return {"type": "Feature", "properties": props,
            "geometry": {"type": "Polygon", "coordinates": [coords]}}


SQUARE = [[0, 0], [10, 0], [10, 10], [0, 10], [0, 0]]
BOWTIE = [[0, 0], [10, 10], [10, 0], [0, 10], [0, 0]]


@pytest.mark.parametrize("make, kwargs, message", [
    (lambda p: p / "missing.geojson", {}, "file not found"),
    (lambda p: (p / "broken.geojson").write_text("{not json") and p / "broken.geojson", {},
     "cannot be read"),
    (lambda p: _geojson(p, "nofeat.geojson", []), {}, "no features"),
    (lambda p: _geojson(p, "noh.geojson", [_feature(SQUARE, name="a")]), {},
     "no height attribute"),
    (lambda p: _geojson(p, "noh2.geojson", [_feature(SQUARE, name="a")]),
     {"height_field": "fill_m"}, "no height attribute 'fill_m'"),
    (lambda p: _geojson(p, "neg.geojson", [_feature(SQUARE, height=-1.0)]), {}, "negative"),
    (lambda p: _geojson(p, "nan.geojson", [_feature(SQUARE, height=None)]), {}, "NaN"),
    (lambda p: _geojson(p, "bow.geojson", [_feature(BOWTIE, height=1.0)]), {},
     "not a valid polygon"),
    # GeoJSON defaults to WGS 84, so the CRS-less case is a shapefile without .prj
    (lambda p: _write(p, "nocrs.shp", geopandas.GeoDataFrame(
        {"height": [1.0]}, geometry=[shapely.box(0, 0, 10, 10)])), {}, "no CRS"),
])
@pytest.mark.filterwarnings("ignore:'crs' was not provided")  # the CRS-less file on purpose
def test_read_footprints_bad_files(tmp_path, make, kwargs, message):
    path = make(tmp_path)
    with pytest.raises(InputError, match=message) as err:
        read_footprints(path, **kwargs)
    assert str(path) in str(err.value)


def test_read_footprints_geographic_layer_suggests_utm(tmp_path):
    pad = geopandas.GeoDataFrame({"height": [2.0]}, geometry=[shapely.box(10.50, 59.90, 10.51, 59.905)],
                                 crs="EPSG:4326")
    path = _write(tmp_path, "ll.geojson", pad)
    with pytest.raises(InputError, match="EPSG:32632"):
        read_footprints(path)
    got = read_footprints(path, target_crs="EPSG:32632")  # reprojected when a site CRS is given
    assert got.area[0] == pytest.approx(pad.to_crs(32632).area[0], rel=1e-9)


@pytest.mark.parametrize("target", [None, "EPSG:32632"])
def test_read_footprints_refuses_projected_geojson_without_crs_member(tmp_path, target):
    pad = geopandas.GeoDataFrame({"height": [2.0]},
                                 geometry=[shapely.box(583900.0, 6641200.0, 583950.0, 6641260.0)],
                                 crs="EPSG:32632")
    path = _write(tmp_path, "pad.geojson", pad)
    data = json.loads(path.read_text())
    data.pop("crs", None)                # RFC 7946: the file is then WGS 84 degrees
    path.write_text(json.dumps(data))
    assert geopandas.read_file(path).crs.to_epsg() == 4326
    with pytest.raises(InputError, match="cannot be degrees") as err:
        read_footprints(path, target_crs=target)
    assert "pad.geojson" in str(err.value)


@pytest.mark.parametrize("factor", [0.0, -1.0, float("nan"), "ft"])
def test_read_footprints_bad_height_unit_is_refused(tmp_path, factor):
    path = _write(tmp_path, "pads.geojson", geopandas.GeoDataFrame(
        {"height": [2.0]}, geometry=[shapely.box(0, 0, 4, 4)], crs="EPSG:32632"))
    with pytest.raises(InputError, match="argument height_to_m: must be"):
        read_footprints(path, height_to_m=factor)


def test_read_footprints_takes_a_geodataframe_or_geoseries_as_a_file(tmp_path):
    pads = geopandas.GeoDataFrame(
        {"name": ["wash bay"], "height": [1.8]},
        geometry=[shapely.box(612000, 5200000, 612030, 5200012)], crs="EPSG:32633")
    from_file = read_footprints(_write(tmp_path, "pads.geojson", pads), target_crs="EPSG:2229")
    in_memory = read_footprints(pads, target_crs="EPSG:2229")
    assert in_memory.height_m.tolist() == from_file.height_m.tolist() == [1.8]
    assert shapely.equals_exact(in_memory.geometry[0], from_file.geometry[0], 1e-6)
    assert pads.crs.to_epsg() == 32633 and "height_m" not in pads   # the caller's frame kept
    ramp = geopandas.GeoSeries([shapely.Polygon([(0, 0, 1.0), (20, 0, 2.0), (20, 10, 2.0)])],
                               crs="EPSG:32633")
    assert read_footprints(ramp).height_m.tolist() == [2.0]        # sloping top from z


@pytest.mark.parametrize("given, message", [
    (geopandas.GeoDataFrame({"height": [1.0]}, geometry=[shapely.Point(0, 0)],
                            crs="EPSG:32633"),
     "the footprints GeoDataFrame: feature 0 is a Point"),
    (geopandas.GeoDataFrame({"h": [1.0]}, geometry=[shapely.box(0, 0, 1, 1)], crs="EPSG:32633"),
     "the footprints GeoDataFrame: no height attribute"),
    (42, "argument path: must be a vector file path, a GeoDataFrame or a GeoSeries, got int"),
])
def test_read_footprints_in_memory_errors_name_the_source(given, message):
    with pytest.raises(InputError, match=message):
        read_footprints(given)


# --- the embankment's projection on its centreline -------------------------------------
def test_numpy_projection_equals_shapelys_on_a_curved_centreline():
    from fillstress.shapes.embankment import _Embankment
    line = shapely.LineString([(0, 0), (40, 5), (75, 30), (90, 70), (90.0, 70.0), (80, 110)])
    bank = _Embankment(line, np.array([0.0, line.length]), np.array([2.0, 3.0]), 6.0, 2.0,
                       2.0, 2.0)
    rng = np.random.default_rng(7)
    x, y = rng.uniform(-20, 110, 20_000), rng.uniform(-20, 130, 20_000)
    s, d = bank.project(x, y)
    pts = shapely.points(x, y)
    np.testing.assert_allclose(d, shapely.distance(line, pts), rtol=0, atol=1e-9)
    np.testing.assert_allclose(s, shapely.line_locate_point(line, pts), rtol=0, atol=1e-9)


def test_embankment_thickness_is_the_same_by_numpy_and_by_shapely(monkeypatch):
    from fillstress.shapes import embankment
    spec = GridSpec(0.0, 0.0, 1.5, 1.5, 120, 110)
    line = shapely.LineString([(20, 15), (80, 60), (150, 140)])
    args = dict(crest_width=8.0, side_slope=2.0, heights=[(0.0, 1.0), (120.0, 4.0),
                                                          (line.length, 2.5)],
                start_slope=2.0, end_slope="vertical")
    fast = embankment.embankment_thickness(line, spec, **args)
    monkeypatch.setattr(embankment, "LOOP_SEGMENTS", 0)
    slow = embankment.embankment_thickness(line, spec, **args)
    np.testing.assert_allclose(fast, slow, rtol=0, atol=1e-12 * slow.max())
    assert slow.max() > 3.0
