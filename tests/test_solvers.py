"""Direct summation and FFT slices against the numpy reference; input validation."""
from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

import reference
from fillstress import LoadGrid
from fillstress.errors import InputError
from fillstress.solve import slice_at_depth, stress_slices, vertical_stress
from fillstress.solve.direct import node_rows, node_weights

METHODS = [("boussinesq", None), ("westergaard", 0.0), ("westergaard", 0.35)]


def assert_each_refused(cases):
    """Every (call, argument) pair raises InputError naming that argument."""
    for call, argument in cases:
        with pytest.raises(InputError) as info:
            call()
        assert info.value.argument == argument


def random_grid(seed, ny=9, nx=13, dx=0.7, dy=1.1):
    rng = np.random.default_rng(seed)
    p = rng.uniform(-20.0, 120.0, (ny, nx))
    p[rng.random((ny, nx)) < 0.3] = 0.0          # holes and sharp edges
    return LoadGrid(p, x0=501.3, y0=-48.0, dx=dx, dy=dy)


def random_points(grid, seed, n=60, with_nodes=True):
    rng = np.random.default_rng(seed)
    xmin, ymin, xmax, ymax = grid.extent
    pts = np.column_stack([rng.uniform(xmin - 4, xmax + 4, n), rng.uniform(ymin - 4, ymax + 4, n),
                           rng.choice([0.0, 0.05, 0.8, 3.0, 20.0], n)])
    if with_nodes:  # points exactly on nodes, edges and centres, at the surface and below
        pts[:3, :2] = [[grid.x0, grid.y0], [grid.x0 + 2 * grid.dx, grid.y0 + 0.5 * grid.dy],
                       [grid.x0 + 3.5 * grid.dx, grid.y0 + 4.5 * grid.dy]]
    return pts


@pytest.mark.parametrize("method, poisson", METHODS)
@pytest.mark.parametrize("kernel", ["nodes", "cells"])
def test_fast_kernels_match_reference(method, poisson, kernel):
    grid = random_grid(1)
    pts = random_points(grid, 2)
    expected = reference.grid_stress(grid.pressure, grid.x0, grid.y0, grid.dx, grid.dy, pts,
                                     method, poisson)
    got = vertical_stress(grid, pts, method, poisson, kernel=kernel)
    scale = np.abs(grid.pressure).max()
    np.testing.assert_allclose(got, expected, rtol=0, atol=1e-12 * scale)


@pytest.mark.parametrize("method, poisson", METHODS)
def test_dense_and_listed_node_rows_match_reference(method, poisson):
    # ragged rows in the south (summed densely), a uniform band and a sparse strip in the
    # north (listed nodes), at the surface, on nodes and below
    rng = np.random.default_rng(11)
    p = np.full((14, 12), 40.0)
    p[:6] = rng.uniform(5.0, 90.0, (6, 12))
    p[10:, 4] = -15.0
    grid = LoadGrid(p, x0=-3.0, y0=7.0, dx=0.9, dy=0.6)
    rows = node_rows(node_weights(grid.pressure))
    assert rows.dense.any() and not rows.dense.all()
    pts = random_points(grid, 12, 70)
    expected = reference.grid_stress(grid.pressure, grid.x0, grid.y0, grid.dx, grid.dy, pts,
                                     method, poisson)
    got = vertical_stress(grid, pts, method, poisson)
    np.testing.assert_allclose(got, expected, rtol=0, atol=1e-12 * np.abs(p).max())


@pytest.mark.parametrize("method, poisson", METHODS)
def test_node_and_cell_kernels_agree_on_uniform_and_ragged_fills(method, poisson):
    uniform = LoadGrid(np.full((20, 30), 75.0), x0=0.0, y0=0.0, dx=0.5, dy=0.5)
    for grid in (uniform, random_grid(3, 25, 17)):
        pts = random_points(grid, 4, 80)
        a = vertical_stress(grid, pts, method, poisson, kernel="nodes")
        b = vertical_stress(grid, pts, method, poisson, kernel="cells")
        np.testing.assert_allclose(a, b, rtol=0, atol=1e-11 * np.abs(grid.pressure).max())


