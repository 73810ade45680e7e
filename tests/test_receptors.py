"""Receptor sampling: point counts, chainages and depths on hand-made geometry.

All geometry and ids are invented for these tests; expected counts are worked by hand
in the comments beside each check.
"""
from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings, strategies as st
from shapely.geometry import LineString, Point, Polygon, box

from fillstress import InputError
from fillstress.site.receptors import (POINT_COLUMNS, borehole_points, building_points,
                                  depth_from_elevation, pipe_points, plan_grid,
                                  read_receptor_layer, summarise)


# --- buildings -------------------------------------------------------------------------
def test_square_building_counts_and_positions():
    # 12 m square, lattice pitch 3 m: per axis floor(12/3) = 4 nodes centred on x = 6,
    # i.e. 1.5, 4.5, 7.5, 10.5 -> 16 interior nodes, none on the centroid or the boundary.
    pts = building_points("Wharf-Shed", box(0, 0, 12, 12), 1.2, interior_spacing=3.0,
                          profile_depths=[2.0, 5.0, 9.0])
    assert list(pts.columns) == POINT_COLUMNS
    counts = pts["role"].value_counts().to_dict()
    assert counts == {"corner": 4, "edge": 4, "centroid": 1, "interior": 16, "profile": 3}
    assert len(pts) == 28
    corners = {tuple(r) for r in pts.loc[pts.role == "corner", ["x", "y"]].to_numpy()}
    assert corners == {(0, 0), (12, 0), (12, 12), (0, 12)}
    mids = {tuple(r) for r in pts.loc[pts.role == "edge", ["x", "y"]].to_numpy()}
    assert mids == {(6, 0), (12, 6), (6, 12), (0, 6)}
    interior = pts.loc[pts.role == "interior", ["x", "y"]].to_numpy()
    assert sorted(set(interior[:, 0])) == [1.5, 4.5, 7.5, 10.5]
    assert sorted(set(interior[:, 1])) == [1.5, 4.5, 7.5, 10.5]
    plan = pts[pts.role != "profile"]
    assert np.all(plan["depth"] == 1.2)
    profile = pts[pts.role == "profile"]
    assert profile["depth"].tolist() == [2.0, 5.0, 9.0]
    assert np.all(profile[["x", "y"]].to_numpy() == [6.0, 6.0])
    assert pts["point_id"].is_unique and pts["point_id"].iloc[2] == "Wharf-Shed-c3"
    assert pts["chainage"].isna().all()
    assert (pts["receptor_kind"] == "building").all()


def test_interior_node_on_the_centroid_is_dropped():
    # Pitch 4 on a 12 m square: floor(12/4) = 3 nodes per axis at 2, 6, 10 -> 9 nodes,
    # one of which is the centroid (6, 6) and is already a point: 8 interior points.
    pts = building_points("B2", box(0, 0, 12, 12), 0.0, interior_spacing=4.0)
    assert (pts.role == "interior").sum() == 8
    assert (pts.role == "centroid").sum() == 1
    assert not pts.duplicated(["x", "y", "depth"]).any()


def test_no_interior_or_profile_when_not_asked():
    pts = building_points("B3", box(10, 20, 18, 25), 2.0)
    assert pts["role"].tolist() == ["corner"] * 4 + ["edge"] * 4 + ["centroid"]


def test_c_shaped_building_uses_a_point_inside():
    # C shape: bars 10x2 at the bottom and top, 2x6 on the left. Centroid by hand:
    # x = (20*5 + 20*5 + 12*1) / 52 = 4.08, y = 5 -> in the open gap, outside the building.
    c = Polygon([(0, 0), (10, 0), (10, 2), (2, 2), (2, 8), (10, 8), (10, 10), (0, 10)])
    assert not c.contains(c.centroid)
    pts = building_points("C1", c, 1.0, interior_spacing=1.0, profile_depths=[4.0])
    centre = pts[pts.role == "centroid"].iloc[0]
    assert c.contains(Point(centre.x, centre.y))
    prof = pts[pts.role == "profile"].iloc[0]
    assert (prof.x, prof.y) == (centre.x, centre.y)
    assert (pts.role == "corner").sum() == 8 and (pts.role == "edge").sum() == 8
    interior = pts[pts.role == "interior"]
    assert all(c.contains(Point(x, y)) for x, y in interior[["x", "y"]].to_numpy())


