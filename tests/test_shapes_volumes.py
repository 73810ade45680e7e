"""Builder volumes against analytic solids, each at two cell sizes (within 0.5 %).

Volumes are derived here in the comments (closed forms of elementary solids); the
curved-embankment check uses Pappus's centroid theorem, the varying-height one
scipy.integrate.quad.
"""
import math

import numpy as np
import pytest
import shapely
from scipy.integrate import quad

from fillstress.errors import InputError
from fillstress.grid import GridSpec
from fillstress.shapes.bodies import Body
from fillstress.shapes.embankment import embankment_thickness
from fillstress.shapes.footprints import footprint_thickness, sloping_footprint_thickness
from fillstress.shapes.stockpile import distance_to_boundary, pile_thickness

CELLS = [2.0, 0.7]


def _volume(t, spec):
    return float(t.sum() * spec.cell_area)


@pytest.mark.parametrize("cell", CELLS)
def test_prism_on_footprint_with_hole(cell):
    pad = shapely.Polygon([(2, 1), (31, 4), (27, 22), (5, 18)],
                          holes=[[(10, 8), (16, 8), (16, 12), (10, 12)]])
    spec = GridSpec.covering(pad.bounds, cell, margin=2)
    t = footprint_thickness(pad, 3.25, spec)
    # prism: V = A·h, exact whatever the cell size (brief: total load within 0.1 %)
    assert _volume(t, spec) == pytest.approx(3.25 * pad.area, rel=1e-10)


@pytest.mark.parametrize("cell", CELLS)
def test_sloping_top_wedge_and_tent(cell):
    # A quadrilateral with thickness linear in x: V = A · h(centroid) (linear function).
    quad_xy = [(0, 0), (24, 2), (22, 15), (3, 12)]
    h = lambda x, y: 0.5 + 0.1 * x + 0.05 * y  # noqa: E731
    geom = shapely.Polygon([(x, y, h(x, y)) for x, y in quad_xy])
    spec = GridSpec.covering(geom.bounds, cell, margin=1)
    c = shapely.Polygon(quad_xy).centroid
    assert _volume(sloping_footprint_thickness(geom, spec), spec) == pytest.approx(
        h(c.x, c.y) * geom.area, rel=1e-10)
    # Non-planar vertex heights: z = 0, 2, 0, 2 round a 10 m square. The constrained
    # triangulation splits it along one diagonal; each triangle holds A/2 · mean(z):
    # along the z = 0 diagonal V = 100·(2/3), along the z = 2 diagonal V = 100·(4/3).
    sq = shapely.Polygon([(0, 0, 0.0), (10, 0, 2.0), (10, 10, 0.0), (0, 10, 2.0)])
    spec2 = GridSpec.covering(sq.bounds, cell)
    v = _volume(sloping_footprint_thickness(sq, spec2), spec2)
    assert min(abs(v - 200 / 3), abs(v - 400 / 3)) < 1e-9


def test_sloping_top_needs_z_and_nonnegative():
    spec = GridSpec(0.0, 0.0, 1.0, 1.0, 5, 5)
    with pytest.raises(InputError, match="z value"):
        sloping_footprint_thickness(shapely.box(0, 0, 2, 2), spec)
    with pytest.raises(InputError, match=">= 0"):
        sloping_footprint_thickness(shapely.Polygon([(0, 0, -1), (2, 0, 1), (2, 2, 1)]), spec)


