"""Surfaces sampled only on the cells they reach, against the full-lattice evaluation
(tests/reference.py: every cell of the lattice sampled, row by row)."""
import importlib.util
from pathlib import Path

import numpy as np
import pytest
from matplotlib.tri import LinearTriInterpolator

import reference
from fillstress.grid import GridSpec
from fillstress.shapes import surfaces
from fillstress.shapes.coverage import cells_meeting_boxes
from fillstress.shapes.surfaces import (RasterSurface, TinSurface, elevation_at_centres,
                                        fill_from_surfaces, resample_to_grid)
from fillstress.site.build import load_site

FOOT_US = 1200 / 3937
# (metres per site unit, a state-plane or UTM origin in site units, cell in site units)
UNITS = {"us_feet": (FOOT_US, (3_048_000.0, 10_071_000.0), 5.0),
         "metres": (1.0, (400_000.0, 5_500_000.0), 2.0)}
RTOL = 1e-12       # round-off: the cells' sums are taken in another order


def _ground_z(x, y, origin_m):
    """Existing ground (m): a gentle plane and a swell (invented)."""
    u, v = x - origin_m[0], y - origin_m[1]
    return 50.0 + 0.004 * u - 0.002 * v + 1.5 * np.sin(u / 37.0) * np.cos(v / 23.0)


def _ribbon(to_m, origin, n=40):
    """A curved embankment top: two concentric arcs of vertices (a quarter turn of a
    ribbon 18 units wide, radius 120 units), triangles between them; cut at one end, fill
    up to 3 m elsewhere."""
    t = np.linspace(0.1, 1.5, n)
    centre = np.array(origin) * to_m
    rings = [centre[:, None] + r * to_m * np.vstack([np.cos(t), np.sin(t)]) for r in (111, 129)]
    xy = np.hstack(rings).T
    lift = np.tile(np.linspace(-0.6, 3.0, n), 2) + 0.3 * np.sin(7 * np.tile(t, 2))
    z = _ground_z(xy[:, 0], xy[:, 1], centre) + lift
    k = np.arange(n - 1)
    tri = np.r_[np.c_[k, k + n, k + n + 1], np.c_[k, k + n + 1, k + 1]]
    return TinSurface(np.c_[xy, z], tri), centre


def _survey_with_holes(to_m, centre, seed=7):
    """Scattered ground shots over most of the ribbon but not its far end, with two holes
    (triangles dropped) where the design still is."""
    rng = np.random.default_rng(seed)
    r = rng.uniform(100, 140, 900) * to_m
    a = rng.uniform(0.0, 1.2, 900)                  # the ribbon runs on to 1.5 rad
    xy = centre + np.c_[r * np.cos(a), r * np.sin(a)]
    pts = np.c_[xy, _ground_z(xy[:, 0], xy[:, 1], centre)]
    full = TinSurface.from_points(pts)
    mid = pts[full.triangles].mean(axis=1)[:, :2]
    holes = [centre + 120 * to_m * np.array([np.cos(a), np.sin(a)]) for a in (0.4, 0.9)]
    keep = np.all([np.hypot(*(mid - h).T) > 6 * to_m for h in holes], axis=0)
    return TinSurface(pts, full.triangles[keep])


def _lattice(surface, to_m, cell, shift=0.37):
    """A lattice over the surface's box and a margin, its origin off the vertices."""
    xmin, ymin, xmax, ymax = surface.bounds
    d = cell * to_m
    nx, ny = int((xmax - xmin) / d) + 12, int((ymax - ymin) / d) + 10
    return GridSpec(xmin - (5 + shift) * d, ymin - (4 + shift) * d, d, d, nx, ny)


def _assert_same_as_full_lattice(design, existing, spec, **kw):
    t, rep = fill_from_surfaces(design, existing, spec, **kw)
    sample_existing = existing.sample if hasattr(existing, "sample") else existing
    t_ref, rep_ref = reference.fill_from_surfaces(design, sample_existing, spec, **kw)
    np.testing.assert_allclose(t, t_ref, rtol=RTOL, atol=RTOL * np.abs(t_ref).max())
    np.testing.assert_array_equal(t == 0, t_ref == 0)    # no fill where there was none
    for key in ("area_fill", "area_cut", "area_compared", "area_design_only", "missing_at"):
        assert getattr(rep, key) == rep_ref[key], key    # counts of samples: exact
    for key in ("volume_fill", "volume_cut"):
        assert getattr(rep, key) == pytest.approx(rep_ref[key], rel=RTOL, abs=1e-9), key
    return t, rep


