"""The 3D scene: offscreen renders, colour ranges, sliders and the standalone HTML scene.

Data come from tests/results_fixture.py (invented site). Colour checks invert the
rendered pixels through matplotlib's viridis table: slices are drawn unlit, so their
pixels are exactly table colours and map back to the values they show.
"""
from __future__ import annotations

import os
import shutil
import subprocess

import numpy as np
import pandas as pd
import pytest
from matplotlib import colormaps
from PIL import Image

from fillstress import viewer
from fillstress.errors import InputError
from results_fixture import write_results_folder

CHROMIUM = "/usr/bin/chromium"


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


def test_colour_range_is_the_data_range(truth):
    plotter = viewer.build_scene(truth.path)
    try:
        lo, hi = plotter.fillstress_clim
        title = next(t for t in plotter.scalar_bars.keys() if "stress" in t)
    finally:
        plotter.close()
    points = _all_point_values(truth.path, "dsz_kPa")
    assert min(truth.dsz.min(), points.min()) >= 0.0
    assert lo == 0.0                                   # non-negative data: the bar starts at 0
    assert hi == pytest.approx(max(truth.dsz.max(), points.max()))
    assert title.endswith("(kPa)")


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
    assert shown.max() == pytest.approx(slice6.max(), abs=3 * step)
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


def test_depth_slider_switches_slices(truth):
    import vtk
    plotter = viewer.build_scene(truth.path, interactive=True, layers=("slices",))
    try:
        assert len(plotter.widgets.slider_widgets) == 2          # depth and exaggeration
        depth_slider = plotter.widgets.slider_widgets[0]
        depth_slider.GetRepresentation().SetValue(1.0)
        depth_slider.InvokeEvent(vtk.vtkCommand.EndInteractionEvent)
        seen = {d: bool(a.GetVisibility()) for d, a in plotter.fillstress_slice_actors}
    finally:
        plotter.close()
    assert seen == {2.0: False, 6.0: True}


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
    plotter.close()
    ratios = _all_point_values(truth.path, "stress_ratio")
    cube = truth.dsz / np.array([18.0, 54.0])[:, None, None]     # σ'v0 = 9 z of the fixture
    assert hi == pytest.approx(max(cube.max(), ratios.max()))
    assert lo == 0.0 <= min(cube.min(), ratios.min())
    plotter = viewer.build_scene(truth.path, quantity="settlement")   # points only
    lo, hi = plotter.fillstress_clim
    plotter.close()
    assert hi == pytest.approx(_all_point_values(truth.path, "settlement_mm").max())


@pytest.mark.parametrize("kwargs, needle", [
    ({"exaggeration": 0.0}, "exaggeration"),
    ({"quantity": "pore_pressure"}, "quantity"),
    ({"layers": ("fill", "clouds")}, "layers"),
    ({"slice_floor": 1.5}, "slice_floor"),
    ({"depth": "deep"}, "depth"),
    ({"depth": float("nan")}, "depth"),
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
    plotter = viewer.build_scene(copy, layers=("points",), exaggeration=1.0)
    try:
        xmin, xmax, _, _, zmin, _ = plotter.bounds
    finally:
        plotter.close()
    x_m, depth_m = np.concatenate(x_m), np.concatenate(depth_m)
    assert xmax - xmin == pytest.approx(np.ptp(x_m), rel=1e-6)
    assert zmin == pytest.approx(-depth_m.max(), rel=1e-6)


def _chromium_screenshot(html_path, png_path, profile):
    if not os.path.exists(CHROMIUM):
        pytest.fail(f"{CHROMIUM} is required (apt-get install -y chromium)")
    cmd = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--enable-unsafe-swiftshader",
           "--disable-quic", "--no-first-run", "--disable-background-networking",
           "--disable-component-update", "--disable-sync", f"--user-data-dir={profile}",
           "--window-size=900,650", "--hide-scrollbars", "--virtual-time-budget=20000",
           f"--screenshot={png_path}", html_path.as_uri()]
    subprocess.run(cmd, check=True, capture_output=True, timeout=120)


def test_standalone_html_scene_draws_in_chromium(truth, tmp_path):
    html_path = viewer.export_scene_html(truth.path, tmp_path / "scene.html", exaggeration=2.0)
    text = html_path.read_text(encoding="utf-8")
    assert "vtk" in text.lower()
    for external in ('<script src="http', "<script src='http", '<link href="http', 'src="//'):
        assert external not in text
    png = tmp_path / "shot.png"
    _chromium_screenshot(html_path, png, tmp_path / "profile")
    img = _image(png)
    assert _distinct_colours(img) > 200
    assert np.any(img < 240, axis=2).mean() > 0.08   # slices cut at 2 %: white around them
    _, viridis_fraction = _values_from_viridis(img[::2, ::2], 0.0, 1.0, tol=12)
    # The slices are drawn, not just a frame: the scalar bar alone is ~1.2 % of the image,
    # the slices seen through the translucent fill and buildings add ~2.5 % more.
    assert viridis_fraction > 0.025


def test_export_default_path(truth, tmp_path):
    copy = tmp_path / "copy"
    shutil.copytree(truth.path, copy)
    assert viewer.export_scene_html(copy) == copy / "scene.html"
    assert (copy / "scene.html").stat().st_size > 10_000
    assert not [p.name for p in copy.iterdir() if p.name.startswith(".")]   # no temporary
    with pytest.raises(InputError, match="folder does not exist"):
        viewer.render_png(copy, tmp_path / "no_such_folder" / "view.png")


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
    assert shown.max() == pytest.approx(slice2.max(), abs=3 * step)
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