def test_courtyard_hole_has_no_interior_points():
    outer = [(0, 0), (20, 0), (20, 20), (0, 20)]
    hole = [(6, 6), (14, 6), (14, 14), (6, 14)]
    pts = building_points("Court", Polygon(outer, [hole]), 1.0, interior_spacing=2.0)
    inner = pts[pts.role == "interior"][["x", "y"]].to_numpy()
    in_hole = (inner[:, 0] > 6) & (inner[:, 0] < 14) & (inner[:, 1] > 6) & (inner[:, 1] < 14)
    assert inner.size and not in_hole.any()
    # Lattice 1, 3, ..., 19 (10 per axis) = 100 nodes; those inside the hole are
    # 7, 9, 11, 13 on each axis = 16; none on a boundary: 84 interior points.
    assert len(inner) == 84
    assert (pts.role == "corner").sum() == 4  # exterior ring only


@pytest.mark.parametrize("kwargs, argument", [
    (dict(footprint=LineString([(0, 0), (1, 1)])), "footprint"),
    (dict(footprint=Polygon([(0, 0), (4, 4), (4, 0), (0, 4)])), "footprint"),  # bow tie
    (dict(foundation_depth=-0.5), "foundation_depth"),
    (dict(foundation_depth=float("nan")), "foundation_depth"),
    (dict(profile_depths=[0.5, 3.0]), "profile_depths"),  # shallower than the foundation
    (dict(interior_spacing=0.0), "interior_spacing"),
    (dict(receptor_id="two words"), "receptor_id"),
])
def test_building_bad_input(kwargs, argument):
    args = dict(receptor_id="B9", footprint=box(0, 0, 5, 5), foundation_depth=1.0)
    args.update(kwargs)
    with pytest.raises(InputError) as err:
        building_points(args.pop("receptor_id"), args.pop("footprint"),
                        args.pop("foundation_depth"), **args)
    assert err.value.argument == argument


@settings(max_examples=40, deadline=None)
@given(w=st.floats(1.0, 40.0), h=st.floats(1.0, 40.0), pitch=st.floats(0.7, 9.0),
       x0=st.floats(-1e5, 1e5), y0=st.floats(-1e5, 1e5))
def test_building_points_stay_on_the_footprint(w, h, pitch, x0, y0):
    poly = box(x0, y0, x0 + w, y0 + h)
    pts = building_points("R", poly, 1.0, interior_spacing=pitch)
    grown = poly.buffer(1e-6)
    assert all(grown.covers(Point(x, y)) for x, y in pts[["x", "y"]].to_numpy())
    assert pts["point_id"].is_unique
    # Count by hand-rule: per axis the largest n >= 1 with n * pitch <= side. A centred
    # lattice with n = floor(side/pitch) never reaches the boundary, and its middle node
    # sits on the centroid (and is dropped) only when both counts are odd.
    def n_axis(length):
        n = 1
        while (n + 1) * pitch <= length * (1 + 1e-12):
            n += 1
        return n
    nx, ny = n_axis(w), n_axis(h)
    expected = nx * ny - (1 if nx % 2 == 1 and ny % 2 == 1 else 0)
    assert (pts.role == "interior").sum() == expected


# --- pipes -----------------------------------------------------------------------------
L_PIPE = LineString([(100, 200), (130, 200), (130, 220)])  # 30 m east then 20 m north