@pytest.mark.parametrize("units", UNITS)
@pytest.mark.parametrize("cut, tolerance, samples", [("ignore", 0.0, 4), ("unload", 0.05, 3)])
@pytest.mark.parametrize("chunk", ["one", "cells_of_a_row_split"])
def test_curved_tin_over_a_survey_with_holes_matches_the_full_lattice(units, cut, tolerance,
                                                                      samples, chunk,
                                                                      monkeypatch):
    if chunk != "one":      # a cell at a time: a row of samples spans many chunks
        monkeypatch.setattr(surfaces, "_CHUNK_POINTS", samples**2)
    to_m, origin, cell = UNITS[units]
    design, centre = _ribbon(to_m, origin)
    ground = _survey_with_holes(to_m, centre)
    spec = _lattice(design, to_m, cell)
    t, rep = _assert_same_as_full_lattice(design, ground, spec, cut=cut,
                                          tolerance=tolerance, samples=samples)
    # the case has teeth: fill, cut, design beyond the survey, and most cells unloaded
    assert rep.volume_fill > 0 and rep.volume_cut > 0
    assert rep.area_design_only > 0.05 * rep.area_compared and rep.missing_at is not None
    assert (t != 0).mean() < 0.3


@pytest.mark.parametrize("units", UNITS)
def test_survey_ground_given_as_its_sample_method_matches_the_full_lattice(units):
    """The site passes the [ground] surface as a callable (its bound sample method)."""
    to_m, origin, cell = UNITS[units]
    design, centre = _ribbon(to_m, origin)
    ground = _survey_with_holes(to_m, centre)
    _assert_same_as_full_lattice(design, ground.sample, _lattice(design, to_m, cell))


@pytest.mark.parametrize("units", UNITS)
def test_two_lifts_of_one_plan_located_once_match_the_full_lattice(units):
    """Lift 2 over lift 1: the same vertices and triangles, other elevations (one model)."""
    to_m, origin, cell = UNITS[units]
    lift_1, _ = _ribbon(to_m, origin)
    top = lift_1.points + [0.0, 0.0, 1.0]
    top[::3, 2] -= 1.4                       # lift 2 dips below lift 1 here and there
    lift_2 = TinSurface(top, lift_1.triangles)
    assert lift_2.same_plan(lift_1) and not lift_2.same_plan(_survey_with_holes(to_m, origin))
    _, rep = _assert_same_as_full_lattice(lift_2, lift_1, _lattice(lift_1, to_m, cell),
                                          cut="unload")
    assert rep.volume_fill > 0 and rep.volume_cut > 0 and rep.area_design_only == 0


def _raster_design(to_m, origin, reprojected=False):
    """A design raster (a pad on the ground plus a ramp) with a nodata patch, on a pixel
    grid that does not line up with the lattice."""
    px = 1.3 * to_m
    x0, y_top = origin[0] * to_m, origin[1] * to_m + 60 * px
    xc = x0 + (np.arange(90) + 0.5) * px
    yc = y_top - (np.arange(60) + 0.5) * px
    gx, gy = np.meshgrid(xc, yc)
    centre = np.array([x0, y_top - 60 * px])
    z = _ground_z(gx, gy, centre) + np.clip(4.0 - np.hypot(gx - xc[45], gy - yc[30]) / px / 8,
                                            -1, 3)
    z[20:26, 50:61] = np.nan
    identity = (lambda x, y: (x, y)) if reprojected else None
    return RasterSurface(z, x0, y_top, px, px, to_raster=identity), centre


