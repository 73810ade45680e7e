"""Plan slices that share per depth the unit-cell kernel over several load grids, and the
unit-cell kernel mirrored on symmetric lattices, each against its slow reference: the
full corner evaluation, and one plain `stress_slices` call per load grid.

Invented site "Brackwater sidings": a rail siding fill 2.5 m high with a surcharge over
part of it as stage 2, taken away on day 150, over soft clay; the plan grid reaches past
the analysis grid (padding) and keeps every second cell centre.
"""
from __future__ import annotations


import numpy as np
import pytest

import reference
from fillstress import LoadGrid
from fillstress.run import compute, plan as run_plan, settle
from fillstress.site.build import load_site
from fillstress.solve import stress_slices
from fillstress.solve.cost import estimate_slices
from fillstress.solve.slices import (SlicePlan, SliceStack, _unit_cell_kernel, distinct_loads,
                                     paired_nodes)

SITE = """\
[site]
name = "Brackwater sidings"
crs = "EPSG:25832"
units = "SI"

[grid]
cell = 3.0
margin = 30.0
method = "{method}"
{poisson}
convergence_check = false

[bodies.siding]
kind = "footprint"
outline = [[500000.0, 6000000.0], [500090.0, 6000000.0], [500090.0, 6000024.0], [500000.0, 6000024.0]]
height = 2.5
unit_weight = 20.0

[bodies.surcharge]
kind = "footprint"
outline = [[500030.0, 6000000.0], [500060.0, 6000000.0], [500060.0, 6000024.0], [500030.0, 6000024.0]]
height = 1.5
unit_weight = 19.0
stage = 2
removal_day = 150

[settlement]
stage_days = [0, 45]

[[plan_grids]]
name = "yard"
depths = [1.0, 4.0, 7.5]
extent = [499950.0, 5999960.0, 500130.0, 6000070.0]
spacing = 6.0

[soil]
water_table = 1.0
rigid_base = 12.0

[[soil.layers]]
name = "made ground"
top = 0.0
bottom = 1.5
unit_weight = 18.0
saturated_unit_weight = 19.0
modulus = 9000.0

[[soil.layers]]
name = "soft clay"
top = 1.5
bottom = 12.0
unit_weight = 16.0
saturated_unit_weight = 16.0
cc = 0.5
cr = 0.07
e0 = 1.5
ocr = 1.1
"""

METHODS = [("boussinesq", None), ("westergaard", 0.25)]


@pytest.fixture(scope="module", params=METHODS, ids=[m for m, _ in METHODS])
def site(tmp_path_factory, request):
    method, poisson = request.param
    path = tmp_path_factory.mktemp("shared") / "site.toml"
    path.write_text(SITE.format(method=method, poisson=f"poisson = {poisson}" if poisson else ""))
    return load_site(path)


def _plain(site, plan, grid, depths):
    """The slow reference: one stress_slices call for one grid, cut to the plan grid."""
    da = stress_slices(grid, depths, method=site.method, poisson=site.poisson,
                       pad=run_plan.plan_pad(site, plan))
    step = max(1, round(plan.spacing / site.spec.dx))
    return da.sel(x=slice(plan.xmin, plan.xmax), y=slice(plan.ymin, plan.ymax)).isel(
        x=slice(None, None, step), y=slice(None, None, step))


def _plain_slicer(site):
    """plan_settlement's slicer from one plain stress_slices call per grid, cut to the
    analysed nodes."""
    return lambda plan, grids, keep: lambda depths: compute.cut_to_nodes(
        [_plain(site, plan, g, depths) for g in grids], keep)


def _assert_same_slices(got, expected, rtol=1e-10):
    assert got.dims == expected.dims and got.shape == expected.shape
    for name in ("depth", "y", "x"):
        np.testing.assert_array_equal(got[name].values, expected[name].values)
    assert got.attrs == expected.attrs
    scale = np.abs(expected.values).max()
    np.testing.assert_allclose(got.values, expected.values, rtol=rtol, atol=1e-13 * scale)


# --- the mirrored unit-cell kernel ------------------------------------------------------
LATTICES = {
    "symmetric": (np.arange(7.5, -8.0, -1.0) * 2.0, np.arange(4.5, -5.0, -1.0) * 3.0),
    "odd, through zero": (np.linspace(6.0, -6.0, 9), np.linspace(2.0, -2.0, 5)),
    "one axis shifted": (np.arange(7.5, -8.0, -1.0) * 2.0 - 0.3, np.arange(4.5, -5.0, -1.0)),
    "asymmetric": (np.linspace(9.0, -3.0, 13), np.linspace(4.0, -1.0, 6)),
}


