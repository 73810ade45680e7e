"""Cell coverage and cell averages against slow, obviously-correct per-cell loops."""
import numpy as np
import pytest
import shapely

import reference
from fillstress.errors import InputError
from fillstress.grid import GridSpec
from fillstress.shapes.coverage import cell_average, coverage_fraction, tin_cell_average


def _ring_with_hole():
    # an invented lagoon-side pad: a disc with a rectangular hole, off the grid lines
    return shapely.Point(3.3, -1.7).buffer(9.0).difference(shapely.box(1.1, -3.2, 4.9, 0.4))


@pytest.mark.parametrize("cell", [0.9, 2.7])
def test_coverage_matches_per_cell_loop_and_area(cell):
    geom = _ring_with_hole()
    spec = GridSpec.covering(geom.bounds, cell, margin=1.0)
    cov = coverage_fraction(geom, spec)
    np.testing.assert_allclose(cov, reference.coverage(geom, spec), atol=1e-12)
    assert cov.sum() * spec.cell_area == pytest.approx(geom.area, rel=1e-12)
    assert cov.min() >= 0 and cov.max() <= 1


def test_multipolygon_and_rectangular_cells():
    geom = shapely.MultiPolygon([shapely.box(0.2, 0.3, 3.1, 2.2), shapely.box(5.0, 4.0, 7.5, 6.4)])
    spec = GridSpec(0.0, 0.0, 0.7, 1.3, 12, 6)
    np.testing.assert_allclose(coverage_fraction(geom, spec), reference.coverage(geom, spec),
                               atol=1e-12)


def _exact_box_integral(x0, x1, y0, y1):
    """∫∫ (x² + y) dx dy over a rectangle, by hand."""
    return (x1**3 - x0**3) / 3 * (y1 - y0) + (x1 - x0) * (y1**2 - y0**2) / 2


def test_cell_average_of_quadratic_against_exact_rectangle_integrals():
    geom = shapely.box(0.3, 0.45, 7.7, 5.1)  # edges cut cells, so both rules are used
    spec = GridSpec(0.0, 0.0, 1.0, 1.0, 8, 6)
    got = cell_average(geom, lambda x, y: x**2 + y, spec, samples=6)
    ref = spec.zeros()
    for j in range(spec.ny):
        for i in range(spec.nx):
            xa, xb = max(i, 0.3), min(i + 1, 7.7)
            ya, yb = max(j, 0.45), min(j + 1, 5.1)
            if xa < xb and ya < yb:
                ref[j, i] = _exact_box_integral(xa, xb, ya, yb)
    np.testing.assert_allclose(got, ref, rtol=2e-3, atol=1e-9)


def test_linear_height_is_exact_in_both_averages():
    geom = _ring_with_hole()
    spec = GridSpec.covering(geom.bounds, 1.3, margin=0.5)
    plane = lambda x, y: 4.0 + 0.3 * x - 0.2 * y  # noqa: E731
    tri = shapely.get_parts(shapely.constrained_delaunay_triangles(geom))
    xy = shapely.get_coordinates(tri).reshape(-1, 4, 2)[:, :3]
    tri_xyz = np.concatenate([xy, plane(xy[..., :1], xy[..., 1:])], axis=2)
    a = cell_average(geom, plane, spec, samples=2)
    b = tin_cell_average(tri_xyz, spec)
    np.testing.assert_allclose(a, b, atol=1e-11)
    # total = plane at the centroid × area (exact for a linear function)
    c = geom.centroid
    assert b.sum() * spec.cell_area == pytest.approx(plane(c.x, c.y) * geom.area, rel=1e-11)


@pytest.mark.parametrize("geom, message", [
    (shapely.Polygon([(0, 0), (4, 4), (4, 0), (0, 4)]), "not a valid polygon"),
    (shapely.LineString([(0, 0), (1, 1)]), "must be a shapely Polygon"),
    (shapely.Polygon(), "empty"),
    (shapely.box(-5, 0, 2, 2), "outside the analysis grid"),
])
def test_bad_geometry_is_refused(geom, message):
    spec = GridSpec(0.0, 0.0, 1.0, 1.0, 5, 5)
    with pytest.raises(InputError, match=message) as err:
        coverage_fraction(geom, spec)
    assert "argument geometry" in str(err.value)


def test_bad_height_function_and_samples():
    spec = GridSpec(0.0, 0.0, 1.0, 1.0, 5, 5)
    sq = shapely.box(1, 1, 3, 3)
    with pytest.raises(InputError, match="NaN"):
        cell_average(sq, lambda x, y: np.full_like(x, np.nan), spec)
    with pytest.raises(InputError, match="samples"):
        cell_average(sq, lambda x, y: x, spec, samples=0)
    with pytest.raises(InputError, match="GridSpec"):
        coverage_fraction(sq, "not a grid")


# --- only cells near the boundary are tested against it -----------------------------
def _classify_every_cell(geometry, spec):
    """The slow reference: every cell of the bounding-box window gets a box and the exact
    boundary test."""
    from fillstress.shapes import coverage
    jj, ii = coverage._window_cells(spec, coverage.grid_window(geometry.bounds, spec))
    boxes = coverage._cell_boxes(spec, jj, ii)
    edge = shapely.intersects(boxes, geometry.boundary)
    inside = ~edge & shapely.contains_xy(geometry, spec.x0 + (ii + 0.5) * spec.dx,
                                         spec.y0 + (jj + 0.5) * spec.dy)
    return jj, ii, boxes, edge, inside


_DIAGONAL_SHAPES = [
    shapely.LineString([(10, 10), (120, 90), (200, 220)]).buffer(8, quad_segs=16),
    shapely.Polygon([(5, 5), (150, 20), (60, 200)], holes=[[(40, 40), (80, 50), (60, 90)]]),
    shapely.MultiPolygon([shapely.box(1, 1, 30.3, 40.1), shapely.Point(150, 150).buffer(30)]),
    shapely.box(20.0, 30.0, 70.0, 90.0),       # edges on cell lines: 70 = 100 × 0.7
]


@pytest.mark.parametrize("geometry", _DIAGONAL_SHAPES)
def test_near_boundary_classification_equals_testing_every_cell(geometry, monkeypatch):
    from fillstress.shapes import coverage
    spec = GridSpec(0.0, 0.0, 0.7, 0.9, 300, 260)
    height = lambda x, y: 0.01 * x + np.sin(y)               # noqa: E731
    fast = (coverage_fraction(geometry, spec), cell_average(geometry, height, spec))
    monkeypatch.setattr(coverage, "_classify", _classify_every_cell)
    slow = (coverage_fraction(geometry, spec), cell_average(geometry, height, spec))
    for got, expected in zip(fast, slow):
        np.testing.assert_array_equal(got, expected)
    assert fast[0].sum() * spec.cell_area == pytest.approx(geometry.area, rel=1e-12)