def test_node_weights_regroup_the_cell_sum():
    p = np.array([[1.0, 2.0], [3.0, 5.0]])
    w = node_weights(p)
    # uniform interior nodes vanish and the weights sum to zero (each cell adds +−−+)
    assert w.shape == (3, 3)
    assert w.sum() == 0.0
    assert w[1, 1] == 1.0 - 2.0 - 3.0 + 5.0
    assert np.count_nonzero(node_weights(np.full((4, 4), 7.0))) == 4


def test_chunking_does_not_change_the_result():
    grid = random_grid(5)
    pts = random_points(grid, 6, 37)
    whole = vertical_stress(grid, pts)
    for chunk in (1, 5, 36, 100):
        np.testing.assert_array_equal(vertical_stress(grid, pts, chunk=chunk), whole)


def test_single_point_and_empty_load():
    grid = LoadGrid(np.zeros((3, 3)), 0.0, 0.0, 1.0, 1.0)
    assert vertical_stress(grid, [1.0, 1.0, 2.0]).tolist() == [0.0]
    assert vertical_stress(grid, np.zeros((0, 3))).shape == (0,)


def test_vertical_stress_rejects_bad_input():
    grid = random_grid(7)
    ok = [[0.0, 0.0, 1.0]]
    cases = [
        (lambda: vertical_stress("grid", ok), "grid"),
        (lambda: vertical_stress(grid, [[0.0, 0.0, -1.0]]), "points"),
        (lambda: vertical_stress(grid, [[0.0, np.nan, 1.0]]), "points"),
        (lambda: vertical_stress(grid, [[0.0, 1.0]]), "points"),
        (lambda: vertical_stress(grid, np.zeros((2, 3, 1))), "points"),
        (lambda: vertical_stress(grid, ok, "newmark"), "method"),
        (lambda: vertical_stress(grid, ok, "westergaard", 0.5), "poisson"),
        (lambda: vertical_stress(grid, ok, "westergaard", -0.01), "poisson"),
        (lambda: vertical_stress(grid, ok, "boussinesq", 0.3), "poisson"),
        (lambda: vertical_stress(grid, ok, chunk=0), "chunk"),
        (lambda: vertical_stress(grid, ok, chunk=2.5), "chunk"),
        (lambda: vertical_stress(grid, ok, kernel="fast"), "kernel"),
    ]
    assert_each_refused(cases)


def test_mutated_grid_is_rechecked():
    grid = random_grid(8)
    grid.pressure[2, 3] = np.inf
    with pytest.raises(InputError, match="grid.pressure"):
        vertical_stress(grid, [[0.0, 0.0, 1.0]])
    bad = random_grid(8)
    object.__setattr__(bad, "dx", 0.0)
    with pytest.raises(InputError, match="grid.dx"):
        vertical_stress(bad, [[0.0, 0.0, 1.0]])
    with pytest.raises(InputError, match="grid.dy"):
        object.__setattr__(bad, "dx", 1.0)
        object.__setattr__(bad, "dy", -1.0)
        stress_slices(bad, [1.0])


# --- FFT slices ---------------------------------------------------------------------
def direct_on_slice(grid, da, method, poisson):
    X, Y = np.meshgrid(da.x.values, da.y.values)
    out = []
    for z in da.depth.values:
        pts = np.column_stack([X.ravel(), Y.ravel(), np.full(X.size, z)])
        out.append(reference.grid_stress(grid.pressure, grid.x0, grid.y0, grid.dx, grid.dy,
                                         pts, method, poisson).reshape(X.shape))
    return np.array(out)


@pytest.mark.parametrize("method, poisson", METHODS)
@pytest.mark.parametrize("offset, pad", [((0.0, 0.0), 0.0), ((0.21, -0.4), 1.5),
                                         ((0.35, 0.55), 0.3)])
def test_fft_slices_equal_the_reference_sum(method, poisson, offset, pad):
    grid = random_grid(9, ny=7, nx=10)
    # offset (0.35, 0.55) puts samples on cell edges, where the surface value jumps: a
    # one-ulp difference in a coordinate then flips q/2 to q, so depth 0 is left to the
    # exactly representable case below
    depths = [0.4, 2.5] if offset == (0.35, 0.55) else [0.0, 0.4, 2.5]
    da = stress_slices(grid, depths, method, poisson, offset=offset, pad=pad)
    expected = direct_on_slice(grid, da, method, poisson)
    np.testing.assert_allclose(da.values, expected, rtol=0,
                               atol=1e-11 * np.abs(expected).max())


