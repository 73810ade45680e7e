"""Property tests (hypothesis): superposition, bounds, symmetry, FFT = direct."""
from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from fillstress import LoadGrid
from fillstress.solve import stress_slices, vertical_stress

SETTINGS = settings(max_examples=25, deadline=None)

methods = st.sampled_from([("boussinesq", None), ("westergaard", 0.0), ("westergaard", 0.3),
                           ("westergaard", 0.49)])
shapes = st.tuples(st.integers(1, 6), st.integers(1, 6))
cell = st.floats(0.2, 5.0)
depth = st.one_of(st.just(0.0), st.floats(1e-6, 30.0))


def pressures(shape, low=-50.0, high=200.0):
    return arrays(np.float64, shape, elements=st.floats(low, high, allow_nan=False))


@st.composite
def loaded_grids(draw, low=-50.0, high=200.0):
    shape = draw(shapes)
    return LoadGrid(draw(pressures(shape, low, high)), x0=draw(st.floats(-100, 100)),
                    y0=draw(st.floats(-100, 100)), dx=draw(cell), dy=draw(cell))


@st.composite
def points_near(draw, grid, n=5):
    xmin, ymin, xmax, ymax = grid.extent
    xs = draw(st.lists(st.floats(xmin - 10, xmax + 10), min_size=n, max_size=n))
    ys = draw(st.lists(st.floats(ymin - 10, ymax + 10), min_size=n, max_size=n))
    zs = draw(st.lists(depth, min_size=n, max_size=n))
    return np.column_stack([xs, ys, zs])


@SETTINGS
@given(data=st.data(), method=methods)
def test_superposition(data, method):
    g1 = data.draw(loaded_grids())
    p2 = data.draw(pressures(g1.shape))
    g2 = g1.with_pressure(p2)
    pts = data.draw(points_near(g1))
    both = vertical_stress(g1 + g2, pts, *method)
    apart = vertical_stress(g1, pts, *method) + vertical_stress(g2, pts, *method)
    np.testing.assert_allclose(both, apart, rtol=0, atol=1e-11 * 400)


@SETTINGS
@given(data=st.data(), method=methods)
def test_bounds_for_non_negative_loads(data, method):
    grid = data.draw(loaded_grids(low=0.0))
    pts = data.draw(points_near(grid))
    qmax = grid.pressure.max()
    for kernel in ("nodes", "cells"):
        got = vertical_stress(grid, pts, *method, kernel=kernel)
        assert np.all(np.isfinite(got))
        assert np.all(got >= -1e-12 * max(qmax, 1.0))
        assert np.all(got <= qmax * (1 + 1e-12) + 1e-12)


@SETTINGS
@given(data=st.data(), method=methods)
def test_mirror_symmetry(data, method):
    # coordinates on a 1/64 m lattice so the mirrored points are exact: at the surface
    # the stress jumps across a cell edge, and a one-ulp shift would be a false failure
    drawn = data.draw(loaded_grids())
    grid = LoadGrid(drawn.pressure, *(np.round(v * 64) / 64 for v in (drawn.x0, drawn.y0)),
                    *(max(np.round(v * 64), 1) / 64 for v in (drawn.dx, drawn.dy)))
    pts = np.round(data.draw(points_near(grid)) * 64) / 64
    xmin, ymin, xmax, ymax = grid.extent
    # mirror east-west about the grid's centre line, then north-south
    flipped_x = grid.with_pressure(grid.pressure[:, ::-1])
    mirrored = pts.copy()
    mirrored[:, 0] = xmin + xmax - pts[:, 0]
    np.testing.assert_allclose(vertical_stress(flipped_x, mirrored, *method),
                               vertical_stress(grid, pts, *method), rtol=0, atol=1e-10)
    flipped_y = grid.with_pressure(grid.pressure[::-1, :])
    mirrored = pts.copy()
    mirrored[:, 1] = ymin + ymax - pts[:, 1]
    np.testing.assert_allclose(vertical_stress(flipped_y, mirrored, *method),
                               vertical_stress(grid, pts, *method), rtol=0, atol=1e-10)


@SETTINGS
@given(data=st.data(), method=methods)
def test_fft_slice_equals_direct_at_random_lattice_points(data, method):
    grid = data.draw(loaded_grids())
    z = data.draw(st.floats(0.05, 20.0))
    offset = (data.draw(st.floats(-0.45, 0.45)) * grid.dx, data.draw(st.floats(-0.45, 0.45)) * grid.dy)
    pad = data.draw(st.floats(0.0, 3.0))
    da = stress_slices(grid, [z], *method, offset=offset, pad=pad)
    rows = data.draw(st.lists(st.integers(0, da.sizes["y"] - 1), min_size=4, max_size=4))
    cols = data.draw(st.lists(st.integers(0, da.sizes["x"] - 1), min_size=4, max_size=4))
    pts = np.column_stack([da.x.values[cols], da.y.values[rows], np.full(4, z)])
    direct = vertical_stress(grid, pts, *method)
    scale = max(float(np.abs(da.values).max()), 1e-300)
    fft = da.values[0, rows, cols]
    assert np.all(np.abs(fft - direct) <= 1e-9 * scale + 1e-300)
