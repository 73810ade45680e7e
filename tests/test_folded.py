"""Δσz at chosen samples by convolution on a folded torus (solve/folded.py), against the
zero-padded FFT slices and against direct summation at points (the slow references)."""
from __future__ import annotations

import itertools

import numpy as np
import pytest

from fillstress import LoadGrid
from fillstress.errors import InputError
from fillstress.solve import slice_at_depth, vertical_stress
from fillstress.solve.folded import BLOCK, FoldedSlices, fold, fold_layout


def _diagonal_band(ny, nx, seed=3):
    """A fill along the diagonal of its box, pressures varying cell to cell (kPa)."""
    rng = np.random.default_rng(seed)
    p = np.zeros((ny, nx))
    for i in range(nx):
        j = int(i * ny / nx)
        p[max(0, j - 3):j + 3, i] = rng.uniform(20.0, 60.0)
    return p


def _samples_near(p, pad, reach):
    """Lattice indices (with `pad` cells beyond the grid) within `reach` cells of the fill."""
    ny, nx = p.shape
    rows, cols = np.mgrid[-pad:ny + pad, -pad:nx + pad]
    near = np.abs(rows - cols * ny / nx) < reach
    return rows[near], cols[near], near


@pytest.mark.parametrize("method, poisson", [("boussinesq", None), ("westergaard", 0.3)])
@pytest.mark.parametrize("shape, pad", [((64, 150), 0), ((61, 133), 7), ((40, 97), 3)])
@pytest.mark.parametrize("depth", [0.0, 2.5, 40.0])
def test_folded_equals_the_zero_padded_slices(method, poisson, shape, pad, depth):
    p = _diagonal_band(*shape)
    rows, cols, near = _samples_near(p, pad, 9)
    folded = FoldedSlices([p, 0.5 * p], 1.5, 1.2, rows, cols, method, poisson)
    full = slice_at_depth(p, 1.5, 1.2, depth, method, poisson, pad_cells=(pad, pad))
    got = folded.at_depth(depth)
    np.testing.assert_allclose(got[0], full[near], rtol=1e-10, atol=1e-10 * p.max())
    np.testing.assert_allclose(got[1], 0.5 * full[near], rtol=1e-10, atol=1e-10 * p.max())


def test_folded_equals_direct_summation_at_the_points():
    p = _diagonal_band(24, 60)
    rows, cols, _ = _samples_near(p, 2, 5)
    dx, dy, depth = 2.0, 1.5, 3.0
    grid = LoadGrid(p, x0=100.0, y0=50.0, dx=dx, dy=dy)
    xyz = np.column_stack([100.0 + (cols + 0.5) * dx, 50.0 + (rows + 0.5) * dy,
                           np.full(rows.size, depth)])
    expected = vertical_stress(grid, xyz)
    got = FoldedSlices([p], dx, dy, rows, cols).at_depth(depth)[0]
    np.testing.assert_allclose(got, expected, rtol=1e-9, atol=1e-9 * p.max())


def test_every_offset_of_a_sample_and_a_loaded_cell_has_its_own_residue():
    """The condition that makes the folded sum exact, checked pair by pair."""
    p = _diagonal_band(48, 120)
    rows, cols, _ = _samples_near(p, 4, 8)
    layout = fold_layout(rows, cols, p != 0)
    ly, lx = layout.torus
    cj, ci = np.nonzero(p)
    dy = (rows[:, None] - cj[None, :]).ravel()
    dx = (cols[:, None] - ci[None, :]).ravel()
    offsets = np.unique(np.column_stack([dy, dx]), axis=0)
    residues = np.unique(np.column_stack([offsets[:, 0] % ly, offsets[:, 1] % lx]), axis=0)
    assert len(residues) == len(offsets)
    assert ly % BLOCK == 0 and lx % BLOCK == 0


def test_a_diagonal_fill_folds_onto_a_smaller_torus():
    p = _diagonal_band(300, 600)
    rows, cols, near = _samples_near(p, 0, 20)
    assert near.mean() < 0.2
    ly, lx = fold_layout(rows, cols, p != 0).torus
    assert ly * lx < 0.5 * (2 * 300) * (2 * 600)        # the zero-padded transform's values


def test_all_samples_of_a_compact_load_still_come_out_exact():
    """No saving to be had: the torus grows to hold every offset."""
    p = np.full((10, 12), 30.0)
    rows, cols = (v.ravel() for v in np.mgrid[-3:13, -3:15])
    got = FoldedSlices([p], 1.0, 1.0, rows, cols).at_depth(4.0)[0]
    full = slice_at_depth(p, 1.0, 1.0, 4.0, pad_cells=(3, 3))
    np.testing.assert_allclose(got, full.ravel(), rtol=1e-10, atol=1e-12)