@pytest.mark.parametrize("method, poisson", METHODS)
@pytest.mark.parametrize("lattice", list(LATTICES))
@pytest.mark.parametrize("depth", [0.0, 1e-9, 0.7, 25.0])
def test_mirrored_kernel_equals_the_full_evaluation(lattice, method, poisson, depth):
    from fillstress.kernels import resolve_method
    spec = resolve_method(method, poisson)
    a, b = LATTICES[lattice]
    paired = (paired_nodes(a), paired_nodes(b))
    assert paired == {"symmetric": (True, True), "odd, through zero": (True, True),
                      "one axis shifted": (False, True), "asymmetric": (False, False)}[lattice]
    padded = (b.size + 2, a.size + 3)          # the FFT's input: zero beyond the kernel
    full = _unit_cell_kernel(a, b, depth, spec.depth_scale, spec.second_term, False, False,
                             *padded)
    mirrored = _unit_cell_kernel(a, b, depth, spec.depth_scale, spec.second_term, *paired,
                                 *padded)
    assert full.shape == mirrored.shape == padded
    assert not full[b.size - 1:].any() and not full[:, a.size - 1:].any()
    assert not mirrored[b.size - 1:].any() and not mirrored[:, a.size - 1:].any()
    np.testing.assert_allclose(mirrored, full, rtol=1e-14, atol=1e-16)
    # the full evaluation is the second difference of the corner function (slow numpy)
    f = reference.corner(a[None, :], b[:, None], depth, method, poisson)
    second = f[1:, 1:] - f[1:, :-1] - f[:-1, 1:] + f[:-1, :-1]
    np.testing.assert_allclose(full[:b.size - 1, :a.size - 1], second, rtol=1e-12, atol=1e-14)
    if all(paired):       # and the kernel is symmetric about the sample, as it must be
        kernel = mirrored[:b.size - 1, :a.size - 1]
        np.testing.assert_array_equal(kernel, kernel[::-1, ::-1])


@pytest.mark.parametrize("offset, paired", [((0.0, 0.0), (True, True)),
                                            ((0.4, 0.0), (False, True)),
                                            ((0.4, -0.2), (False, False))])
def test_slice_plan_mirrors_only_on_cell_centres(offset, paired):
    plan = SlicePlan(np.ones((5, 8)), 2.0, 1.5, offset=offset, pad_cells=(3, 2))
    assert plan.paired == paired


# --- several loads sharing the kernel ---------------------------------------------------
@pytest.mark.parametrize("method, poisson", METHODS)
def test_stacked_plan_equals_one_plan_per_load(method, poisson):
    rng = np.random.default_rng(7)
    loads = rng.uniform(0.0, 80.0, (3, 9, 14))
    kw = dict(offset=(0.0, 0.0), pad_cells=(4, 2))
    stacked = SlicePlan(loads, 2.0, 3.0, method, poisson, **kw)
    window = (slice(1, None, 2), slice(3, 17, 3))
    for depth in (0.0, 2.5, 11.0):
        both = stacked.at_depth(depth)
        part = stacked.at_depth(depth, window)
        for e, load in enumerate(loads):
            alone = SlicePlan(load, 2.0, 3.0, method, poisson, **kw).at_depth(depth)
            np.testing.assert_allclose(both[e], alone, rtol=1e-12, atol=1e-12)
            np.testing.assert_allclose(part[e], alone[window], rtol=1e-12, atol=1e-12)


def test_slice_stack_equals_stress_slices_per_grid():
    rng = np.random.default_rng(3)
    first = rng.uniform(0.0, 50.0, (6, 11))
    grids = [LoadGrid(p, 100.0, 200.0, 2.0, 2.0, crs="EPSG:25832")
             for p in (first, 2 * first + 1.0, first)]          # the third repeats the first
    stack = SliceStack(grids, "westergaard", 0.3, pad=5.0)
    assert len(stack.plan.pressure_hat) == 2 and stack.index == [0, 1, 0]
    window = (slice(2, 9), slice(None, None, 2))
    for got, g in zip(stack.slices([0.0, 3.0]), grids):
        _assert_same_slices(got, stress_slices(g, [0.0, 3.0], "westergaard", 0.3, pad=5.0))
    for got, g in zip(stack.slices([6.0], window), grids):
        _assert_same_slices(got, stress_slices(g, [6.0], "westergaard", 0.3, pad=5.0)
                            .isel(y=window[0], x=window[1]))


def test_slice_stack_refuses_grids_on_other_cells():
    from fillstress import InputError
    a = LoadGrid(np.ones((2, 2)), 0.0, 0.0, 1.0, 1.0)
    with pytest.raises(InputError, match="share their cells"):
        SliceStack([a, LoadGrid(np.ones((2, 2)), 1.0, 0.0, 1.0, 1.0)])


