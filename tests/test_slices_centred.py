"""Slices on cell centres through the re-centred kernel (its real transform, a type-I DCT
of one quarter) against two slow references: the direct sum of the unit-cell kernel over
the cells (the kernel from reference.corner, numpy, no FFT) and the full-kernel rfftn
path the plan takes off cell centres (forced here on cell centres too).
"""
from __future__ import annotations

import numpy as np
import pytest
import reference
import scipy.fft
import scipy.signal

from fillstress.solve import slices
from fillstress.solve.cost import fft_length
from fillstress.solve.slices import (
    SlicePlan,
    _centred_kernel,
    _times_even,
    _unit_cell_kernel,
)

METHODS = [("boussinesq", None), ("westergaard", 0.3)]
SHAPES = [(5, 8), (6, 7), (7, 7), (1, 4), (4, 1)]            # (ny, nx): odd and even
PADS = [(0, 0), (3, 0), (0, 2), (2, 5)]                      # (pad_x, pad_y)
DEPTHS = [0.0, 1e-9, 0.7, 25.0]
DX, DY = 2.0, 1.5


def _direct(pressure, depth, method, poisson, pad_cells, offset=(0.0, 0.0)):
    """Δσz on the sample lattice by the direct sum Σ p[j, i] · G[l − j, k − i], the kernel
    G the second difference of the corner function on the node offsets (numpy)."""
    ny, nx = pressure.shape[-2:]
    pad_x, pad_y = pad_cells
    my, mx = ny + 2 * pad_y, nx + 2 * pad_x
    # node offsets (edge − sample) in decreasing order: G is then the convolution kernel
    a = (pad_x + nx - 0.5 - np.arange(nx + mx)) * DX - offset[0]
    b = (pad_y + ny - 0.5 - np.arange(ny + my)) * DY - offset[1]
    f = reference.corner(a[None, :], b[:, None], depth, method, poisson)
    kernel = f[1:, 1:] - f[1:, :-1] - f[:-1, 1:] + f[:-1, :-1]

    def one(p):
        return scipy.signal.convolve2d(p, kernel)[ny - 1:ny - 1 + my, nx - 1:nx - 1 + mx]
    return np.stack([one(p) for p in pressure]) if pressure.ndim == 3 else one(pressure)


def _full_kernel_plan(monkeypatch, *args, **kw) -> SlicePlan:
    """The plan of the full zero-padded kernel and its complex rfftn (as off cell centres)."""
    with monkeypatch.context() as m:
        m.setattr(slices, "paired_nodes", lambda nodes: False)
        plan = SlicePlan(*args, **kw)
    assert not plan.centred
    return plan


def _close(got, expected, rtol=1e-10):
    scale = np.abs(expected).max()
    np.testing.assert_allclose(got, expected, rtol=rtol, atol=1e-13 * max(scale, 1.0))


@pytest.mark.parametrize("method, poisson", METHODS)
@pytest.mark.parametrize("shape", SHAPES)
@pytest.mark.parametrize("pad_cells", PADS)
def test_centred_slices_equal_the_direct_sum_and_the_full_kernel(method, poisson, shape,
                                                                 pad_cells, monkeypatch):
    rng = np.random.default_rng(sum(shape) + 7 * sum(pad_cells))
    loads = rng.uniform(0.0, 90.0, (3,) + shape)
    kw = {"pad_cells": pad_cells}
    plan = SlicePlan(loads, DX, DY, method, poisson, **kw)
    assert plan.centred and plan.paired == (True, True)
    full = _full_kernel_plan(monkeypatch, loads, DX, DY, method, poisson, **kw)
    for depth in DEPTHS:
        got = plan.at_depth(depth)
        assert got.shape == (3,) + plan.shape_out
        _close(got, _direct(loads, depth, method, poisson, pad_cells))
        _close(got, full.at_depth(depth), rtol=1e-12)
        single = SlicePlan(loads[1], DX, DY, method, poisson, **kw).at_depth(depth)
        _close(single, got[1], rtol=1e-12)


@pytest.mark.parametrize("method, poisson", METHODS)
def test_centred_windows_equal_the_whole_lattice_cut(method, poisson):
    rng = np.random.default_rng(11)
    loads = rng.uniform(0.0, 60.0, (2, 9, 12))
    plan = SlicePlan(loads, DX, DY, method, poisson, pad_cells=(4, 3))
    windows = [(slice(1, None, 2), slice(3, 17, 3)), (slice(0, 2), slice(None)),
               (slice(None), slice(18, None)), (slice(14, 15), slice(0, 1))]
    for depth in (0.0, 3.0):
        whole = plan.at_depth(depth)
        _close(whole, _direct(loads, depth, method, poisson, (4, 3)))
        for rows, cols in windows:
            np.testing.assert_array_equal(plan.at_depth(depth, (rows, cols)),
                                          whole[:, rows, cols])