def test_distance_to_boundary_matches_shapely_distance():
    toe = shapely.Point(0, 0).buffer(10).difference(shapely.box(-2, -3, 3, 2))
    rng = np.random.default_rng(7)
    x, y = rng.uniform(-10, 10, 400), rng.uniform(-10, 10, 400)
    ref = shapely.distance(shapely.points(x, y), toe.boundary)  # slow reference
    np.testing.assert_allclose(distance_to_boundary(toe)(x, y), ref, rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("cell", CELLS)
def test_cone_pile_on_regular_polygon(cell):
    # Toe: regular 96-gon of circumradius R. With no cap, h = tan(a)·distance to the toe
    # is a pyramid whose apex is the centre, at height apothem·tan(a): V = A·H/3.
    R, n, angle = 15.0, 96, 34.0
    toe = shapely.Polygon([(40 + R * math.cos(t), 30 + R * math.sin(t))
                           for t in np.linspace(0, 2 * math.pi, n, endpoint=False)])
    H = R * math.cos(math.pi / n) * math.tan(math.radians(angle))
    spec = GridSpec.covering(toe.bounds, cell, margin=1)
    t = pile_thickness(toe, angle, spec)
    assert _volume(t, spec) == pytest.approx(toe.area * H / 3, rel=5e-3)
    assert t.max() <= H


@pytest.mark.parametrize("cell", CELLS)
def test_capped_pile_on_square_toe_is_a_frustum(cell):
    # Square toe of side L, slope t = tan(a): the level set at height z is a square of
    # side s(z) = L − 2z/t. Capped at hc: V = ∫0^hc s(z)² dz = t·(L³ − s(hc)³)/6.
    L, angle, hc = 24.0, 37.0, 4.5
    tn = math.tan(math.radians(angle))
    s_top = L - 2 * hc / tn
    exact = tn * (L**3 - s_top**3) / 6
    toe = shapely.box(3, 5, 3 + L, 5 + L)
    spec = GridSpec.covering(toe.bounds, cell, margin=1)
    t = pile_thickness(toe, angle, spec, crest_height=hc)
    assert _volume(t, spec) == pytest.approx(exact, rel=5e-3)
    assert t.max() == pytest.approx(hc)


def test_pile_bad_inputs():
    spec = GridSpec(0.0, 0.0, 1.0, 1.0, 10, 10)
    toe = shapely.box(1, 1, 9, 9)
    for angle in (0.0, 90.0, float("nan")):
        with pytest.raises(InputError, match="repose_angle_deg"):
            pile_thickness(toe, angle, spec)
    with pytest.raises(InputError, match="crest_height"):
        pile_thickness(toe, 35, spec, crest_height=-1)


def _straight_bank_volume(L, w, n, H, m_start, m_end):
    """Middle: L·(w·H + n·H²) (trapezoid). Each sloping end (slope m): a wedge over the
    crest width, w·m·H²/2, plus two corner pyramids where side and end slopes meet,
    each n·m·H³·∫∫(1 − max(α, β)) dα dβ = n·m·H³/3."""
    end = lambda m: 0.0 if m is None else w * m * H**2 / 2 + 2 * n * m * H**3 / 3  # noqa: E731
    return L * (w * H + n * H**2) + end(m_start) + end(m_end)


@pytest.mark.parametrize("cell", CELLS)
@pytest.mark.parametrize("ends", [(3.0, 2.5), ("vertical", 3.0), ("vertical", "vertical")])
def test_straight_embankment_with_end_slopes(cell, ends):
    L, w, n, H = 70.0, 9.0, 2.0, 3.5
    a = math.radians(27.0)  # an oblique line, so no cell edge follows it
    line = shapely.LineString([(10, 20), (10 + L * math.cos(a), 20 + L * math.sin(a))])
    spec = GridSpec.covering(line.bounds, cell, margin=25)
    t = embankment_thickness(line, spec, crest_width=w, side_slope=n, heights=H,
                             start_slope=ends[0], end_slope=ends[1])
    slopes = [None if e == "vertical" else e for e in ends]
    assert _volume(t, spec) == pytest.approx(_straight_bank_volume(L, w, n, H, *slopes),
                                             rel=5e-3)
    assert t.max() == pytest.approx(H)


@pytest.mark.parametrize("cell", CELLS)
def test_embankment_varying_height_against_quad(cell):
    # Vertical ends: V = ∫ (w·H(s) + n·H(s)²) ds, integrated by scipy.integrate.quad.
    w, n = 6.0, 1.5
    profile = [(1000.0, 1.0), (1030.0, 4.0), (1060.0, 2.0)]
    line = shapely.LineString([(0, 0), (60, 0)])
    spec = GridSpec.covering(line.bounds, cell, margin=12)
    t = embankment_thickness(line, spec, crest_width=w, side_slope=n, heights=profile,
                             start_chainage=1000.0, start_slope="vertical",
                             end_slope="vertical")
    ch, hs = np.array(profile).T - [[1000.0], [0.0]]
    area = lambda s: w * np.interp(s, ch, hs) + n * np.interp(s, ch, hs) ** 2  # noqa: E731
    exact = quad(area, 0, 60, points=[30.0])[0]
    assert _volume(t, spec) == pytest.approx(exact, rel=5e-3)


@pytest.mark.parametrize("cell", CELLS)
def test_curved_embankment_pappus(cell):
    # Quarter-circle centreline, radius 60 m, vertical ends: with the nearest-station
    # rule each section is normal to the arc, and Pappus gives V = arc length × section
    # area (the section is symmetric about the centreline). The polyline arc adds small
    # fans at its outer vertices, well below 0.5 %.
    R, w, n, H = 60.0, 8.0, 2.0, 3.0
    th = np.linspace(0, math.pi / 2, 181)
    arc = shapely.LineString(np.c_[R * np.cos(th), R * np.sin(th)])
    spec = GridSpec.covering(arc.bounds, cell, margin=20)
    t = embankment_thickness(arc, spec, crest_width=w, side_slope=n, heights=H,
                             start_slope="vertical", end_slope="vertical")
    assert _volume(t, spec) == pytest.approx(R * math.pi / 2 * (w * H + n * H**2), rel=5e-3)


def test_corner_does_not_double_count():
    # An L-shaped centreline: no point may be higher than the crest, and the volume is
    # less than the two legs counted separately (their overlap counted once).
    line = shapely.LineString([(0, 0), (40, 0), (40, 40)])
    spec = GridSpec.covering(line.bounds, 1.0, margin=15)
    kw = dict(crest_width=6.0, side_slope=2.0, heights=3.0)
    t = embankment_thickness(line, spec, start_slope="vertical", end_slope="vertical", **kw)
    legs = [embankment_thickness(shapely.LineString(p), spec, start_slope="vertical",
                                 end_slope="vertical", **kw)
            for p in ([(0, 0), (40, 0)], [(40, 0), (40, 40)])]
    assert t.max() <= 3.0 + 1e-12
    assert _volume(t, spec) < sum(_volume(leg, spec) for leg in legs)


def test_embankment_bad_inputs():
    spec = GridSpec(-20.0, -20.0, 1.0, 1.0, 80, 40)
    line = shapely.LineString([(0, 0), (30, 0)])
    ok = dict(crest_width=4.0, side_slope=2.0, heights=2.0, start_slope=2.0, end_slope=2.0)
    cases = [
        (dict(start_slope=None), "start_slope"),
        (dict(end_slope="sideways"), "end_slope"),
        (dict(side_slope=0.0), "side_slope"),
        (dict(crest_width=-1.0), "crest_width"),
        (dict(heights=[(0, 1.0), (20, 2.0)]), "covers chainage"),
        (dict(heights=[(0, 1.0), (0, 2.0), (30, 1.0)]), "increase"),
        (dict(heights=[(0, -1.0), (30, 1.0)]), ">= 0"),
    ]
    for change, message in cases:
        with pytest.raises(InputError, match=message):
            embankment_thickness(line, spec, **{**ok, **change})
    with pytest.raises(InputError, match="crosses itself"):
        embankment_thickness(shapely.LineString([(0, 0), (10, 10), (10, 0), (0, 10)]), spec, **ok)
    with pytest.raises(InputError, match="outside the analysis grid"):
        embankment_thickness(shapely.LineString([(0, 0), (58, 0)]), spec, **ok)


def test_excavation_body_is_negative_load():
    spec = GridSpec.covering((0, 0, 20, 20), 1.0, margin=1)
    t = pile_thickness(shapely.box(0, 0, 20, 20), 30.0, spec, crest_height=2.0)
    fill = Body("mound", "pile", 19.0, 1, t, spec)
    cut = Body("pit", "pile", 19.0, 1, t, spec, excavation=True)
    assert cut.total_load == pytest.approx(-fill.total_load)
    np.testing.assert_array_equal(cut.pressure, -fill.pressure)
