"""Dask runs give the serial numbers; a lost worker is retried; variant envelopes."""
from __future__ import annotations

import os
import sys

import cloudpickle
import numpy as np
import pytest
import xarray as xr
from distributed import Client, LocalCluster

import reference
from fillstress import InputError, LoadGrid
from fillstress.solve.distributed import (distributed_points, distributed_slices,
                                    map_variants)
from fillstress.solve.auto import stress_at_points
from fillstress.solve.slices import stress_slices
from fillstress.solve.tiled import tiled_slices

# worker processes cannot import this test module: send its functions by value
cloudpickle.register_pickle_by_value(sys.modules[__name__])


@pytest.fixture(scope="module")
def client():
    with Client(processes=False, n_workers=1, threads_per_worker=2,
                dashboard_address=":0") as c:
        yield c


def _grid():
    rng = np.random.default_rng(11)
    p = rng.uniform(-20, 100, (30, 41)) * (rng.random((30, 41)) > 0.3)
    return LoadGrid(p, 5000.0, 800.0, 1.5, 2.0)


def _points(n=400):
    rng = np.random.default_rng(12)
    return np.column_stack([rng.uniform(4980, 5080, n), rng.uniform(780, 880, n),
                            rng.uniform(0, 30, n)])


@pytest.mark.parametrize("algorithm", ["direct", "far"])
def test_points_on_dask_equal_the_serial_path(client, algorithm):
    grid, pts = _grid(), _points()
    serial = stress_at_points(grid, pts, algorithm=algorithm, chunk_size=57)
    spread = distributed_points(grid, pts, client=client, algorithm=algorithm, chunk_size=57)
    np.testing.assert_array_equal(spread, serial)


def test_a_solver_on_dask_sends_each_evaluator_once_over_many_calls(client, monkeypatch):
    """Calls of one DistributedSolver give the serial numbers, each with its own
    algorithm, and send the grid's evaluator to the workers once per algorithm."""
    from fillstress.solve.distributed import DistributedSolver
    grid = _grid()
    sent = []
    real = client.scatter
    monkeypatch.setattr(client, "scatter", lambda *a, **k: sent.append(1) or real(*a, **k))
    solver = DistributedSolver(grid, client=client, chunk_size=50)
    for n, algorithm in [(30, "direct"), (200, "far"), (90, "direct"), (120, "far")]:
        pts = _points(n)
        np.testing.assert_array_equal(solver(pts, algorithm=algorithm),
                                      stress_at_points(grid, pts, algorithm=algorithm,
                                                       chunk_size=50))
    assert len(sent) == 2


def test_far_field_order_reaches_the_workers(client):
    grid, pts = _grid(), _points(120)
    serial = stress_at_points(grid, pts, algorithm="far", order=1, tol=1e-2)
    spread = distributed_points(grid, pts, client=client, algorithm="far", order=1, tol=1e-2)
    np.testing.assert_array_equal(spread, serial)
    assert not np.array_equal(serial, stress_at_points(grid, pts, algorithm="far", tol=1e-2))


def test_slices_on_dask_equal_the_serial_path(client):
    grid = _grid()
    serial = stress_slices(grid, [0.0, 1.0, 6.0], pad=3.0, offset=(0.2, 0.0))
    by_depth = distributed_slices(grid, [0.0, 1.0, 6.0], pad=3.0, offset=(0.2, 0.0), client=client)
    xr.testing.assert_identical(by_depth, serial)
    tiled = tiled_slices(grid, [0.0, 6.0], pad=3.0, tile=(9, 12))
    by_tile = distributed_slices(grid, [0.0, 6.0], pad=3.0, tile=(9, 12), client=client)
    xr.testing.assert_identical(by_tile, tiled)


def test_client_must_be_a_dask_client():
    with pytest.raises(InputError, match="argument client"):
        distributed_points(_grid(), _points(3), client="tcp://nowhere:1")


def _die_once(args):
    """Kill the worker process the first time it runs (marker file), then answer."""
    marker, value = args
    if value == 2 and not os.path.exists(marker):
        open(marker, "w").close()
        os._exit(1)
    return value * 10


def test_a_lost_worker_is_retried_not_fatal(tmp_path):
    marker = str(tmp_path / "died-once")
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                      dashboard_address=":0") as cluster, Client(cluster) as c:
        out = map_variants(_die_once, [(marker, v) for v in range(4)], client=c)
    assert os.path.exists(marker)       # a worker really died
    assert out == [0, 10, 20, 30]


def test_map_variants_serial_and_dask_agree(client):
    grid = _grid()

    def peak(scale):
        return stress_at_points(grid.with_pressure(grid.pressure * scale), _points(50),
                                algorithm="direct")

    serial = map_variants(peak, [0.5, 1.0, 2.0])
    spread = map_variants(peak, [0.5, 1.0, 2.0], client=client)
    for a, b in zip(serial, spread):
        np.testing.assert_array_equal(a, b)