def test_the_surface_limit_on_cell_centres():
    """At depth 0 a cell centre carries its own cell's pressure, outside the load none."""
    loads = np.array([[[10.0, 20.0, 30.0], [40.0, 50.0, 60.0]]])
    got = SlicePlan(loads, DX, DY, pad_cells=(1, 2)).at_depth(0.0)
    expected = np.zeros((1, 6, 5))
    expected[0, 2:4, 1:4] = loads[0]
    np.testing.assert_allclose(got, expected, rtol=0, atol=1e-12)


@pytest.mark.parametrize("offset, centred", [((0.0, 0.0), True), ((0.3, 0.0), False),
                                             ((0.0, -0.4), False), ((0.3, -0.4), False)])
def test_off_cell_centres_the_full_kernel_path_equals_the_direct_sum(offset, centred):
    rng = np.random.default_rng(5)
    loads = rng.uniform(0.0, 40.0, (2, 6, 7))
    plan = SlicePlan(loads, DX, DY, "westergaard", 0.2, offset=offset, pad_cells=(2, 1))
    assert plan.centred == centred
    for depth in (0.0, 1.2):
        _close(plan.at_depth(depth), _direct(loads, depth, "westergaard", 0.2, (2, 1), offset))


@pytest.mark.parametrize("method, poisson", METHODS)
@pytest.mark.parametrize("depth", [0.0, 0.7, 25.0])
def test_the_quarter_is_the_mirrored_kernel_recentred(method, poisson, depth):
    """The quarter holds the full kernel's floats (offsets >= 0 from the centre cell), zero
    beyond; its DCT-I equals the rfftn of the whole kernel re-centred on index 0."""
    from fillstress.kernels import resolve_method
    spec = resolve_method(method, poisson)
    plan = SlicePlan(np.ones((5, 6)), DX, DY, pad_cells=(2, 1))
    a, b = plan.a_nodes, plan.b_nodes
    fy, fx = plan.fft_shape
    kernel = _unit_cell_kernel(a, b, depth, spec.depth_scale, spec.second_term, True, True,
                               fy, fx)
    quarter = _centred_kernel(a, b, depth, spec.depth_scale, spec.second_term,
                              fy // 2 + 1, fx // 2 + 1)
    cb, ca = (b.size - 2) // 2, (a.size - 2) // 2
    np.testing.assert_array_equal(quarter[:cb + 1, :ca + 1], kernel[cb::-1, ca::-1])
    assert not quarter[cb + 1:].any() and not quarter[:, ca + 1:].any()
    recentred = np.roll(kernel, (-cb, -ca), axis=(0, 1))
    spectrum = scipy.fft.rfftn(recentred)
    np.testing.assert_allclose(scipy.fft.dctn(quarter, type=1), spectrum[:fy // 2 + 1].real,
                               rtol=1e-12, atol=1e-14)
    assert np.abs(spectrum.imag).max() < 1e-14


def test_times_even_mirrors_the_rows():
    rng = np.random.default_rng(2)
    for rows in (6, 8):
        spectrum = rng.normal(size=(rows, 4)) + 1j * rng.normal(size=(rows, 4))
        even = rng.normal(size=(rows // 2 + 1, 4))
        whole = np.concatenate([even, even[-2:0:-1]])          # R[L − k] = R[k]
        out = np.empty_like(spectrum)
        _times_even(spectrum, even, out)
        np.testing.assert_array_equal(out, spectrum * whole)


def test_fft_lengths_are_even_fast_and_long_enough():
    for n in range(1, 400):
        length = fft_length(n)
        assert length >= n and length % 2 == 0
        assert scipy.fft.next_fast_len(length, real=True) == length
        assert all(k % 2 or scipy.fft.next_fast_len(k, real=True) != k
                   for k in range(n, length))


@pytest.mark.parametrize("offset", [(0.0, 0.0), (0.3, -0.4)])
@pytest.mark.parametrize("stacked", [True, False])
def test_several_depths_at_once_equal_one_depth_at_a_time(offset, stacked):
    """at_depths reuses one product array over depths and loads: each depth as alone."""
    rng = np.random.default_rng(9)
    loads = rng.uniform(0.0, 50.0, (3, 6, 9) if stacked else (6, 9))
    plan = SlicePlan(loads, DX, DY, "boussinesq", offset=offset, pad_cells=(1, 2))
    depths = [4.0, 0.0, 1.5]
    window = (slice(1, None, 2), slice(2, 9))
    together = plan.at_depths(depths, window)
    assert together.shape == ((3,) if stacked else ()) + (3, 5, 7)
    for k, depth in enumerate(depths):
        np.testing.assert_array_equal(together[..., k, :, :], plan.at_depth(depth, window))
        _close(together[..., k, :, :],
               _direct(loads, depth, "boussinesq", None, (1, 2), offset)[..., 1::2, 2:9])