@pytest.mark.parametrize("method, poisson", METHODS)
def test_fft_surface_slice_on_edges_and_nodes(method, poisson):
    rng = np.random.default_rng(13)
    grid = LoadGrid(rng.uniform(0, 100, (4, 5)), x0=0.0, y0=0.0, dx=1.0, dy=2.0)
    for offset in [(0.5, 0.0), (0.0, 1.0), (0.5, 1.0), (0.25, 0.0)]:
        da = stress_slices(grid, [0.0], method, poisson, offset=offset, pad=1.0)
        expected = direct_on_slice(grid, da, method, poisson)
        np.testing.assert_allclose(da.values, expected, rtol=0, atol=1e-11 * 100)


def test_slice_coordinates_attrs_and_padding():
    grid = LoadGrid(np.ones((4, 6)), x0=300.0, y0=700.0, dx=0.5, dy=2.0)
    da = stress_slices(grid, [1.0, 3.0], "westergaard", 0.2, offset=(0.1, -0.3), pad=1.01)
    assert isinstance(da, xr.DataArray)
    assert da.dims == ("depth", "y", "x")
    pad_x, pad_y = 3, 1                           # 1.01 m rounds up to 3 and 1 cells
    assert da.shape == (2, 4 + 2 * pad_y, 6 + 2 * pad_x)
    np.testing.assert_allclose(da.x.values, 300.0 + (np.arange(12) - 3 + 0.5) * 0.5 + 0.1)
    np.testing.assert_allclose(da.y.values, 700.0 + (np.arange(6) - 1 + 0.5) * 2.0 - 0.3)
    assert da.attrs["units"] == "kPa" and da.attrs["method"] == "westergaard"
    assert da.attrs["poisson"] == 0.2 and "stress" in da.attrs["long_name"]
    assert da.depth.values.tolist() == [1.0, 3.0]
    assert stress_slices(grid, 2.0).attrs["poisson"] == "not used"


def test_slice_of_dx_not_equal_dy_matches_direct():
    grid = random_grid(10, ny=5, nx=8, dx=0.3, dy=1.7)
    da = stress_slices(grid, [1.2], pad=0.6)
    X, Y = np.meshgrid(da.x.values, da.y.values)
    pts = np.column_stack([X.ravel(), Y.ravel(), np.full(X.size, 1.2)])
    direct = vertical_stress(grid, pts).reshape(X.shape)
    np.testing.assert_allclose(da.values[0], direct, rtol=0, atol=1e-11 * np.abs(direct).max())


def test_slice_at_depth_lattice_and_plan_reuse():
    p = np.arange(12.0).reshape(3, 4)
    out = slice_at_depth(p, 1.0, 2.0, 1.5, pad_cells=(2, 1), offset=(0.25, 0.0))
    assert out.shape == (5, 8)
    grid = LoadGrid(p, 0.0, 0.0, 1.0, 2.0)
    sample = [[(3 - 2 + 0.5) * 1.0 + 0.25, (2 - 1 + 0.5) * 2.0, 1.5]]
    assert out[2, 3] == pytest.approx(vertical_stress(grid, sample)[0], abs=1e-12)


def test_slice_inputs_are_validated():
    grid = random_grid(11)
    cases = [
        (lambda: stress_slices(grid, [-1.0]), "depths"),
        (lambda: stress_slices(grid, []), "depths"),
        (lambda: stress_slices(grid, [np.nan]), "depths"),
        (lambda: stress_slices(grid, [1.0], offset=(1.0,)), "offset"),
        (lambda: stress_slices(grid, [1.0], offset=(np.inf, 0.0)), "offset"),
        (lambda: stress_slices(grid, [1.0], pad=-1.0), "pad"),
        (lambda: stress_slices(grid, [1.0], workers=0), "workers"),
        (lambda: stress_slices(grid, [1.0], "westergaard", 0.7), "poisson"),
        (lambda: stress_slices(grid, [1.0], "linear"), "method"),
        (lambda: stress_slices(grid.pressure, [1.0]), "grid"),
        (lambda: slice_at_depth([[1.0]], 0.0, 1.0, 1.0), "dx"),
        (lambda: slice_at_depth([[1.0]], 1.0, 1.0, -0.5), "depth"),
        (lambda: slice_at_depth([1.0, 2.0], 1.0, 1.0, 1.0), "pressure"),
        (lambda: slice_at_depth([[np.nan]], 1.0, 1.0, 1.0), "pressure"),
        (lambda: slice_at_depth([[1.0]], 1.0, 1.0, 1.0, pad_cells=(1, -1)), "pad_cells"),
        (lambda: slice_at_depth([[1.0]], 1.0, 1.0, 1.0, pad_cells=3), "pad_cells"),
    ]
    assert_each_refused(cases)


