"""The 3D scene: offscreen renders, colour ranges, sliders and the standalone HTML scene.

Data come from tests/results_fixture.py (invented site). Colour checks invert the
rendered pixels through matplotlib's viridis table: slices are drawn unlit, so their
pixels are exactly table colours and map back to the values they show.
"""
from __future__ import annotations

import shutil

import numpy as np
import pandas as pd
import pytest
from matplotlib import colormaps
from PIL import Image

from fillstress import scene_page, viewer
from fillstress.errors import InputError
from guide_images import keep
from results_fixture import write_results_folder

@pytest.fixture(scope="module")
def truth(tmp_path_factory):
    return write_results_folder(tmp_path_factory.mktemp("viewer") / "run")


def _image(path) -> np.ndarray:
    return np.asarray(Image.open(path).convert("RGB")).astype(int)


def _distinct_colours(img) -> int:
    return len(np.unique(img.reshape(-1, 3), axis=0))


def _values_from_viridis(img, lo, hi, tol=4):
    """Values shown by pixels that are (within `tol`) colours of the 256-entry viridis table."""
    table = np.round(colormaps["viridis"](np.linspace(0, 1, 256))[:, :3] * 255).astype(int)
    colours, inverse = np.unique(img.reshape(-1, 3), axis=0, return_inverse=True)
    dist = np.abs(colours[:, None, :] - table[None, :, :]).max(axis=2)
    best = dist.argmin(axis=1)
    hit = dist[np.arange(colours.shape[0]), best] <= tol
    per_pixel = hit[inverse.ravel()]
    return lo + best[hit] / 255.0 * (hi - lo), per_pixel.mean()


def _all_point_values(folder, column):
    vals = [pd.read_csv(p)[column].to_numpy() for p in sorted(folder.glob("*_points.csv"))]
    return np.concatenate(vals)


def test_full_render_is_not_blank(truth, tmp_path):
    path = viewer.render_png(truth.path, tmp_path / "scene.png", window_size=(640, 480),
                             exaggeration=2.0)
    img = _image(path)
    assert img.shape == (480, 640, 3)
    non_white = np.any(img < 245, axis=2).mean()
    assert non_white > 0.1          # slices cut below 2 % of the range leave white around them
    assert _distinct_colours(img) > 500
    assert [p.name for p in tmp_path.iterdir()] == ["scene.png"]     # no temporary left


def test_colour_range_is_robust_and_can_be_set(truth):
    plotter = viewer.build_scene(truth.path)
    try:
        lo, hi = plotter.fillstress_clim
        title = next(t for t in plotter.scalar_bars.keys() if "σz" in t)
    finally:
        plotter.close()
    points = _all_point_values(truth.path, "dsz_kPa")
    assert min(truth.dsz.min(), points.min()) >= 0.0
    assert lo == 0.0                                   # non-negative data: the bar starts at 0
    # The top is the 99.5th percentile of the slice values: below the one hottest cell,
    # above all but a few.
    assert hi == pytest.approx(np.percentile(truth.dsz, viewer.ROBUST_PERCENTILE))
    assert np.mean(truth.dsz <= hi) >= 0.99 and hi < truth.dsz.max()
    assert title == "Δσz (kPa)"
    plotter = viewer.build_scene(truth.path, colour_range=(5.0, 50.0))
    try:
        assert plotter.fillstress_clim == (5.0, 50.0)
    finally:
        plotter.close()
    with pytest.raises(InputError, match="colour_range"):
        viewer.build_scene(truth.path, colour_range=(50.0, 5.0))


def test_slice_pixels_show_the_slice_values(truth, tmp_path):
    plotter = viewer.build_scene(truth.path)
    lo, hi = plotter.fillstress_clim
    plotter.close()
    path = viewer.render_png(truth.path, tmp_path / "plan.png", camera="xy", depth=6.0,
                             layers=("slices",), window_size=(600, 450), slice_floor=0.0)
    img = _image(path)[:, : int(600 * 0.8)]            # leave out the scalar bar on the right
    shown, fraction = _values_from_viridis(img, lo, hi)
    assert fraction > 0.25                             # the slice fills much of the view
    step = (hi - lo) / 255.0
    slice6 = truth.dsz[truth.depths.index(6.0)]
    assert shown.max() == pytest.approx(min(slice6.max(), hi), abs=3 * step)
    assert shown.min() == pytest.approx(slice6.min(), abs=3 * step)
    # The 6 m slice is weaker than the 2 m one: its colours stop short of the top of the bar.
    assert shown.max() < truth.dsz.max() - 10 * step