def test_l_shaped_pipe_chainages_and_positions():
    # Regular chainages every 7 m below 50 m: 0 7 14 21 28 35 42 49; vertex at 30; end 50.
    pts = pipe_points("Outfall-2", L_PIPE, 2.0, spacing=7.0)
    assert pts["chainage"].tolist() == [0, 7, 14, 21, 28, 30, 35, 42, 49, 50]
    assert pts["role"].tolist() == (["end"] + ["chainage"] * 4 + ["vertex"]
                                    + ["chainage"] * 3 + ["end"])
    by_ch = pts.set_index("chainage")
    assert (by_ch.loc[14.0, "x"], by_ch.loc[14.0, "y"]) == (114.0, 200.0)
    assert (by_ch.loc[30.0, "x"], by_ch.loc[30.0, "y"]) == (130.0, 200.0)
    assert by_ch.loc[35.0, "x"] == pytest.approx(130.0) and by_ch.loc[35.0, "y"] == pytest.approx(205.0)
    assert (by_ch.loc[50.0, "x"], by_ch.loc[50.0, "y"]) == (130.0, 220.0)
    assert np.all(pts["depth"] == 2.0)
    assert pts["point_id"].tolist()[:2] == ["Outfall-2-s1", "Outfall-2-s2"]
    assert (pts["receptor_kind"] == "pipe").all()


def test_pipe_depth_per_vertex_from_invert():
    # Invert depths 3, 4, 2 m at chainages 0, 30, 50; diameter 0.5 m -> crown = invert - 0.5.
    pts = pipe_points("Outfall-2", L_PIPE, [3.0, 4.0, 2.0], spacing=7.0, diameter=0.5,
                      level="invert").set_index("chainage")
    assert pts.loc[0.0, "depth"] == pytest.approx(2.5)
    assert pts.loc[14.0, "depth"] == pytest.approx(3.0 + 14 / 30 - 0.5)
    assert pts.loc[30.0, "depth"] == pytest.approx(3.5)
    assert pts.loc[42.0, "depth"] == pytest.approx(4.0 - 2.0 * 12 / 20 - 0.5)
    assert pts.loc[50.0, "depth"] == pytest.approx(1.5)


def test_pipe_depth_from_a_function_of_chainage():
    pts = pipe_points("P", L_PIPE, lambda ch: 1.0 + 0.02 * ch, spacing=10.0)
    assert np.allclose(pts["depth"], 1.0 + 0.02 * pts["chainage"])


def test_pipe_shorter_than_spacing_has_ends_and_vertices_only():
    pts = pipe_points("P", L_PIPE, 1.0, spacing=100.0)
    assert pts["chainage"].tolist() == [0.0, 30.0, 50.0]


def test_pipe_repeated_vertex():
    line = LineString([(0, 0), (0, 0), (10, 0)])
    pts = pipe_points("P", line, [1.0, 1.0, 2.0], spacing=5.0)
    assert pts["depth"].tolist() == [1.0, 1.5, 2.0]
    with pytest.raises(InputError, match="coincide"):
        pipe_points("P", line, [1.0, 3.0, 2.0], spacing=5.0)


@pytest.mark.parametrize("kwargs, argument", [
    (dict(depth_at=0.3, diameter=0.5, level="invert"), "depth_at"),  # crown above ground
    (dict(depth_at=2.0, level="invert"), "diameter"),
    (dict(depth_at=2.0, level="centre"), "level"),
    (dict(depth_at=[1.0, 2.0]), "depth_at"),  # 2 values for 3 vertices
    (dict(depth_at=-1.0), "depth_at"),
    (dict(depth_at=1.0, spacing=-2.0), "spacing"),
    (dict(depth_at=1.0, diameter=-0.1), "diameter"),
    (dict(depth_at=1.0, line=Point(0, 0)), "line"),
])
def test_pipe_bad_input(kwargs, argument):
    args = dict(line=L_PIPE, spacing=5.0)
    args.update(kwargs)
    with pytest.raises(InputError) as err:
        pipe_points("P7", args.pop("line"), args.pop("depth_at"), **args)
    assert err.value.argument == argument


def test_pipe_crown_with_zero_diameter_is_accepted():
    assert len(pipe_points("P", L_PIPE, 1.0, spacing=25.0, diameter=0.0)) == 4