def test_workers_do_not_change_the_slice():
    grid = random_grid(12)
    one = stress_slices(grid, [1.0], workers=1).values
    two = stress_slices(grid, [1.0], workers=2).values
    np.testing.assert_allclose(one, two, rtol=0, atol=1e-12 * np.abs(one).max())


@pytest.mark.parametrize("kernel", ["nodes", "cells"])
def test_point_a_hair_outside_a_corner(kernel):
    # found by hypothesis: offsets of 1e-293 made a·b underflow and gave −q/4
    grid = LoadGrid([[1.0]], x0=0.0, y0=0.0, dx=1.0, dy=1.0)
    pts = [[-1.08e-293, -1.08e-293, 0.0], [1.08e-293, 1.08e-293, 0.0], [0.0, 0.0, 0.0]]
    got = vertical_stress(grid, pts, kernel=kernel)
    np.testing.assert_allclose(got, [0.0, 1.0, 0.25], rtol=0, atol=1e-15)  # outside, inside, corner


def test_slice_plan_reused_across_depths_matches_stress_slices():
    from fillstress.solve import SlicePlan
    grid = random_grid(14, ny=6, nx=7)
    plan = SlicePlan(grid.pressure, grid.dx, grid.dy, "westergaard", 0.1, offset=(0.1, 0.2),
                     pad_cells=(2, 1))
    da = stress_slices(grid, [0.5, 4.0], "westergaard", 0.1, offset=(0.1, 0.2), pad=1.1)
    assert da.shape[1:] == (6 + 2, 7 + 2 * 2)       # 1.1 m: 2 cells of 0.7, 1 of 1.1
    for k, z in enumerate([0.5, 4.0]):
        np.testing.assert_array_equal(plan.at_depth(z), da.values[k])
    with pytest.raises(InputError, match="depth"):
        plan.at_depth(-1.0)
    with pytest.raises(InputError, match="method"):
        SlicePlan(grid.pressure, 1.0, 1.0, "elastic")


def test_whole_number_arguments_share_one_rule():
    # bools and integral floats are refused everywhere; numpy integers are accepted
    from fillstress.solve import stress_at_points
    from fillstress.solve.farfield import build_pyramid
    grid = random_grid(15)
    ok = [[0.0, 0.0, 1.0]]
    assert_each_refused([
        (lambda: vertical_stress(grid, ok, chunk=True), "chunk"),
        (lambda: stress_at_points(grid, ok, chunk_size=2.0), "chunk_size"),
        (lambda: stress_slices(grid, [1.0], workers=True), "workers"),
        (lambda: build_pyramid(grid, order=9), "order"),
        (lambda: build_pyramid(grid, order=-1), "order"),
    ])
    whole = vertical_stress(grid, ok)
    np.testing.assert_array_equal(vertical_stress(grid, ok, chunk=np.int64(1)), whole)
    # stress_at_points sums this small problem by numpy: equal to round-off of max p
    np.testing.assert_allclose(stress_at_points(grid, ok, chunk_size=np.int32(1),
                                                algorithm="direct"), whole,
                               rtol=0, atol=1e-12 * np.abs(grid.pressure).max())