def test_depth_option_shows_only_that_slice(truth):
    plotter = viewer.build_scene(truth.path, depth=2.0, layers=("slices",))
    try:
        seen = {d: bool(a.GetVisibility()) for d, a in plotter.fillstress_slice_actors}
    finally:
        plotter.close()
    assert seen == {2.0: True, 6.0: False}
    with pytest.raises(InputError, match="depth"):
        viewer.build_scene(truth.path, depth=3.0, layers=("slices",))


def test_depth_slider_is_in_depth_units_and_snaps_to_slices(truth):
    import vtk
    plotter = viewer.build_scene(truth.path, interactive=True, layers=("slices",))
    try:
        assert len(plotter.widgets.slider_widgets) == 2          # depth and exaggeration
        depth_slider = plotter.widgets.slider_widgets[0]
        rep = depth_slider.GetRepresentation()
        assert (rep.GetMinimumValue(), rep.GetMaximumValue()) == (2.0, 6.0)
        assert rep.GetTitleText() == "slice depth (m)"
        rep.SetValue(4.5)                                          # between slices: the nearer
        depth_slider.InvokeEvent(vtk.vtkCommand.EndInteractionEvent)
        seen = {d: bool(a.GetVisibility()) for d, a in plotter.fillstress_slice_actors}
        caption = plotter.actors["caption"].GetInput()
        # Sliders sit below the colour bar, left of it: nothing overlaps.
        bar = next(iter(plotter.scalar_bars.values()))
        bar_left, bar_bottom = bar.GetPositionCoordinate().GetValue()[:2]
        for widget in plotter.widgets.slider_widgets:
            r = widget.GetRepresentation()
            right = max(r.GetPoint1Coordinate().GetValue()[0], r.GetPoint2Coordinate().GetValue()[0])
            top = max(r.GetPoint1Coordinate().GetValue()[1], r.GetPoint2Coordinate().GetValue()[1])
            assert right < bar_left and top < bar_bottom
    finally:
        plotter.close()
    assert rep.GetValue() == 6.0
    assert seen == {2.0: False, 6.0: True}
    assert "slice shown: 6 m deep" in caption


def test_exaggeration_slider_reframes_and_recaptions(truth):
    import vtk
    plotter = viewer.build_scene(truth.path, interactive=True, window_size=(900, 675))
    try:
        slider = plotter.widgets.slider_widgets[1]
        slider.GetRepresentation().SetValue(9.0)
        slider.InvokeEvent(vtk.vtkCommand.EndInteractionEvent)
        caption = plotter.actors["caption"].GetInput()
        img = plotter.screenshot(return_img=True)[..., :3].astype(int)
        ren = plotter.renderer
        x0, x1, y0, y1, z0, z1 = ren.ComputeVisiblePropBounds()
        corners = [(x, y, z) for x in (x0, x1) for y in (y0, y1) for z in (z0, z1)]
        inside = []
        for c in corners:
            ren.SetWorldPoint(*c, 1.0)
            ren.WorldToDisplay()
            px, py, _ = ren.GetDisplayPoint()
            inside.append(-1 <= px <= 901 and -1 <= py <= 676)
    finally:
        plotter.close()
    keep(img, "window_exaggeration_9.png")
    assert "vertical exaggeration 9" in caption
    assert all(inside)                 # re-framed: the stretched scene stays in the window
    assert _distinct_colours(img) > 200


def test_keys_listed_on_h_and_window_titled(truth):
    plotter = viewer.build_scene(truth.path, interactive=True)
    try:
        assert plotter.ren_win.GetWindowName() == "fillstress — Quillmere Yard preload trial"
        assert plotter.actors["keys_hint"].GetInput() == "h: keys"
        for callback in plotter.iren._key_press_event_callbacks["h"]:
            callback()
        listed = plotter.actors["keys"].GetInput()
        for callback in plotter.iren._key_press_event_callbacks["h"]:
            callback()
        hidden = plotter.actors["keys"].GetInput()
    finally:
        plotter.close()
    assert "q  close the window" in listed and "rotate" in listed
    assert hidden == ""