@pytest.mark.parametrize("units", UNITS)
@pytest.mark.parametrize("reprojected", [False, True])
def test_raster_design_over_a_survey_with_holes_matches_the_full_lattice(units, reprojected):
    to_m, origin, cell = UNITS[units]
    design, centre = _raster_design(to_m, origin, reprojected)
    rng = np.random.default_rng(11)
    xy = centre + rng.uniform(0, 1, (700, 2)) * [80 * 1.3 * to_m, 70 * 1.3 * to_m]
    ground = TinSurface.from_points(np.c_[xy, _ground_z(xy[:, 0], xy[:, 1], centre)])
    _, rep = _assert_same_as_full_lattice(design, ground, _lattice(design, to_m, cell))
    assert rep.volume_cut > 0 and rep.area_design_only > 0


@pytest.mark.parametrize("units", UNITS)
def test_curved_tin_over_a_ground_raster_with_nodata_matches_the_full_lattice(units):
    """Existing ground as a raster: a nodata patch under the ribbon, and the raster ends
    before the ribbon does."""
    to_m, origin, cell = UNITS[units]
    design, centre = _ribbon(to_m, origin)
    xmin, ymin, xmax, ymax = design.bounds
    px = 2.7 * to_m
    cols, rows = int((xmax - xmin) / px) + 4, int(0.6 * (ymax - ymin) / px)
    xc = xmin - 2 * px + (np.arange(cols) + 0.5) * px
    yc = ymin + rows * px - (np.arange(rows) + 0.5) * px
    gx, gy = np.meshgrid(xc, yc)
    z = _ground_z(gx, gy, centre)
    patch = centre + 120 * to_m * np.array([np.cos(0.5), np.sin(0.5)])   # on the ribbon
    z[np.hypot(gx - patch[0], gy - patch[1]) < 8 * to_m] = np.nan
    ground = RasterSurface(z, xmin - 2 * px, ymin + rows * px, px, px)
    spec = _lattice(design, to_m, cell)
    _, rep = _assert_same_as_full_lattice(design, ground, spec)
    ground.z[np.isnan(ground.z)] = 50.0
    assert fill_from_surfaces(design, ground, spec)[1].area_design_only < rep.area_design_only


@pytest.mark.parametrize("units", UNITS)
def test_resampled_surfaces_match_the_full_lattice(units):
    to_m, origin, cell = UNITS[units]
    design, centre = _ribbon(to_m, origin)
    raster, _ = _raster_design(to_m, origin)
    for surface in (design, _survey_with_holes(to_m, centre), raster):
        spec = _lattice(surface, to_m, cell)
        got, want = resample_to_grid(surface, spec), reference.resample_to_grid(surface, spec)
        np.testing.assert_array_equal(np.isnan(got), np.isnan(want))
        np.testing.assert_allclose(got, want, rtol=RTOL, equal_nan=True)


@pytest.mark.parametrize("units", UNITS)
def test_ground_elevation_at_cell_centres_matches_every_centre_sampled(units):
    to_m, origin, cell = UNITS[units]
    design, centre = _ribbon(to_m, origin)
    survey = _survey_with_holes(to_m, centre)
    raster, _ = _raster_design(to_m, origin)
    spec = _lattice(design, to_m, cell)
    gx, gy = np.meshgrid(spec.x_centres, spec.y_centres)
    for ground in (survey, survey.sample, raster.sample, lambda x, y: 0 * x + 7.5):
        got = elevation_at_centres(ground, spec)
        want = ground(gx, gy) if not hasattr(ground, "sample") else ground.sample(gx, gy)
        np.testing.assert_array_equal(got, want)        # same points, same values; NaN too
    assert np.isnan(elevation_at_centres(survey, spec)).mean() > 0.5


def test_tin_sampling_equals_matplotlib_linear_interpolation():
    """The replaced call: matplotlib's LinearTriInterpolator on the same triangulation."""
    design, _ = _ribbon(FOOT_US, UNITS["us_feet"][1])
    rng = np.random.default_rng(2)
    xmin, ymin, xmax, ymax = design.bounds
    x = rng.uniform(xmin - 5, xmax + 5, (300, 70))
    y = rng.uniform(ymin - 5, ymax + 5, (300, 70))
    want = LinearTriInterpolator(design._tri, design.points[:, 2])(x - design.origin[0],
                                                                    y - design.origin[1])
    got = design.sample(x, y)
    np.testing.assert_array_equal(got, np.ma.filled(want.astype(float), np.nan))
    assert 0.05 < np.isfinite(got).mean() < 0.9