@pytest.mark.parametrize("method,poisson", METHODS)
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_numpy_node_sum_matches_the_reference_and_the_compiled_kernel(method, poisson, seed):
    from fillstress.kernels import resolve_method
    from fillstress.solve.nodes import numpy_node_sum
    grid = random_grid(seed)
    pts = random_points(grid, seed)
    spec = resolve_method(method, poisson)
    fast = numpy_node_sum(grid, pts, spec.depth_scale, spec.second_term)
    slow = reference.grid_stress(grid.pressure, grid.x0, grid.y0, grid.dx, grid.dy, pts,
                                 method, poisson)
    compiled = vertical_stress(grid, pts, method, poisson)
    scale = np.abs(grid.pressure).max()
    assert np.max(np.abs(fast - slow)) <= 1e-9 * scale
    assert np.max(np.abs(fast - compiled)) <= 1e-12 * scale


def test_numpy_node_sum_surface_limits_and_tiny_offsets():
    from fillstress.solve.nodes import numpy_node_sum
    g = LoadGrid([[100.0]], x0=0.0, y0=0.0, dx=2.0, dy=2.0)
    pts = np.array([[1, 1, 0.0], [1, 0, 0.0], [0, 0, 0.0], [5, 5, 0.0], [1, 1, -0.0],
                    [1e-300, 1e-300, 1e-300]])
    out = numpy_node_sum(g, pts, 1.0, 1.0)
    assert out[:5].tolist() == pytest.approx([100.0, 50.0, 25.0, 0.0, 100.0], abs=1e-12)
    assert np.isfinite(out).all()


def test_direct_points_use_numpy_below_the_work_limit(monkeypatch):
    """Small work goes to numpy, large work to the compiled kernel; same numbers."""
    from fillstress.solve import auto
    grid = random_grid(5)
    pts = random_points(grid, 5)
    calls = []
    real = auto.numpy_node_sum
    monkeypatch.setattr(auto, "numpy_node_sum",
                        lambda *a, **k: calls.append(1) or real(*a, **k))
    small = auto.stress_at_points(grid, pts, algorithm="direct")
    assert calls == [1]
    monkeypatch.setattr(auto, "NUMPY_WORK_LIMIT", 0)
    large = auto.stress_at_points(grid, pts, algorithm="direct")
    assert calls == [1]
    np.testing.assert_allclose(small, large, rtol=0, atol=1e-12 * np.abs(grid.pressure).max())


@pytest.mark.parametrize("method,poisson", METHODS)
def test_point_solver_called_many_times_equals_separate_calls(method, poisson, monkeypatch):
    """A solver prepared once answers each call as a separate stress_at_points call would:
    its own algorithm by its own size, the node weights and pyramid reused."""
    from fillstress.solve import auto
    grid = random_grid(8)
    solver = auto.PointSolver(grid, method, poisson)
    scale = np.abs(grid.pressure).max()
    for seed, n, algorithm in [(1, 7, "auto"), (2, 300, "far"), (3, 25, "direct"),
                               (4, 300, "far")]:
        pts = random_points(grid, seed, n=n)
        chosen = solver.choose(n, algorithm)
        assert chosen == auto.choose_algorithm(grid, n, algorithm)
        alone = auto.stress_at_points(grid, pts, method, poisson, algorithm=algorithm)
        np.testing.assert_allclose(solver(pts, algorithm=algorithm), alone, rtol=0,
                                   atol=1e-12 * scale)
        exact = vertical_stress(grid, pts, method, poisson)
        bound = 1e-3 * np.maximum(np.abs(exact), 0.01 * scale) if chosen == "far" else 1e-12 * scale
        assert np.all(np.abs(solver(pts, algorithm=algorithm) - exact) <= bound)
    assert solver.evaluator("far") is solver.evaluator("far")        # one pyramid