def test_vertical_exaggeration_scales_depth(truth):
    plotter = viewer.build_scene(truth.path, exaggeration=3.0, layers=("slices",))
    try:
        zmin = plotter.bounds[4]
    finally:
        plotter.close()
    assert zmin == pytest.approx(-3.0 * max(truth.depths))


def test_other_quantities(truth):
    plotter = viewer.build_scene(truth.path, quantity="stress_ratio")
    lo, hi = plotter.fillstress_clim
    title = next(iter(plotter.scalar_bars.keys()))
    plotter.close()
    cube = truth.dsz / np.array([18.0, 54.0])[:, None, None]     # σ'v0 = 9 z of the fixture
    assert hi == pytest.approx(np.percentile(cube, viewer.ROBUST_PERCENTILE))
    assert lo == 0.0
    assert title == "Δσz / σ′v0"
    # Settlement has no slices here: the range is the points' 95th percentile, so the one
    # borehole top does not wash out the building and pipe points.
    plotter = viewer.build_scene(truth.path, quantity="settlement")
    lo, hi = plotter.fillstress_clim
    plotter.close()
    settlement = _all_point_values(truth.path, "settlement_mm")
    assert hi == pytest.approx(np.nanpercentile(settlement, 95.0))
    assert hi < np.nanmax(settlement)


def test_sigma_v0_and_ratio_slices_from_the_depth_profile(truth, tmp_path):
    """σ'v0 slices come from the cube's per-depth profile; the stress ratio is Δσz over it
    when the cube holds no ratio of its own."""
    import xarray as xr
    from fillstress.io.results import ResultsFolder
    copy = tmp_path / "copy"
    shutil.copytree(truth.path, copy)
    with xr.open_dataset(copy / "stress_cube.nc") as ds:
        ds = ds.load().drop_vars("stress_ratio_plan")
    ds.to_netcdf(copy / "stress_cube.nc")
    folder = ResultsFolder(copy)
    sigma = folder.plan_slices("sigma_v0")
    ratio = folder.plan_slices("stress_ratio")
    assert [f.depth for f in sigma] == [2.0, 6.0] == [f.depth for f in ratio]
    np.testing.assert_allclose(sigma[1].values, 54.0)
    np.testing.assert_allclose(ratio[0].values, truth.dsz[0] / 18.0)
    plotter = viewer.build_scene(copy, quantity="sigma_v0", layers=("slices",))
    try:
        assert plotter.fillstress_clim[1] == pytest.approx(54.0)
        assert next(iter(plotter.scalar_bars.keys())) == "σ′v0 (kPa)"
    finally:
        plotter.close()


def test_colour_maps_stay_light_at_low_values():
    """The lowest colour of every map is far from black, so low values still read."""
    for quantity in viewer.QUANTITY_TITLES:
        low = viewer.colour_table(quantity)[0].astype(int)
        assert low.sum() > 80, quantity             # magma's own first entry sums to 4


@pytest.mark.parametrize("kwargs, needle", [
    ({"exaggeration": 0.0}, "exaggeration"),
    ({"quantity": "pore_pressure"}, "quantity"),
    ({"layers": ("fill", "clouds")}, "layers"),
    ({"slice_floor": 1.5}, "slice_floor"),
    ({"depth": "deep"}, "depth"),
    ({"depth": float("nan")}, "depth"),
    ({"colour_range": (1.0, float("inf"))}, "colour_range"),
])
def test_bad_arguments(truth, kwargs, needle):
    with pytest.raises(InputError, match=needle):
        viewer.build_scene(truth.path, **kwargs)


def test_quantity_missing_from_folder(truth, tmp_path):
    copy = tmp_path / "copy"
    shutil.copytree(truth.path, copy)
    for p in copy.glob("*_points.csv"):
        pd.read_csv(p).drop(columns=["settlement_mm"]).to_csv(p, index=False)
    with pytest.raises(InputError, match="settlement"):
        viewer.build_scene(copy, quantity="settlement")