def test_distinct_loads_keep_the_first_of_equal_arrays():
    distinct, index = distinct_loads([np.zeros(3), np.ones(3), np.ones(3), np.zeros(3)])
    assert index == [0, 1, 1, 0] and [d.sum() for d in distinct] == [0.0, 3.0]


# --- the run: stage slices and plan settlement ------------------------------------------
def test_the_run_shares_the_kernel_on_the_test_site(site):
    plan = site.plan_grids[0]
    grids = settle.state_grids(site)
    assert len(grids) == 3 and len(distinct_loads([g.pressure for g in grids])[0]) == 2
    assert run_plan.shares_kernel(site, plan, [g.pressure for g in grids])


def test_stage_slices_equal_one_plain_call_per_stage(site):
    res = compute.compute(site)
    plan = site.plan_grids[0]
    stages = res.stage_slices["yard"]
    assert list(stages["stage"].values) == site.stages == [1, 2]
    for k, stage in enumerate(site.stages):
        expected = _plain(site, plan, site.load_grid(stage), plan.depths)
        _assert_same_slices(stages.isel(stage=k, drop=True), expected)
    _assert_same_slices(res.slices["yard"], _plain(site, plan, site.load_grid(), plan.depths))


def test_plan_settlement_equals_the_per_state_computation(site):
    shared = compute.plan_settlement(site)["yard"]
    plain = settle.plan_settlement(site, lambda plan: compute._plan_nodes(site, plan),
                                   _plain_slicer(site))["yard"]
    assert shared.attrs == plain.attrs and shared.notnull().sum() > 50
    np.testing.assert_array_equal(shared.isnull().values, plain.isnull().values)
    np.testing.assert_allclose(shared.values, plain.values, rtol=1e-10, equal_nan=True)
    for name in ("y", "x"):
        np.testing.assert_array_equal(shared[name].values, plain[name].values)


def test_without_room_for_the_stack_each_grid_is_sliced_alone(site, monkeypatch):
    plan = site.plan_grids[0]
    grids = settle.state_grids(site)
    shared = compute._plan_slicer(site, plan, grids)((2.0, 9.0))
    stack_bytes = run_plan._stack_estimate(site, plan, len(plan.depths), 2, 2).bytes
    monkeypatch.setattr(run_plan, "memory_cap", lambda s: stack_bytes - 1)
    assert not run_plan.shares_kernel(site, plan, [g.pressure for g in grids])
    calls = run_plan.slice_calls(site)
    assert calls and not any(c.stacked for c in calls)
    alone = compute._plan_slicer(site, plan, grids)((2.0, 9.0))
    for got, expected in zip(alone, shared):
        _assert_same_slices(got, expected, rtol=1e-12)


def test_stack_estimate_covers_what_the_stack_holds(site):
    plan = site.plan_grids[0]
    grids = settle.state_grids(site)
    stack = SliceStack(grids, site.method, site.poisson, pad=run_plan.plan_pad(site, plan))
    out = stack.slices(plan.depths, run_plan.plan_window(site, plan))
    held = stack.plan.pressure_hat.nbytes + sum(da.nbytes for da in out[:2])   # 2 distinct
    fy, fx = stack.plan.fft_shape
    assert stack.plan.centred         # a product spectrum, the padded pressure (one load at
    working = (16 * fy * (fx // 2 + 1) + 8 * fy * fx       # a time), the kernel's real
               + 8 * (fy // 2 + 1) * (fx // 2 + 1))        # transform (a quarter)
    est = run_plan._stack_estimate(site, plan, len(plan.depths), 2, 2)
    assert est.bytes >= held + working
    # the output counted is the plan grid's, not the whole lattice's
    assert est.bytes < estimate_slices(site.spec.shape, len(plan.depths), loads=2,
                                       pad_cells=run_plan._pad_cells(site, plan)).bytes


def test_the_dask_path_slices_each_grid_alone_and_agrees(site):
    """With a Dask client the run keeps one distributed call per grid (no SliceStack on
    the workers); its stage slices and plan settlement equal the shared serial path."""
    from distributed import Client
    serial = compute.compute(site)
    with Client(processes=False, n_workers=1, threads_per_worker=2,
                dashboard_address=":0") as client:
        spread = compute.compute(site, client=client)
    _assert_same_slices(spread.stage_slices["yard"], serial.stage_slices["yard"])
    np.testing.assert_allclose(spread.plan_settlement["yard"].values,
                               serial.plan_settlement["yard"].values, rtol=1e-10,
                               equal_nan=True)
