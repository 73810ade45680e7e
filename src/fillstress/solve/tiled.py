"""Exact FFT slices computed in tiles, under a memory cap.

The slice lattice is cut into output tiles and the load grid into load tiles of the same
size.  Each (output tile, load tile) pair is one small exact FFT convolution
(:class:`fillstress.solve.slices.SlicePlan` with the pair's offset), and an output tile
is the sum over load tiles — block convolution, the overlap-add idea applied to both
operands.  Every pair is exact, so the sum equals the untiled slice to round-off; the
working set is one pair of tiles instead of the whole padded grid.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import xarray as xr

from ..errors import InputError
from .cost import check_capacity, estimate_slices, largest_tile
from ..kernels import KernelSpec
from ..progress import open_bar, silent
from .._validate import whole_pair
from ._checks import fft_workers
from .slices import SlicePlan, slice_array, slice_setup


@dataclass(frozen=True)
class TileJob:
    """One output tile: rows ``j0:j1`` and columns ``i0:i1`` of the slice lattice.

    Self-contained (pressures of the loaded tiles included), so it can be shipped to a
    Dask worker and run by :func:`run_tile`.
    """

    j0: int
    j1: int
    i0: int
    i1: int
    tile: tuple[int, int]
    loads: tuple  # ((lj0, li0, pressure block padded to `tile`), ...)
    dx: float
    dy: float
    spec: KernelSpec
    depths: np.ndarray
    pad_cells: tuple[int, int]
    offset: tuple[float, float]
    workers: int | None = None


def run_tile(job: TileJob) -> np.ndarray:
    """Δσz (kPa) of one output tile at every depth, shape (n_depths, j1 - j0, i1 - i0).

    Examples
    --------
    >>> from fillstress.kernels import resolve_method
    >>> job = make_jobs(np.full((4, 4), 10.0), 1.0, 1.0, [1.0], resolve_method(), (2, 2))[0]
    >>> run_tile(job).shape
    (1, 2, 2)
    """
    ty, tx = job.tile
    pad_x, pad_y = job.pad_cells
    out = np.zeros((job.depths.size, ty, tx))
    for lj0, li0, block in job.loads:
        # sample (l, k) of this output tile must land where the global lattice puts it
        shift = ((job.i0 - pad_x - li0) * job.dx + job.offset[0],
                 (job.j0 - pad_y - lj0) * job.dy + job.offset[1])
        plan = SlicePlan(block, job.dx, job.dy, job.spec.method, job.spec.poisson,
                         offset=shift, pad_cells=(0, 0), workers=job.workers)
        for k, depth in enumerate(job.depths):
            out[k] += plan.at_depth(depth)
    return out[:, :job.j1 - job.j0, :job.i1 - job.i0]


def _load_tiles(pressure: np.ndarray, tile: tuple[int, int]):
    ty, tx = tile
    ny, nx = pressure.shape
    tiles = []
    for lj0 in range(0, ny, ty):
        for li0 in range(0, nx, tx):
            part = pressure[lj0:lj0 + ty, li0:li0 + tx]
            if not np.any(part):
                continue  # an empty load tile adds nothing
            block = np.zeros(tile)
            block[:part.shape[0], :part.shape[1]] = part
            tiles.append((lj0, li0, block))
    return tuple(tiles)


def make_jobs(pressure, dx, dy, depths, spec: KernelSpec, tile, *, pad_cells=(0, 0),
              offset=(0.0, 0.0), workers=None) -> list[TileJob]:
    """Cut a slice run into output-tile jobs (see :func:`run_tile`).

    Examples
    --------
    >>> from fillstress.kernels import resolve_method
    >>> len(make_jobs(np.ones((5, 4)), 1.0, 1.0, [0.0], resolve_method(), (2, 2)))
    6
    """
    pressure = np.asarray(pressure, dtype=float)
    depths = np.asarray(depths, dtype=float)
    ny, nx = pressure.shape
    pad_x, pad_y = pad_cells
    my, mx = ny + 2 * pad_y, nx + 2 * pad_x
    loads = _load_tiles(pressure, tuple(tile))
    return [TileJob(j0, min(j0 + tile[0], my), i0, min(i0 + tile[1], mx), tuple(tile), loads,
                    float(dx), float(dy), spec, depths, (pad_x, pad_y), tuple(offset), workers)
            for j0 in range(0, my, tile[0]) for i0 in range(0, mx, tile[1])]


def prepare_tiled(grid, depths, method="boussinesq", poisson=None, *, offset=(0.0, 0.0),
                  pad=0.0, memory_cap=None, tile=None, workers=None):
    """Validate a tiled slice run, check it against the cap and cut it into jobs.

    Returns ``(jobs, frame)``: the :class:`TileJob` list and the frame of
    :func:`~fillstress.solve.slices.slice_setup` for :func:`assemble`.  Nothing of the
    output size is allocated.
    Used by :func:`tiled_slices` and :func:`fillstress.solve.distributed.distributed_slices`.

    Examples
    --------
    >>> from fillstress import LoadGrid
    >>> jobs, frame = prepare_tiled(LoadGrid(np.ones((4, 4)), 0, 0, 1, 1), [1.0], tile=(2, 4))
    >>> len(jobs), frame["x"].tolist()
    (2, [0.5, 1.5, 2.5, 3.5])
    """
    grid, frame = slice_setup(grid, depths, method, poisson, offset=offset, pad=pad)
    z, pad_cells = frame["depth"], frame["pad_cells"]
    if tile is None:
        if memory_cap is None:
            raise InputError("give a tile size or a memory cap in bytes", argument="tile/memory_cap")
        tile = largest_tile(grid.shape, z.size, memory_cap, pad_cells=pad_cells)
    tile = whole_pair(tile, "tile", minimum=1,
                      meaning="(rows, columns), positive whole numbers of cells")
    est = estimate_slices(grid.shape, z.size, pad_cells=pad_cells, tile=tile)
    check_capacity(est, memory_cap, hint="smaller tiles, fewer depths or a coarser cell")
    jobs = make_jobs(grid.pressure, grid.dx, grid.dy, z, frame["spec"], tile,
                     pad_cells=pad_cells, offset=frame["offset"], workers=fft_workers(workers))
    return jobs, frame


def assemble(jobs, results, frame) -> xr.DataArray:
    """Place tile results into one (depth, y, x) DataArray like ``stress_slices`` returns.

    `jobs` are anything with ``j0, j1, i0, i1`` (rows and columns of the lattice each
    result covers); `results` may be a generator: each tile is written as it arrives, so only the output
    and one tile are held at a time.
    """
    values = np.empty((frame["depth"].size, frame["y"].size, frame["x"].size))
    for job, part in zip(jobs, results):
        values[:, job.j0:job.j1, job.i0:job.i1] = part
    return slice_array(values, frame)


def tiled_slices(grid, depths, method="boussinesq", poisson=None, *, offset=(0.0, 0.0),
                 pad=0.0, memory_cap=None, tile=None, workers=None, progress=None) -> xr.DataArray:
    """Δσz (kPa) on plan slices, computed tile by tile within `memory_cap` bytes.

    Same lattice, coordinates and values (to round-off) as
    :func:`fillstress.solve.slices.stress_slices`.

    Parameters
    ----------
    grid, depths, method, poisson, offset, pad, workers
        As for :func:`~fillstress.solve.slices.stress_slices`.
    memory_cap : float, optional
        Bytes the run may use (output included).  Without `tile`, the largest tile that
        fits is chosen; CapacityError is raised before allocating when nothing fits.
    tile : (int, int), optional
        Tile size (rows, columns) in cells.
    progress : callable, optional
        Progress factory ``progress(label, total)`` (see :mod:`fillstress.progress`),
        advanced once per output tile.

    Examples
    --------
    >>> from fillstress import LoadGrid
    >>> g = LoadGrid(np.full((6, 5), 40.0), 0.0, 0.0, 1.0, 1.0)
    >>> s = tiled_slices(g, [0.0, 2.0], tile=(2, 2))
    >>> s.shape, round(float(s[0, 3, 2]), 9)
    ((2, 6, 5), 40.0)
    """
    jobs, frame = prepare_tiled(grid, depths, method, poisson, offset=offset, pad=pad,
                                memory_cap=memory_cap, tile=tile, workers=workers)
    factory = progress or silent
    with open_bar(factory, "stress slices", len(jobs), unit="tiles") as bar:
        def tiles():
            for job in jobs:
                part = run_tile(job)
                bar.advance()  # before yielding: the consumer stops after the last tile
                yield part
        return assemble(jobs, tiles(), frame)


__all__ = ["tiled_slices", "make_jobs", "run_tile", "TileJob", "prepare_tiled", "assemble"]