def test_plan_in_another_unit_than_depth_is_scaled(truth, tmp_path):
    """An SI site in a US-survey-foot CRS: x_ftUS, y_ftUS columns (docs/results-folder.md)
    are read and drawn in metres, like the depths, so the scene keeps its proportions."""
    import json
    from pyproj import CRS
    from fillstress.units import US_SURVEY_FOOT
    copy = tmp_path / "copy"
    shutil.copytree(truth.path, copy)
    manifest = json.loads((copy / "manifest.json").read_text())
    manifest["units"]["plan"] = "ftUS"
    manifest["crs"] = CRS.from_epsg(2263).to_wkt()     # NAD83 / New York Long Island (ftUS)
    (copy / "manifest.json").write_text(json.dumps(manifest))
    x_m, depth_m = [], []
    for p in copy.glob("*_points.csv"):
        df = pd.read_csv(p)
        x_m.append(df["x_m"].to_numpy())
        depth_m.append(df["depth_m"].to_numpy())
        for axis in ("x", "y"):
            df[f"{axis}_ftUS"] = df.pop(f"{axis}_m") / US_SURVEY_FOOT
        df.to_csv(p, index=False)
    scene = viewer.scene_parts(copy, layers=("points",), exaggeration=1.0)
    pts = np.concatenate([p.mesh.points for p in scene.parts if p.kind == "points"])
    xmin, xmax, zmin = pts[:, 0].min(), pts[:, 0].max(), pts[:, 2].min()
    x_m, depth_m = np.concatenate(x_m), np.concatenate(depth_m)
    assert xmax - xmin == pytest.approx(np.ptp(x_m), rel=1e-6)
    assert zmin == pytest.approx(-depth_m.max(), rel=1e-6)


def test_export_default_path(truth, tmp_path):
    copy = tmp_path / "copy"
    shutil.copytree(truth.path, copy)
    assert scene_page.export_scene_html(copy) == copy / "scene.html"
    assert (copy / "scene.html").stat().st_size > 10_000
    assert not [p.name for p in copy.iterdir() if p.name.startswith(".")]   # no temporary
    with pytest.raises(InputError, match="folder does not exist"):
        viewer.render_png(copy, tmp_path / "no_such_folder" / "view.png")
    with pytest.raises(InputError, match="folder does not exist"):
        scene_page.export_scene_html(copy, tmp_path / "no_such_folder" / "scene.html")


def test_slice_floor_cuts_low_values(truth, tmp_path):
    """With a floor, the slice shows no colour below floor × the colour maximum."""
    plotter = viewer.build_scene(truth.path)
    lo, hi = plotter.fillstress_clim
    plotter.close()
    floor = 0.1
    path = viewer.render_png(truth.path, tmp_path / "cut.png", camera="xy", depth=2.0,
                             layers=("slices",), window_size=(600, 450), slice_floor=floor)
    shown, fraction = _values_from_viridis(_image(path)[:, : int(600 * 0.8)], lo, hi)
    step = (hi - lo) / 255.0
    slice2 = truth.dsz[truth.depths.index(2.0)]
    assert fraction > 0.002
    assert shown.min() >= lo + floor * (hi - lo) - 3 * step
    assert shown.max() == pytest.approx(min(slice2.max(), hi), abs=3 * step)
    # the cut removes the part of the slice below the floor: less of the view is coloured
    full = viewer.render_png(truth.path, tmp_path / "full.png", camera="xy", depth=2.0,
                             layers=("slices",), window_size=(600, 450), slice_floor=0.0)
    _, full_fraction = _values_from_viridis(_image(full)[:, : int(600 * 0.8)], lo, hi)
    assert fraction < full_fraction


@pytest.mark.parametrize("plan, height, expected", [
    (300.0, 20.0, 5.0),      # 0.35 × 300 / 20 = 5.25 → 5
    (300.0, 33.0, 3.0),      # 3.18 → 3
    (40.0, 30.0, 1.0),       # deeper than wide: never compressed below 1
    (1e5, 1.0, 50.0),        # capped at the largest round value
    (0.0, 10.0, 1.0),
])
def test_auto_exaggeration(plan, height, expected):
    assert viewer.auto_exaggeration(plan, height) == expected