# --- boreholes -------------------------------------------------------------------------
def test_borehole_range_includes_the_bottom():
    # 0.5 to 10 every 1.5: 0.5 2 3.5 5 6.5 8 9.5, then the bottom 10 -> 8 points.
    pts = borehole_points("BH-Kestrel", 512.0, 733.0, 0.5, 10.0, 1.5)
    assert pts["depth"].tolist() == [0.5, 2.0, 3.5, 5.0, 6.5, 8.0, 9.5, 10.0]
    assert (pts["role"] == "borehole").all() and (pts["x"] == 512.0).all()
    assert pts["point_id"].iloc[-1] == "BH-Kestrel-d8"


def test_borehole_exact_steps_and_single_point():
    assert borehole_points("B", 0, 0, 0.0, 6.0, 2.0)["depth"].tolist() == [0, 2, 4, 6]
    # 0.1 steps accumulate no extra point from rounding: 0, 0.1, ..., 0.3
    assert len(borehole_points("B", 0, 0, 0.0, 0.3, 0.1)) == 4
    assert borehole_points("B", 0, 0, 3.0, 3.0, 1.0)["depth"].tolist() == [3.0]


@pytest.mark.parametrize("top, bottom, step, argument", [
    (5.0, 2.0, 1.0, "bottom"), (-1.0, 2.0, 1.0, "top"), (0.0, 2.0, 0.0, "step")])
def test_borehole_bad_input(top, bottom, step, argument):
    with pytest.raises(InputError) as err:
        borehole_points("B", 0, 0, top, bottom, step)
    assert err.value.argument == argument


# --- plan grids ------------------------------------------------------------------------
def test_plan_grid_nodes_and_depth_order():
    g = plan_grid((10.0, 20.0, 22.0, 26.5), 3.0, [8.0, 2.0, 4.0], name="north-yard")
    assert g.depths == (2.0, 4.0, 8.0)
    assert g.x.tolist() == [10.0, 13.0, 16.0, 19.0, 22.0]
    assert g.y.tolist() == [20.0, 23.0, 26.0]


@pytest.mark.parametrize("args, argument", [
    (((0, 0, 0, 5), 1.0, [1.0]), "extent"),
    (((0, 0, 5), 1.0, [1.0]), "extent"),
    (((0, 0, 5, 5), 0.0, [1.0]), "spacing"),
    (((0, 0, 5, 5), 1.0, []), "depths"),
    (((0, 0, 5, 5), 1.0, [1.0, 1.0]), "depths"),
    (((0, 0, 5, 5), 1.0, [-1.0]), "depths"),
])
def test_plan_grid_bad_input(args, argument):
    with pytest.raises(InputError) as err:
        plan_grid(*args)
    assert err.value.argument == argument


def test_plan_grid_name_must_suit_file_names():
    with pytest.raises(InputError):
        plan_grid((0, 0, 5, 5), 1.0, [1.0], name="a/b")


# --- elevations ------------------------------------------------------------------------
def test_depth_from_constant_and_sloping_ground():
    assert float(depth_from_elevation(3.0, 4.0, 41.5, 44.0)) == 2.5
    ground = lambda x, y: 50.0 - 0.05 * x + 0.01 * y  # noqa: E731  (invented slope)
    d = depth_from_elevation([0.0, 100.0], [0.0, 200.0], [48.0, 44.0], ground)
    assert d.tolist() == pytest.approx([2.0, 50.0 - 5.0 + 2.0 - 44.0])


def test_receptor_above_ground_is_refused_by_name():
    with pytest.raises(InputError, match="pipe Q4 invert is above the ground") as err:
        depth_from_elevation([0.0, 1.0], [0.0, 0.0], [9.0, 10.5], 10.0, name="pipe Q4 invert")
    assert err.value.argument == "pipe Q4 invert"


def test_ground_giving_nan_is_refused():
    with pytest.raises(InputError) as err:
        depth_from_elevation(0.0, 0.0, 1.0, lambda x, y: np.full(np.shape(x), np.nan))
    assert err.value.argument == "ground"


