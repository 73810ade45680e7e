"""Builder volumes against analytic solids, each at two cell sizes (within 0.5 %).

The volumes are derived in the comments of the registry tests/validation_cases.py (closed
forms of elementary solids); the curved-embankment check uses Pappus's centroid theorem,
the varying-height one scipy.integrate.quad.
"""

import numpy as np
import pytest
import shapely

from fillstress.errors import InputError
from fillstress.grid import GridSpec
from fillstress.shapes.bodies import Body
from fillstress.shapes.embankment import embankment_thickness
from fillstress.shapes.footprints import sloping_footprint_thickness
from fillstress.shapes.stockpile import distance_to_boundary, pile_thickness

from validation_cases import (BANK_ENDS, BANK_H, CONE_HEIGHT, FRUSTUM_CAP, VOLUME_CELLS, VOLUMES,
                              case_id, cases, check, cone_pile, frustum_pile, grid_volume,
                              straight_bank)

CELLS = VOLUME_CELLS


# Prism, linear wedge, cone, frustum, straight / varying / curved embankments: the analytic
# volumes, their derivations and tolerances are in tests/validation_cases.py.
@pytest.mark.parametrize("case", cases(VOLUMES), ids=case_id)
def test_builder_volumes_against_analytic_solids(case):
    check(case)


@pytest.mark.parametrize("cell", CELLS)
def test_sloping_top_tent(cell):
    # Non-planar vertex heights: z = 0, 2, 0, 2 round a 10 m square. The constrained
    # triangulation splits it along one diagonal; each triangle holds A/2 · mean(z):
    # along the z = 0 diagonal V = 100·(2/3), along the z = 2 diagonal V = 100·(4/3).
    sq = shapely.Polygon([(0, 0, 0.0), (10, 0, 2.0), (10, 10, 0.0), (0, 10, 2.0)])
    spec2 = GridSpec.covering(sq.bounds, cell)
    v = grid_volume(sloping_footprint_thickness(sq, spec2), spec2)
    assert min(abs(v - 200 / 3), abs(v - 400 / 3)) < 1e-9


def test_sloping_top_needs_z_and_nonnegative():
    spec = GridSpec(0.0, 0.0, 1.0, 1.0, 5, 5)
    with pytest.raises(InputError, match="z value"):
        sloping_footprint_thickness(shapely.box(0, 0, 2, 2), spec)
    with pytest.raises(InputError, match=">= 0"):
        sloping_footprint_thickness(shapely.Polygon([(0, 0, -1), (2, 0, 1), (2, 2, 1)]), spec)


@pytest.mark.parametrize("path", ["numpy loop", "STRtree"])
def test_distance_to_boundary_matches_shapely_distance(path, monkeypatch):
    from fillstress.shapes import stockpile
    if path == "STRtree":
        monkeypatch.setattr(stockpile, "LOOP_SEGMENTS", 0)
    ring = shapely.Point(0, 0).buffer(10).difference(shapely.box(-2, -3, 3, 2))
    # a second part whose outline repeats a vertex (a zero-length segment)
    twice = shapely.Polygon([(12, 0), (16, 0), (16, 0), (16, 5), (12, 5)])
    toe = shapely.MultiPolygon([ring, twice])
    rng = np.random.default_rng(7)
    x, y = rng.uniform(-10, 17, (40, 10)), rng.uniform(-10, 10, (40, 10))
    ref = shapely.distance(shapely.points(x, y), toe.boundary)  # slow reference
    d = distance_to_boundary(toe)(x, y)
    assert d.shape == x.shape
    np.testing.assert_allclose(d, ref, rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("cell", CELLS)
def test_cone_pile_stays_below_its_apex(cell):
    t, _ = cone_pile(cell)
    assert t.max() <= CONE_HEIGHT


@pytest.mark.parametrize("cell", CELLS)
def test_capped_pile_reaches_its_cap(cell):
    t, _ = frustum_pile(cell)
    assert t.max() == pytest.approx(FRUSTUM_CAP)


def test_pile_bad_inputs():
    spec = GridSpec(0.0, 0.0, 1.0, 1.0, 10, 10)
    toe = shapely.box(1, 1, 9, 9)
    for angle in (0.0, 90.0, float("nan")):
        with pytest.raises(InputError, match="repose_angle_deg"):
            pile_thickness(toe, angle, spec)
    with pytest.raises(InputError, match="crest_height"):
        pile_thickness(toe, 35, spec, crest_height=-1)


@pytest.mark.parametrize("cell", CELLS)
@pytest.mark.parametrize("ends", BANK_ENDS)
def test_straight_embankment_reaches_its_crest(cell, ends):
    t, _ = straight_bank(cell, ends)
    assert t.max() == pytest.approx(BANK_H)


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
    assert grid_volume(t, spec) < sum(grid_volume(leg, spec) for leg in legs)


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
