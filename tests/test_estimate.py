"""Memory and time estimates: they cover what the solvers really allocate, and refuse early."""
from __future__ import annotations

import numpy as np
import pytest

from fillstress import CapacityError, InputError, LoadGrid
from fillstress.solve.cost import (check_capacity, estimate_points, estimate_slices,
                                 fft_length, fft_working_bytes, format_bytes, largest_tile)
from fillstress.solve.farfield import build_pyramid, pyramid_blocks
from fillstress.solve.slices import SlicePlan


def test_fft_estimate_covers_the_plan_arrays():
    p = np.ones((70, 90))
    plan = SlicePlan(p, 1.0, 1.0, pad_cells=(5, 3))
    fy, fx = plan.fft_shape
    kernel_spectrum = plan.pressure_hat.nbytes
    inverse = 8 * fy * fx
    nodes = 8 * plan.a_nodes.size * plan.b_nodes.size
    counted = plan.pressure_hat.nbytes + kernel_spectrum + inverse + 2 * nodes
    assert fft_working_bytes(p.shape, plan.shape_out) >= counted
    # the estimate uses the same padded sizes as the solver
    assert (fft_length(70 + plan.shape_out[0] - 1), fft_length(90 + plan.shape_out[1] - 1)) == (fy, fx)
    assert fy % 2 == fx % 2 == 0 and fy >= 2 * 70 + 2 * 3 and fx >= 2 * 90 + 2 * 5


def test_centred_fft_estimate_covers_the_plan_arrays():
    """On cell centres the kernel's transform is real, a quarter of the lattice."""
    p = np.ones((3, 70, 90))
    plan = SlicePlan(p, 1.0, 1.0, pad_cells=(5, 3))
    assert plan.centred
    fy, fx = plan.fft_shape
    spectrum = plan.pressure_hat[0].nbytes
    quarter = plan.kernel_spectrum(1.0)
    padded = 8 * fy * fx
    corners = 8 * (plan.a_nodes.size // 2) * (plan.b_nodes.size // 2)
    counted = plan.pressure_hat.nbytes + spectrum + padded + 2 * quarter.nbytes + corners
    assert quarter.shape == (fy // 2 + 1, fx // 2 + 1) and quarter.dtype == float
    assert fft_working_bytes(p.shape[1:], plan.shape_out, 3, centred=True) >= counted
    assert (fft_working_bytes(p.shape[1:], plan.shape_out, 3, centred=True)
            < fft_working_bytes(p.shape[1:], plan.shape_out, 3))


def test_slice_estimate_counts_the_output():
    est = estimate_slices((100, 200), 7, pad_cells=(10, 5))
    assert est.bytes >= 8 * 7 * 110 * 220
    assert est.seconds > 0 and "7 depth(s)" in est.detail


def test_far_field_estimate_covers_the_pyramid():
    grid = LoadGrid(np.random.default_rng(0).uniform(0, 9, (45, 70)), 0, 0, 1, 1)
    pyr = build_pyramid(grid)
    assert pyr.centre.shape[0] == pyramid_blocks(70, 45)
    assert estimate_points(grid.shape, 1000, algorithm="far").bytes >= pyr.nbytes


def test_capacity_error_carries_the_numbers():
    huge = estimate_slices((100_000, 100_000), 5)      # arithmetic only, nothing allocated
    with pytest.raises(CapacityError) as info:
        check_capacity(huge, 8e9, hint="use tiles")
    message = str(info.value)
    assert f"needs {format_bytes(huge.bytes)}, cap is 8.0 GB; use tiles" in message
    with pytest.raises(CapacityError, match="output alone"):
        largest_tile((100_000, 100_000), 5, 8e9)


def test_largest_tile_fits_the_cap_and_is_the_largest_halving():
    cap = 3e8
    ty, tx = largest_tile((3000, 2000), 3, cap)
    assert estimate_slices((3000, 2000), 3, tile=(ty, tx)).bytes <= cap
    assert estimate_slices((3000, 2000), 3, tile=(2 * ty, 2 * tx)).bytes > cap


def test_direct_time_grows_with_points_times_nodes():
    small = estimate_points((100, 100), 1000)
    big = estimate_points((1000, 1000), 1000)
    assert big.seconds == pytest.approx(small.seconds * (1001 ** 2) / (101 ** 2))


def test_bad_sizes_are_refused():
    with pytest.raises(InputError, match="argument shape"):
        estimate_slices((0, 10), 1)
    with pytest.raises(InputError, match="argument n_depths"):
        estimate_slices((10, 10), 0)
    with pytest.raises(InputError, match="argument algorithm"):
        estimate_points((10, 10), 5, algorithm="guess")
    with pytest.raises(InputError, match="argument memory_cap"):
        check_capacity(estimate_slices((10, 10), 1), -5)


def test_pad_cells_that_are_not_a_pair_are_refused():
    # a bare number once reached a generator over an int and raised TypeError
    for call in (lambda: estimate_slices((10, 10), 1, pad_cells=3),
                 lambda: largest_tile((10, 10), 1, 1e9, pad_cells=(1, 2, 3)),
                 lambda: estimate_slices((10, 10), 1, pad_cells=(1, -1))):
        with pytest.raises(InputError) as info:
            call()
        assert info.value.argument == "pad_cells"
    assert estimate_slices((10, 10), 1, pad_cells=(np.int64(2), 0)).bytes > 0