# --- reading layers --------------------------------------------------------------------
def _write(tmp_path, name, frame):
    path = tmp_path / name
    frame.to_file(path, driver="GeoJSON")
    return path


def test_read_layer_ok_and_crs_callable(tmp_path):
    frame = gpd.GeoDataFrame({"name": ["Mill", "Kiln"], "fdepth": [1.5, 2.0]},
                             geometry=[box(0, 0, 5, 5), box(10, 0, 14, 6)], crs="EPSG:32633")
    path = _write(tmp_path, "b.geojson", frame)
    seen = []

    def to_site(f):
        seen.append(f.crs.to_epsg())
        return f

    out = read_receptor_layer(path, "building", id_field="name", required_fields=["fdepth"],
                              to_site_crs=to_site)
    assert out["receptor_id"].tolist() == ["Mill", "Kiln"] and seen == [32633]
    assert list(out.columns)[0] == "receptor_id"


def test_read_layer_errors(tmp_path):
    crs = "EPSG:32633"
    with pytest.raises(InputError, match="file not found"):
        read_receptor_layer(tmp_path / "absent.geojson", "pipe")
    bad = tmp_path / "bad.geojson"
    bad.write_text("{not json")
    with pytest.raises(InputError, match="cannot be read"):
        read_receptor_layer(bad, "pipe")
    empty = tmp_path / "empty.geojson"
    empty.write_text('{"type": "FeatureCollection", "features": []}')
    with pytest.raises(InputError, match="no features"):
        read_receptor_layer(empty, "pipe")
    pts = _write(tmp_path, "p.geojson", gpd.GeoDataFrame(
        {"id": ["A"]}, geometry=[Point(0, 0)], crs=crs))
    with pytest.raises(InputError, match="is a Point; pipe receptors must be LineString"):
        read_receptor_layer(pts, "pipe")
    with pytest.raises(InputError, match="attribute 'level' is missing") as err:
        read_receptor_layer(pts, "borehole", required_fields=["level"])
    assert err.value.key == "level"
    with pytest.raises(InputError, match="attribute 'uid' is missing"):
        read_receptor_layer(pts, "borehole", id_field="uid")
    gaps = _write(tmp_path, "g.geojson", gpd.GeoDataFrame(
        {"id": ["A", "B"], "level": [1.0, None]}, geometry=[Point(0, 0), Point(1, 1)], crs=crs))
    with pytest.raises(InputError, match="feature 1 has no value for 'level'"):
        read_receptor_layer(gaps, "borehole", required_fields=["level"])
    dup = _write(tmp_path, "d.geojson", gpd.GeoDataFrame(
        {"id": ["A", "A"]}, geometry=[Point(0, 0), Point(1, 1)], crs=crs))
    with pytest.raises(InputError, match="duplicate receptor id 'A'"):
        read_receptor_layer(dup, "borehole")
    with pytest.raises(InputError) as err:
        read_receptor_layer(dup, "tree")
    assert err.value.argument == "kind"


def test_read_layer_from_a_geodataframe_reprojects_to_the_site_crs():
    """Pipes given in UTM 18N (metres) to a NAD83 / New York Long Island (ftUS) site:
    reprojected with pyproj and held in internal metres, as the site file's layers are."""
    import pyproj
    pipes = gpd.GeoDataFrame({"tag": ["W-12"], "crown": [6.0]},
                             geometry=[LineString([(583000, 4507000), (583120, 4507050)])],
                             crs="EPSG:32618")
    out = read_receptor_layer(pipes, "pipe", id_field="tag", required_fields=["crown"],
                              target_crs="EPSG:2263")
    to_ft = pyproj.Transformer.from_crs(32618, 2263, always_xy=True)
    expected_ft = np.column_stack(to_ft.transform([583000, 583120], [4507000, 4507050]))
    np.testing.assert_allclose(np.asarray(out.geometry.iloc[0].coords),
                               expected_ft * 1200 / 3937, rtol=0, atol=1e-6)
    assert out.crs.axis_info[0].unit_name == "metre"
    assert out["receptor_id"].tolist() == ["W-12"] and out["crown"].tolist() == [6.0]
    # the frame itself is not changed, and without target_crs its own CRS is kept
    assert pipes.crs.to_epsg() == 32618
    assert read_receptor_layer(pipes, "pipe", id_field="tag").crs.to_epsg() == 32618