def _boxes_reference(boxes, spec, margin):
    """Cell by cell: is a box within `margin` cells (floor of its corners' cell index)?"""
    out = np.zeros(spec.shape, bool)
    for j in range(spec.ny):
        for i in range(spec.nx):
            for xmin, ymin, xmax, ymax in boxes:
                lo_i = np.floor((xmin - spec.x0) / spec.dx) - margin
                hi_i = np.floor((xmax - spec.x0) / spec.dx) + margin
                lo_j = np.floor((ymin - spec.y0) / spec.dy) - margin
                hi_j = np.floor((ymax - spec.y0) / spec.dy) + margin
                out[j, i] |= lo_i <= i <= hi_i and lo_j <= j <= hi_j
    return out


@pytest.mark.parametrize("margin", [0, 1, 2])
def test_cells_meeting_boxes_match_a_cell_by_cell_loop(margin):
    rng = np.random.default_rng(margin)
    spec = GridSpec(10.0, -4.0, 1.5, 2.0, 23, 17)
    lo = rng.uniform([0, -10], [50, 35], (25, 2))
    boxes = np.c_[lo, lo + rng.uniform(0, 9, (25, 2))]           # some reach off the grid
    boxes[0] = (-100, -100, -90, -90)                             # one wholly off it
    got = cells_meeting_boxes(boxes, spec, margin=margin)
    np.testing.assert_array_equal(got, _boxes_reference(boxes, spec, margin))
    assert 0 < got.mean() < 1


def test_every_sample_on_a_tin_lies_in_a_cell_it_reaches():
    design, _ = _ribbon(1.0, (0.0, 0.0))
    spec = GridSpec(-5.0, -5.0, 0.7, 0.7, 260, 260)
    gx, gy = np.meshgrid(spec.x_centres, spec.y_centres)
    on = np.isfinite(design.sample(gx, gy))
    reached = design.cells_reached(spec)
    assert on.any() and not (on & ~reached).any()
    assert reached.mean() < 0.2


# --- a whole site: the corridor in US feet and a pad in metres --------------------------
def _corridor_tool():
    path = Path(__file__).resolve().parents[1] / "tools" / "make_corridor_site.py"
    spec = importlib.util.spec_from_file_location("_tool_corridor_reach", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _metre_pad(folder):
    from test_site_surfaces import SITE, write_design, write_landxml
    write_design(folder / "design.tif")
    write_landxml(folder / "ground.xml")
    (folder / "site.toml").write_text(SITE)
    return folder / "site.toml"


@pytest.mark.parametrize("which", ["corridor_us_feet", "pad_metres"])
def test_site_bodies_and_half_cell_rebuild_match_the_full_lattice(which, tmp_path):
    path = (_corridor_tool().write_corridor_site(tmp_path, miles=0.2, cell_ft=10.0)
            if which == "corridor_us_feet" else _metre_pad(tmp_path))
    site = load_site(path)
    ctx = site.context
    for spec, bodies in ((site.spec, site.bodies), (site.spec.refined(2), None)):
        bodies = bodies or site.rebuild_bodies(spec)
        for body, (name, raw) in zip(bodies, ctx.cfg["bodies"].items()):
            design = ctx.surface(raw["design"])
            existing = ctx.surface(raw["existing"]).sample if raw.get("existing") \
                else site.ground
            want, rep = reference.fill_from_surfaces(design, existing, spec, cut=raw["cut"],
                                                      tolerance=raw["fill_tolerance"])
            np.testing.assert_allclose(body.thickness, want, rtol=RTOL,
                                       atol=RTOL * want.max())
            if spec is site.spec:
                got = site.cut_reports[name]
                assert (got.area_compared, got.area_design_only, got.missing_at) == \
                    (rep["area_compared"], rep["area_design_only"], rep["missing_at"])
                assert got.volume_fill == pytest.approx(rep["volume_fill"], rel=RTOL)
    gx, gy = np.meshgrid(site.spec.x_centres, site.spec.y_centres)
    np.testing.assert_array_equal(site.ground_elevation_grid(), site.ground(gx, gy))