def _die_always(value):
    os._exit(1)


def test_fillstress_cluster_retries_a_killed_worker_then_fails_in_one_line(tmp_path):
    from fillstress.errors import ClusterError
    from fillstress.solve.distributed import ALLOWED_FAILURES, connect
    marker = str(tmp_path / "died-once")
    own_threads = os.environ.get("NUMBA_NUM_THREADS")
    with pytest.raises(ClusterError) as err:
        with connect(2) as c:
            # a worker killed mid-run: its task runs again on a fresh worker
            assert map_variants(_die_once, [(marker, v) for v in range(4)], client=c) == \
                [0, 10, 20, 30]
            assert os.path.exists(marker)
            map_variants(_die_always, [1], client=c)   # kills every worker it reaches
    assert f"lost a worker {ALLOWED_FAILURES} times" in str(err.value)
    assert "\n" not in str(err.value)
    # the workers' thread count does not leak into this process (numba would refuse to compile)
    assert os.environ.get("NUMBA_NUM_THREADS") == own_threads


def test_dask_points_and_slices_match_the_slow_reference(client):
    grid = LoadGrid(_grid().pressure[:9, :11], 5000.0, 800.0, 1.5, 2.0)
    rng = np.random.default_rng(13)
    pts = np.column_stack([rng.uniform(4995, 5025, 40), rng.uniform(795, 825, 40),
                           rng.uniform(0.1, 10.0, 40)])
    got = distributed_points(grid, pts, "westergaard", 0.2, client=client, chunk_size=7)
    want = reference.grid_stress(grid.pressure, grid.x0, grid.y0, grid.dx, grid.dy, pts,
                                 "westergaard", 0.2)
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-9)
    for tile in (None, (4, 5)):          # one task per depth, or per tile
        da = distributed_slices(grid, [0.5, 3.0], client=client, pad=2.0, tile=tile)
        np.testing.assert_allclose(da.values, reference.slice_stress(grid, da), rtol=0,
                                   atol=1e-9)


def _hog(megabytes):
    block = np.ones(megabytes * 2**20 // 8)          # touched: resident, not just reserved
    return float(block.sum())


def test_local_workers_hold_the_memory_limit_given_and_a_hog_fails_in_one_line():
    """A deliberate per-worker limit (a run gives its memory cap over the workers): the
    workers report it, and a task that needs four times as much is stopped by the
    nanny, retried, then fails with one line instead of swapping the machine."""
    from fillstress.errors import ClusterError
    from fillstress.solve.distributed import connect
    limit = 256 * 2**20
    with pytest.raises(ClusterError) as err:
        with connect(1, worker_memory=limit) as c:
            workers = c.scheduler_info()["workers"].values()
            assert [w["memory_limit"] for w in workers] == [limit]
            assert map_variants(_hog, [16], client=c) == [16 * 2**20 / 8]   # fits
            map_variants(_hog, [1024], client=c)
    assert "\n" not in str(err.value)


def test_worker_memory_below_what_a_worker_needs_is_refused():
    from fillstress.errors import InputError
    from fillstress.solve.distributed import connect
    with pytest.raises(InputError, match="worker_memory"):
        with connect(1, worker_memory=1000):
            pass


def _guarded_example() -> str:
    """The docs/api.md example that keeps a local cluster under the ``__main__`` guard, as
    the script a user would save from it."""
    from pathlib import Path
    text = (Path(__file__).parents[1] / "docs" / "api.md").read_text(encoding="utf-8")
    block = next(b for b in text.split("```pycon")[1:] if 'if __name__ == "__main__":' in b)
    lines = [line[4:] for line in block.split("```")[0].splitlines()
             if line.startswith((">>> ", "... "))]
    return "\n".join(lines) + "\n"


def test_the_documented_local_cluster_example_runs_as_a_script(tmp_path):
    # Workers of a local cluster import the script again: without the guard each would
    # start a cluster of its own. The example, saved as a script, must run and agree with
    # the serial path.
    import subprocess
    script = _guarded_example()
    assert 'if __name__ == "__main__":' in script and "connect(2)" in script
    script += ("        np.save('dsz.npy', dsz)\n"
               "        np.save('stack.npy', np.asarray(stack))\n")
    (tmp_path / "example.py").write_text(script)
    done = subprocess.run([sys.executable, "example.py"], cwd=tmp_path, capture_output=True,
                          text=True, timeout=300)
    assert done.returncode == 0, done.stderr[-2000:]
    grid = LoadGrid(np.full((40, 40), 50.0), x0=0.0, y0=0.0, dx=1.0, dy=1.0)
    np.testing.assert_allclose(np.load(tmp_path / "dsz.npy"),
                               stress_at_points(grid, [[20.0, 20.0, 5.0]]), rtol=1e-9)
    serial = np.asarray(stress_slices(grid, [2.0, 5.0]))
    np.testing.assert_allclose(np.load(tmp_path / "stack.npy"), serial, rtol=1e-9, atol=1e-9)