def test_auto_goes_far_only_where_the_far_field_is_estimated_faster():
    """Beyond the work limit the far field is taken only when its pyramid and walk are
    estimated faster than direct summation (solve/cost.py rates): a few points below a
    large grid stay exact."""
    from fillstress.solve import auto
    from fillstress.solve.cost import estimate_points
    work, shape = 10 * auto.DIRECT_WORK_LIMIT, (2000, 2000)
    assert auto.algorithm_for(work, shape, 50) == "far"           # 9.2 s direct, 0.8 s far
    assert auto.algorithm_for(work, None, 50) == "far"            # by the work alone
    assert auto.algorithm_for(work / 5, (8000, 20000), 50) == "direct"   # 5 s direct, 32 s far
    assert auto.algorithm_for(auto.DIRECT_WORK_LIMIT, (10 ** 5, 10 ** 4), 1) == "direct"
    # where the far field's pyramid would not fit the cap but direct summation does
    far = estimate_points(shape, 50, algorithm="far").bytes
    direct = estimate_points(shape, 50).bytes
    assert direct < far
    assert auto.algorithm_for(work, shape, 50, memory_cap=far) == "far"
    assert auto.algorithm_for(work, shape, 50, memory_cap=(far + direct) / 2) == "direct"
    assert auto.algorithm_for(work, shape, 50, memory_cap=direct / 2) == "far"   # neither fits


def test_point_solver_without_the_numpy_path_sums_small_work_compiled(monkeypatch):
    """numpy answers a small call unless the solver is made without it (a run's solvers),
    and then the compiled kernel gives the same numbers."""
    from fillstress.solve import auto
    grid = random_grid(9)
    pts = random_points(grid, 9, n=10)
    calls = []
    real = auto.numpy_node_sum
    monkeypatch.setattr(auto, "numpy_node_sum",
                        lambda *a, **k: calls.append(1) or real(*a, **k))
    with_numpy = auto.PointSolver(grid)(pts)
    assert len(calls) == 1
    compiled = auto.PointSolver(grid, numpy_for_small=False)(pts)
    assert len(calls) == 1
    np.testing.assert_allclose(compiled, with_numpy, rtol=0,
                               atol=1e-12 * np.abs(grid.pressure).max())


def test_run_stress_prepares_each_new_grid():
    """The run's evaluator keeps one grid's solver and builds a new one for another grid."""
    from fillstress.examples import example_site
    from fillstress.run.point import RunStress
    from fillstress.site.build import load_site
    site = load_site(example_site("preload_surcharge"))
    a, b = (site.spec.load_grid(body.pressure) for body in site.bodies[:2])
    pts = site.points[["x", "y", "depth"]].to_numpy(float)
    evaluate = RunStress(site)
    for g in (a, b, a):
        np.testing.assert_allclose(evaluate(g, pts), vertical_stress(g, pts), rtol=0,
                                   atol=1e-12 * np.abs(g.pressure).max())
    assert evaluate(a, np.zeros((0, 3))).shape == (0,)
    kept = evaluate._solver
    evaluate.release()                       # a run's step ends: its solver goes
    assert evaluate._solver is None
    np.testing.assert_array_equal(evaluate(a, pts), kept(pts))
    assert evaluate._solver is not kept


def test_slices_on_several_fft_threads_equal_one_thread():
    """The default threads of scipy.fft (the cores) give the one-thread values exactly."""
    grid = random_grid(13, ny=40, nx=57)
    one = stress_slices(grid, [0.0, 1.5, 7.0], pad=3.0, workers=1)
    np.testing.assert_array_equal(stress_slices(grid, [0.0, 1.5, 7.0], pad=3.0).values,
                                  one.values)
    np.testing.assert_array_equal(stress_slices(grid, [0.0, 1.5, 7.0], pad=3.0,
                                                workers=3).values, one.values)


def test_compiled_threads_sets_and_restores_numba_threads():
    """A small slice runs its compiled kernels on one thread (no parallel region to
    start) with the same floats as on all threads; the count is restored afterwards,
    also when the work inside fails."""
    import numba
    from fillstress.solve._checks import compiled_threads
    from fillstress.solve.slices import _unit_cell_kernel
    before = numba.get_num_threads()
    a = (np.arange(31) - 14.3) * 0.7
    b = (np.arange(22) - 9.1) * 1.3
    args = (a, b, 2.5, 1.0, 0.0, False, False, 40, 48)
    full = _unit_cell_kernel(*args)
    with compiled_threads(1):
        assert numba.get_num_threads() == 1
        np.testing.assert_array_equal(_unit_cell_kernel(*args), full)
    assert numba.get_num_threads() == before
    with pytest.raises(ZeroDivisionError), compiled_threads(1):
        1 / 0
    assert numba.get_num_threads() == before
    with compiled_threads(before + 5):
        assert numba.get_num_threads() == before
