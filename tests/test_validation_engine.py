"""The stress engine against published closed forms and independent integration.

The published check values, each with its source and tolerance, live in the registry
tests/validation_cases.py (which docs/validation.md is generated from); closed forms for
the strip, the circle and the embankment are derived in docs/method-engine.md and written
out there independently of the kernels.  The checks against scipy integration and the
surface limits stay here.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate

import reference
from fillstress import LoadGrid
from fillstress.solve import stress_slices, vertical_stress

from validation_cases import (CIRCLE, CORNER, EMBANKMENT, EMBANKMENT_END, EQUILIBRIUM, STRIP,
                              WESTERGAARD, case_id, cases, check, plane_equilibrium)


# Newmark (1935) / Fadum (1948) corner factors; the strip (Flamant 1892), circle
# (Boussinesq 1885) and Osterberg (1957) closed forms and the equilibrium checks: the
# values, their sources and tolerances are in tests/validation_cases.py.
@pytest.mark.parametrize("case", cases(CORNER), ids=case_id)
def test_newmark_fadum_corner_factors(case):
    check(case)


@pytest.mark.parametrize("case", cases(STRIP), ids=case_id)
def test_long_rectangle_matches_strip(case):
    check(case)


@pytest.mark.parametrize("case", cases(CIRCLE), ids=case_id)
def test_disc_centreline(case):
    check(case)


@pytest.mark.parametrize("case", cases(EMBANKMENT), ids=case_id)
def test_long_embankment_matches_osterberg(case):
    check(case)


@pytest.mark.parametrize("case", cases(EMBANKMENT_END), ids=case_id)
def test_end_of_long_embankment_carries_half(case):
    check(case)


@pytest.mark.parametrize("case", cases(EQUILIBRIUM), ids=case_id)
def test_equilibrium(case):
    check(case)


@pytest.mark.parametrize("poisson", [0.0, 0.3])
def test_westergaard_plane_needs_the_tail_correction(poisson):
    # Westergaard's tail decays only as z/S: uncorrected, the plane check above would
    # miss its 5e-3 tolerance, so the correction is doing real work
    _, _, inside = plane_equilibrium("westergaard", poisson)
    assert 1.0 - inside > 5e-3


@pytest.mark.parametrize("case", cases(WESTERGAARD), ids=case_id)
def test_westergaard_published_values(case):
    check(case)


# --- independent numerical integration ----------------------------------------------
def l_shaped_grid():
    pressure = np.array([[40.0, 55.0, 70.0],
                         [30.0, 0.0, 0.0],
                         [65.0, 0.0, 0.0]])
    return LoadGrid(pressure, x0=-1.0, y0=-2.0, dx=1.5, dy=2.0)


def integrate_point_load(grid, x, y, z, point_form):
    """Δσz by scipy dblquad of a point-load form over every loaded cell."""
    total = 0.0
    for j in range(grid.ny):
        for i in range(grid.nx):
            q = grid.pressure[j, i]
            if q == 0:
                continue
            xa = grid.x0 + i * grid.dx
            ya = grid.y0 + j * grid.dy
            val, _ = integrate.dblquad(
                lambda yy, xx: point_form(math.hypot(xx - x, yy - y), z),
                xa, xa + grid.dx, ya, ya + grid.dy, epsabs=1e-13, epsrel=1e-11)
            total += q * val
    return total


@pytest.mark.parametrize("x, y, z", [(0.2, 3.1, 0.9), (3.0, 0.5, 2.0), (-3.0, -4.0, 1.5),
                                     (1.9, 0.3, 6.0)])
def test_l_shape_against_dblquad_boussinesq(x, y, z):
    grid = l_shaped_grid()
    expected = integrate_point_load(grid, x, y, z, reference.boussinesq_point)
    assert vertical_stress(grid, [[x, y, z]])[0] == pytest.approx(expected, rel=1e-8)


@pytest.mark.parametrize("poisson", [0.0, 0.3])
@pytest.mark.parametrize("x, y, z", [(0.2, 3.1, 0.9), (3.0, 0.5, 2.0)])
def test_l_shape_against_dblquad_westergaard(poisson, x, y, z):
    grid = l_shaped_grid()
    form = lambda r, zz: reference.westergaard_point(r, zz, poisson)  # noqa: E731
    expected = integrate_point_load(grid, x, y, z, form)
    got = vertical_stress(grid, [[x, y, z]], "westergaard", poisson)[0]
    assert got == pytest.approx(expected, rel=1e-8)


@pytest.mark.parametrize("poisson", [0.0, 0.3])
@pytest.mark.parametrize("m, n", [(0.5, 1.0), (1.0, 1.0), (2.0, 0.4)])
def test_westergaard_rectangle_against_integrated_point_form(poisson, m, n):
    z = 2.0
    grid = LoadGrid([[1.0]], x0=0.0, y0=0.0, dx=m * z, dy=n * z)
    form = lambda r, zz: reference.westergaard_point(r, zz, poisson)  # noqa: E731
    expected = integrate_point_load(grid, 0.0, 0.0, z, form)
    got = vertical_stress(grid, [[0.0, 0.0, z]], "westergaard", poisson)[0]
    assert got == pytest.approx(expected, rel=1e-9)


def test_westergaard_below_boussinesq_under_small_footing():
    # common practice: Westergaard gives less stress than Boussinesq below the centre
    # of a small loaded area (the sheets spread the load sideways)
    grid = LoadGrid([[100.0]], x0=-1.0, y0=-1.0, dx=2.0, dy=2.0)
    point = [[0.0, 0.0, 2.0]]
    assert vertical_stress(grid, point, "westergaard")[0] < vertical_stress(grid, point)[0]


# --- surface limits ---------------------------------------------------------------
SURFACE_POINTS = [[1.0, 1.0, 0.0], [2.0, 1.0, 0.0], [2.0, 2.0, 0.0], [5.0, 5.0, 0.0],
                  [0.0, 0.0, 0.0], [4.0, 1.0, 0.0]]


@pytest.mark.parametrize("method, poisson", [("boussinesq", None), ("westergaard", 0.3)])
@pytest.mark.parametrize("kernel", ["nodes", "cells"])
def test_surface_limits(method, poisson, kernel):
    q = 120.0
    grid = LoadGrid([[q, q], [q, q]], x0=0.0, y0=0.0, dx=2.0, dy=2.0)
    got = vertical_stress(grid, SURFACE_POINTS, method, poisson, kernel=kernel)
    # inside, on an interior cell edge, at an interior node, outside, outer corner, outer edge
    np.testing.assert_allclose(got, [q, q, q, 0.0, q / 4, q / 2], rtol=0, atol=1e-12)
    assert np.all(np.isfinite(got))


def test_surface_limits_of_a_single_cell_and_the_fft_slice():
    q = 80.0
    grid = LoadGrid([[q]], x0=0.0, y0=0.0, dx=2.0, dy=2.0)
    got = vertical_stress(grid, [[1, 1, 0], [0, 1, 0], [2, 2, 0], [3, 3, 0]])
    np.testing.assert_allclose(got, [q, q / 2, q / 4, 0.0], rtol=0, atol=1e-12)
    plane = stress_slices(grid, [0.0], offset=(1.0, 1.0), pad=2.0).values[0]
    # samples at nodes: (0,0) and (2,2) corners of the cell, edge midpoints don't occur
    assert plane[1, 1] == pytest.approx(q / 4, abs=1e-9)   # node (2, 2)
    assert plane[0, 0] == pytest.approx(q / 4, abs=1e-9)   # node (0, 0)
    assert plane[2, 2] == pytest.approx(0.0, abs=1e-9)     # node (4, 4)
    assert np.all(np.isfinite(plane))


def test_stress_tends_to_the_surface_value_as_depth_shrinks():
    q = 50.0
    grid = LoadGrid([[q]], x0=0.0, y0=0.0, dx=2.0, dy=2.0)
    for x, y, limit in [(1.0, 1.0, q), (0.0, 1.0, q / 2), (0.0, 0.0, q / 4), (3.0, 1.0, 0.0)]:
        shallow = vertical_stress(grid, [[x, y, 1e-7]])[0]
        assert shallow == pytest.approx(limit, abs=1e-5)