def test_read_layer_from_a_geoseries_takes_ids_from_its_index():
    holes = gpd.GeoSeries([Point(500, 600), Point(520, 610)], index=["BH-1", "BH-2"])
    out = read_receptor_layer(holes, "borehole", crs="EPSG:32633", target_crs="EPSG:32633")
    assert out["receptor_id"].tolist() == ["BH-1", "BH-2"]
    assert out.geometry.x.tolist() == [500.0, 520.0]


def test_read_layer_from_memory_refuses_with_the_frame_named():
    with pytest.raises(InputError, match="the building receptors GeoDataFrame: feature 0 "
                                         "is a Point"):
        read_receptor_layer(gpd.GeoDataFrame({"id": ["A"]}, geometry=[Point(0, 0)]),
                            "building")
    with pytest.raises(InputError, match="argument target_crs: EPSG:4326 is geographic"):
        read_receptor_layer(gpd.GeoSeries([Point(0, 0)], index=["H1"]), "borehole",
                            target_crs="EPSG:4326")
    with pytest.raises(InputError, match="must be a vector file path, a GeoDataFrame or a "
                                         "GeoSeries, got list"):
        read_receptor_layer([Point(0, 0)], "borehole")
    degrees_wrong = gpd.GeoSeries([Point(583000, 4507000)], index=["H1"], crs="EPSG:4326")
    with pytest.raises(InputError, match="GeoSeries: coordinates reach .* cannot be degrees"):
        read_receptor_layer(degrees_wrong, "borehole", target_crs="EPSG:32618")


# --- summaries -------------------------------------------------------------------------
def test_summarise_matches_a_plain_loop():
    rng = np.random.default_rng(7)
    pts = pd.concat([building_points("B1", box(0, 0, 10, 6), 1.0, interior_spacing=2.0),
                     pipe_points("P1", L_PIPE, 2.0, spacing=5.0),
                     borehole_points("H1", 3, 3, 0, 5, 1)], ignore_index=True)
    pts["dsz"] = rng.uniform(-5, 80, len(pts))
    out = summarise(pts, "dsz")
    assert out["receptor_id"].tolist() == ["B1", "P1", "H1"]
    for row in out.itertuples():
        own = pts[pts.receptor_id == row.receptor_id]
        best = max(range(len(own)), key=lambda k: own["dsz"].iloc[k])
        assert row.n_points == len(own)
        assert row.dsz_max == own["dsz"].iloc[best]
        assert (row.point_id, row.x, row.y, row.depth) == tuple(
            own[["point_id", "x", "y", "depth"]].iloc[best])


def test_summarise_refuses_missing_values():
    pts = borehole_points("H1", 0, 0, 0, 2, 1).assign(dsz=[1.0, np.nan, 2.0])
    with pytest.raises(InputError, match="non-finite"):
        summarise(pts, "dsz")
    with pytest.raises(InputError, match="missing column"):
        summarise(pts.drop(columns="depth"), "dsz")


def test_read_layer_refuses_projected_geojson_without_crs_member(tmp_path):
    import json
    frame = gpd.GeoDataFrame({"id": ["Mill"]}, geometry=[box(583900, 6641200, 583920, 6641215)],
                             crs="EPSG:32632")
    path = _write(tmp_path, "b.geojson", frame)
    data = json.loads(path.read_text())
    data.pop("crs", None)                # RFC 7946: read as WGS 84 degrees
    path.write_text(json.dumps(data))
    with pytest.raises(InputError, match="b.geojson: .*cannot be degrees"):
        read_receptor_layer(path, "building")