def test_default_exaggeration_is_automatic(truth):
    plotter = viewer.build_scene(truth.path, layers=("slices",))
    try:
        exaggeration, zmin = plotter.fillstress_exaggeration, plotter.bounds[4]
    finally:
        plotter.close()
    points = np.concatenate([pd.read_csv(p)["depth_m"].to_numpy()
                             for p in sorted(truth.path.glob("*_points.csv"))])
    height = truth.thickness.max() + max(max(truth.depths), points.max())
    span = (np.ptp(truth.x) + np.ptp(truth.y)) / 2
    assert exaggeration == viewer.auto_exaggeration(span, height)
    assert zmin == pytest.approx(-exaggeration * max(truth.depths))


def test_boreholes_are_thin_lines_whatever_the_site_span(tmp_path):
    """A borehole is a line of a few pixels, not a tube scaled on the plan span (on a long
    corridor that tube was a wide black column)."""
    from fillstress.run.compute import run_site_file
    from fillstress.examples import example_site
    out = tmp_path / "res"
    run_site_file(example_site("preload_surcharge"), out, report=False)
    holes = [p for p in viewer.scene_parts(out).parts if p.layer == "boreholes"]
    assert holes and all(p.kind == "lines" and p.mesh.n_points == 2 for p in holes)


def test_ground_on_its_own_nodes_is_what_interpolating_there_gives():
    """The ground of a lattice on the ground raster's nodes is read off the raster: equal,
    bit for bit, to interpolating it there (the earlier way); elsewhere it interpolates."""
    import pyvista as pv

    from fillstress.io.results import PlanField
    rng = np.random.default_rng(5)
    x, y = 1000.0 + 1.5 * np.arange(70), 20.0 + 2.5 * np.arange(40)
    values = 30.0 + rng.random((40, 70))
    values[:3, :5] = np.nan                                       # no data: lowest ground
    frame = object.__new__(viewer._Frame)
    frame._ground = PlanField("ground_elevation", "analysis", None, x, y, values, "m")
    frame.z_ref = float(np.nanmin(values))
    frame.x0, frame.y0, frame.plan_to_length, frame.exaggeration = x[0], y[0], 1.0, 3.0
    on_nodes = frame._ground_on(x, y)
    np.testing.assert_array_equal(on_nodes, frame.ground(*np.meshgrid(x, y)))
    assert np.isfinite(on_nodes).all()
    between = x[:-1] + 0.4
    np.testing.assert_array_equal(frame._ground_on(between, y),
                                  frame.ground(*np.meshgrid(between, y)))
    f = PlanField("dsz", "plan", 2.0, x, y, values, "kPa")
    height = np.full(values.shape, -2.0)
    xx, yy = np.meshgrid(x, y)
    pts = frame.points(xx, yy, height)                             # interpolated everywhere
    before = pv.StructuredGrid(*(pts[:, k].reshape(xx.shape) for k in range(3)))
    now = frame.surface(f, height)
    np.testing.assert_array_equal(now.points, before.points)
    assert now.dimensions == before.dimensions == (40, 70, 1)


def test_colour_range_partitioned_in_place_is_the_copying_one_and_leaves_the_data():
    """_colour_range partitions its own copy of the values (np.percentile with
    overwrite_input): the same range, bit for bit, as the copying call, and the slices'
    and points' values as they were."""
    from fillstress.io.results import PlanField
    rng = np.random.default_rng(11)
    grids = [rng.gamma(2.0, 30.0, (37, 53)) for _ in range(3)]
    grids[1][4:9, 2:7] = np.nan
    slices = [PlanField("dsz", "plan", d, np.arange(53.0), np.arange(37.0), g.copy(), "kPa")
              for d, g in zip((2.0, 5.0, 9.0), grids)]
    points = np.r_[rng.gamma(2.0, 30.0, 500), np.nan]
    kept = points.copy()
    for shown, q in ((slices, viewer.ROBUST_PERCENTILE), ([], 95.0)):
        values = (np.concatenate([g[np.isfinite(g)] for g in grids]) if shown
                  else points[np.isfinite(points)])
        copied = float(np.percentile(values, q))
        (lo, hi), robust, top = viewer._colour_range(shown, points, None)
        assert (lo, hi, robust, top) == (0.0, copied, True, float(values.max()))
    for f, g in zip(slices, grids):
        np.testing.assert_array_equal(f.values, g)
    np.testing.assert_array_equal(points, kept)