def test_fold_adds_the_cells_of_one_residue():
    p = np.arange(12.0).reshape(3, 4)
    folded = fold(p, (2, 3))
    expected = np.zeros((2, 3))
    for j, i in itertools.product(range(3), range(4)):
        expected[j % 2, i % 3] += p[j, i]
    np.testing.assert_array_equal(folded, expected)


def test_slices_stack_the_depths():
    p = _diagonal_band(20, 40)
    rows, cols, _ = _samples_near(p, 0, 4)
    fs = FoldedSlices([p, 2 * p], 1.0, 1.0, rows, cols)
    out = fs.slices([1.0, 5.0])
    assert out.shape == (2, 2, rows.size)
    np.testing.assert_array_equal(out[:, 1], fs.at_depth(5.0))


@pytest.mark.parametrize("pressures, rows", [(np.ones((2, 2)), [0]), ([np.ones((2, 2))], []),
                                             ([np.full((2, 2), np.nan)], [0])])
def test_bad_arguments_are_refused(pressures, rows):
    with pytest.raises(InputError):
        FoldedSlices(pressures, 1.0, 1.0, rows, list(rows))


def _bridge_with_a_coarse_padded_plan(folder):
    """The bridge approach with its plan grid every 2 cells and reaching beyond the
    analysis grid on two sides (samples in the padding)."""
    import shutil

    from fillstress.examples import example_site
    from fillstress.site.build import load_site
    src = example_site("bridge_approach")
    shutil.copytree(src.parent, folder)
    x0, y0, x1, y1 = (v / 0.3048 for v in load_site(src).spec.extent)       # ft
    toml = folder / src.name
    toml.write_text(toml.read_text().replace(
        "depths = [5.0, 12.0, 25.0]",
        f"depths = [5.0, 12.0, 25.0]\nspacing = 8.0\nextent = [{x0 - 40.0}, {y0 - 24.0}, "
        f"{x1}, {y1}]"))
    return toml


@pytest.mark.parametrize("variant", ["sample", "coarse padded plan"])
def test_a_runs_folded_settlement_plan_equals_the_zero_padded_one(variant, tmp_path):
    from fillstress.examples import example_site
    from fillstress.run import compute, plan as run_plan, settle
    from fillstress.site.build import load_site

    site = load_site(example_site("bridge_approach") if variant == "sample"
                     else _bridge_with_a_coarse_padded_plan(tmp_path / "site"))
    if variant != "sample":
        assert run_plan.plan_step(site, site.plan_grids[0]) == 2
        assert min(run_plan._pad_cells(site, site.plan_grids[0])) > 0
    folded = [c for c in run_plan.slice_calls(site) if c.folded is not None]
    assert folded and all(c.step.endswith("settlement") for c in folded)
    got = compute.plan_settlement(site)

    def stacked(plan, grids, keep):
        return lambda depths: compute.cut_to_nodes(
            compute._plan_slicer(site, plan, grids)(depths), keep)
    expected = settle.plan_settlement(site, lambda plan: compute._plan_nodes(site, plan),
                                      stacked)
    for name, da in got.items():
        ref = expected[name]
        assert da.attrs == ref.attrs and int(da.notnull().sum()) > 100
        np.testing.assert_array_equal(da.isnull().values, ref.isnull().values)
        np.testing.assert_allclose(da.values, ref.values, rtol=1e-10, equal_nan=True)
        for axis in ("x", "y"):
            np.testing.assert_array_equal(da[axis].values, ref[axis].values)


def test_with_dask_the_settlement_plan_still_folds_in_the_runs_process(monkeypatch):
    """The folded torus serves a Dask run too (it fits the memory cap here): the same
    values as the serial run, and no full-box slices of the load states on the workers."""
    from dask.distributed import Client

    from fillstress.examples import example_site
    from fillstress.run import compute
    from fillstress.site.build import load_site

    site = load_site(example_site("bridge_approach"))
    serial = compute.plan_settlement(site)
    full_box = []
    real = compute._plan_slicer
    monkeypatch.setattr(compute, "_plan_slicer",
                        lambda *args: full_box.append(args) or real(*args))
    with Client(processes=False, n_workers=1, threads_per_worker=1,
                dashboard_address=":0") as client:
        spread = compute.plan_settlement(site, client)
    assert not full_box
    for name, da in serial.items():
        np.testing.assert_array_equal(spread[name].values, da.values)
