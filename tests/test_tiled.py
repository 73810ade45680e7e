"""Tiled FFT slices equal the untiled exact slices; caps are checked before allocating."""
from __future__ import annotations

import tracemalloc

import numpy as np
import pytest

import reference
from fillstress import CapacityError, InputError, LoadGrid
from fillstress.progress import silent
from fillstress.solve.slices import stress_slices
from fillstress.solve.tiled import tiled_slices


def _grid(seed=3, ny=37, nx=53):
    rng = np.random.default_rng(seed)
    p = rng.uniform(-20, 100, (ny, nx)) * (rng.random((ny, nx)) > 0.3)
    p[:10, :12] = 0.0          # an empty load tile is skipped, still exact
    return LoadGrid(p, 410.0, -75.0, 1.5, 2.0)


@pytest.mark.parametrize("kwargs", [{}, {"pad": 4.0}, {"pad": 3.0, "offset": (0.3, -0.7)},
                                    {"method": "westergaard", "poisson": 0.2, "pad": 2.0}])
@pytest.mark.parametrize("tile", [(8, 11), (37, 7), (64, 64)])
def test_tiled_equals_untiled_to_roundoff(kwargs, tile):
    grid = _grid()
    depths = [0.0, 1.0, 7.5]
    whole = stress_slices(grid, depths, **kwargs)
    tiled = tiled_slices(grid, depths, tile=tile, **kwargs)
    assert tiled.dims == whole.dims and tiled.shape == whole.shape
    for name in ("x", "y", "depth"):
        np.testing.assert_allclose(tiled[name], whole[name], rtol=0, atol=1e-12)
    np.testing.assert_allclose(tiled.values, whole.values, rtol=0, atol=1e-10)
    assert tiled.attrs == whole.attrs


@pytest.mark.parametrize("method, poisson", [("boussinesq", None), ("westergaard", 0.25)])
def test_tiled_slices_match_the_slow_reference_at_the_samples(method, poisson):
    grid = _grid(5, 20, 24)
    s = tiled_slices(grid, [0.7, 2.5], method, poisson, pad=3.0, tile=(7, 9))
    np.testing.assert_allclose(s.values, reference.slice_stress(grid, s, method, poisson),
                               rtol=0, atol=1e-9)


def test_memory_cap_picks_tiles_and_counts_progress():
    grid = _grid()
    seen = []

    class Bar:
        def advance(self, n=1):
            seen.append(n)

    from contextlib import contextmanager

    @contextmanager
    def factory(label, total):
        seen.append(("total", total))
        yield Bar()

    whole = stress_slices(grid, [4.0])
    capped = tiled_slices(grid, [4.0], memory_cap=400_000, progress=factory)
    np.testing.assert_allclose(capped.values, whole.values, atol=1e-10)
    total = seen[0][1]
    assert total > 1 and len(seen) == total + 1   # more than one tile, one advance each


def test_capacity_error_is_raised_before_allocating():
    grid = LoadGrid(np.ones((1500, 1500)), 0.0, 0.0, 1.0, 1.0)
    tracemalloc.start()
    try:
        with pytest.raises(CapacityError, match=r"needs 90\.0 MB, cap is 1\.0 MB"):
            tiled_slices(grid, [1.0, 2.0, 3.0, 4.0, 5.0], memory_cap=1e6)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < 5e6   # nothing of the 90 MB output (or a transform) was allocated


def test_tile_arguments_are_checked():
    grid = _grid()
    with pytest.raises(InputError, match="argument tile"):
        tiled_slices(grid, [1.0], tile=(0, 5))
    with pytest.raises(InputError, match="tile/memory_cap"):
        tiled_slices(grid, [1.0])
    with pytest.raises(InputError, match="argument depths"):
        tiled_slices(grid, [-1.0], tile=(5, 5))
    assert tiled_slices(grid, [1.0], tile=(5, 5), progress=silent).shape == (1, 37, 53)
