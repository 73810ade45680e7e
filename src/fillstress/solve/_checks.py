"""Argument checks shared by the solvers, the estimates and the Dask layer.

One place for the checks that were written out again in each solver module: the
re-check of a LoadGrid, the (ox, oy) sample offset, chunk sizes and FFT threads. Whole
numbers (pads, tiles, expansion order, retries) use _validate.whole_number/whole_pair.  Each raises InputError naming
the argument.
"""
from __future__ import annotations

import os
from contextlib import contextmanager

from .._validate import finite_array, positive, whole_number
from ..errors import InputError
from ..grid import LoadGrid

#: Expansion order of the far-field method (solve/farfield.py), here so that the callers
#: that only pass it on need not load the far field's compiled code.
DEFAULT_ORDER = 4


def checked_grid(grid) -> LoadGrid:
    """Re-check a LoadGrid (its pressure array is mutable after construction).

    Examples
    --------
    >>> checked_grid([[1.0]])
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument grid: must be a fillstress.LoadGrid, got list
    """
    if not isinstance(grid, LoadGrid):
        raise InputError(f"must be a fillstress.LoadGrid, got {type(grid).__name__}",
                         argument="grid")
    finite_array(grid.pressure, "grid.pressure", ndim=2)
    positive(grid.dx, "grid.dx")
    positive(grid.dy, "grid.dy")
    return grid


def offset_pair(offset) -> tuple[float, float]:
    """The (ox, oy) shift in metres of slice samples from the cell centres.

    Examples
    --------
    >>> offset_pair([0.5, 0])
    (0.5, 0.0)
    """
    arr = finite_array(offset, "offset")
    if arr.shape != (2,):
        raise InputError(f"must be (ox, oy) in metres, got shape {arr.shape}", argument="offset")
    return float(arr[0]), float(arr[1])


#: Transforms of at least this many values share their work over the cores by default;
#: smaller ones (a headroom map's slices) lose more to starting threads than they gain.
THREADED_FFT_SIZE = 1 << 18


def fft_workers(workers, size: int | None = None) -> int:
    """Threads for scipy.fft: `workers`, a positive number, or by default (None) the cores
    this process may run on for a transform of `size` values from THREADED_FFT_SIZE up,
    one below it. scipy's own default is one thread; a slice's transforms are many
    independent 1-D transforms, which threads share with the same arithmetic (the values
    do not change); on two cores the heavy corridor's plan settlement
    (``benchmarks/bench_corridor.py --heavy``) went from 12.5 s to 9.1 s
    (docs/performance.md, before and after).

    Examples
    --------
    >>> fft_workers(None, size=100), fft_workers(2)
    (1, 2)
    """
    if workers is None:
        if size is not None and size < THREADED_FFT_SIZE:
            return 1
        cores = os.sched_getaffinity(0) if hasattr(os, "sched_getaffinity") else None
        return max(1, len(cores) if cores else os.cpu_count() or 1)
    return whole_number(workers, "workers", minimum=1,
                        meaning="None or a positive number of threads")


@contextmanager
def compiled_threads(workers: int):
    """Run the compiled (numba) kernels inside on `workers` threads, then restore the count.

    A slice too small to share its FFT over the cores (fft_workers gives one thread) is
    too small to share its kernel too: on an idle machine a parallel call on 20² to 100²
    nodes (a headroom map's templates) takes 0.17–0.21 ms with OpenMP's threads asleep
    (OMP_WAIT_POLICY=PASSIVE, the command's default) against 0.007–0.09 ms on one
    thread, and on a busy one up to 16 ms with them spinning
    (``benchmarks/bench_threads.py --load 0`` and ``--load 2``). The values do not change: each thread
    computes whole entries, nothing is summed across threads. numba's thread count is
    per calling thread, so Dask's worker threads do not see each other's.  numba is
    imported here: this module is loaded by `fillstress point`, which never compiles."""
    import numba

    before = numba.get_num_threads()
    if workers >= before:
        yield
        return
    numba.set_num_threads(max(1, workers))
    try:
        yield
    finally:
        numba.set_num_threads(before)


def points_per_chunk(chunk, name: str, default: int) -> int:
    """Points per chunk: `default` when `chunk` is None, else a whole number >= 1.

    Examples
    --------
    >>> points_per_chunk(None, "chunk_size", 20_000), points_per_chunk(7, "chunk_size", 1)
    (20000, 7)
    """
    if chunk is None:
        return default
    return whole_number(chunk, name, minimum=1, meaning="a positive whole number of points")
