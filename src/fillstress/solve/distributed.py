"""Spread depth slices, slice tiles and point chunks over a Dask cluster.

Every function takes the ``client`` explicitly (no global scheduler) and runs the same
functions the serial path runs, on the same pieces, so the numbers are the same.  A
worker lost mid-task is not fatal: the scheduler runs the task again elsewhere (Dask's
``distributed.scheduler.allowed-failures``, 3 by default), and ``retries`` re-runs tasks
that raised.
"""
from __future__ import annotations

import os
from contextlib import contextmanager
from dataclasses import replace
from typing import NamedTuple

import numpy as np
import xarray as xr

from .._lazy import require_extra
from .._validate import points_array, whole_number
from ..errors import ClusterError, InputError
from ..progress import open_bar, silent
from .auto import DEFAULT_CHUNK, PointSolver
from ._checks import DEFAULT_ORDER, points_per_chunk
from .slices import slice_at_depth, slice_setup
from .tiled import assemble, prepare_tiled, run_tile

# dask and distributed (an optional part) is imported inside the functions that use it: it is slow to load and
# most commands never need it.

DEFAULT_RETRIES = 2
#: Seconds to reach a scheduler (or a local cluster's) before giving up with one line.
SCHEDULER_TIMEOUT_S = 10
#: Times a task may lose its worker before the run fails (Dask's default is 3).
ALLOWED_FAILURES = 3
#: Each local worker may use this share of the machine's memory unless `connect` is given
#: a limit (a run gives its memory cap over the workers); Dask pauses a worker at 80 % of
#: it and restarts one at 95 % instead of letting the machine swap.
WORKER_MEMORY = "auto"


def _worker_memory(limit) -> int | str:
    """Dask's memory_limit of one local worker: `limit` bytes (a whole number >= 64 MiB,
    below which a worker cannot even start), or WORKER_MEMORY."""
    if limit is None:
        return WORKER_MEMORY
    return whole_number(limit, "worker_memory", minimum=64 * 2**20,
                        meaning="bytes per worker, at least 64 MiB")


@contextmanager
def connect(scheduler, *, worker_memory: int | None = None):
    """A Dask client for a scheduler address ("tcp://host:8786") or a local cluster size.

    An int starts a local cluster, closed on exit:
    ``LocalCluster(n_workers=scheduler, threads_per_worker=1, processes=True)``;
    a string connects to a running scheduler. Needs the ``dask`` extra
    (``pip install 'fillstress[dask]'``).

    Parameters
    ----------
    scheduler : int or str
        Number of local worker processes (>= 1), or the address of a running scheduler.
    worker_memory : int, optional
        Bytes each local worker may hold (default: an equal share of the machine's
        memory); a running scheduler's workers keep their own limits.

    Yields
    ------
    distributed.Client
        Closed, with the local cluster, when the with-block ends.

    Raises
    ------
    InputError
        A bad `scheduler`, a scheduler that cannot be reached, or a local cluster that
        does not start.
    ClusterError
        The cluster lost its workers past the retries while the block ran.

    Examples
    --------
    A local cluster's workers are new processes that import the calling script again,
    so a script that starts one keeps its work under the ``__main__`` guard (without
    it, each worker would start a cluster of its own):

    >>> import numpy as np
    >>> from fillstress import LoadGrid, connect, distributed_points, distributed_slices
    >>> grid = LoadGrid(np.full((40, 40), 50.0), x0=0.0, y0=0.0, dx=1.0, dy=1.0)
    >>> if __name__ == "__main__":
    ...     with connect(2) as client:              # two local worker processes
    ...         dsz = distributed_points(grid, [[20.0, 20.0, 5.0]], client=client)
    ...         stack = distributed_slices(grid, [2.0, 5.0], client=client)

    A bad size is refused before anything starts:

    >>> with connect(0.5) as client:
    ...     pass
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument scheduler: must be a scheduler address or a number of workers >= 1, got 0.5
    """
    _require_dask("scheduler")
    from distributed import Client, LocalCluster
    if isinstance(scheduler, str) and scheduler.strip():
        address = scheduler.strip()
        try:
            client = Client(address, timeout=SCHEDULER_TIMEOUT_S)
        except (OSError, TimeoutError, ValueError) as exc:
            raise InputError(f"cannot reach the Dask scheduler at {address} within "
                             f"{SCHEDULER_TIMEOUT_S:g} s ({type(exc).__name__})",
                             argument="--scheduler") from None
        try:
            with _cluster_failures(f"the Dask cluster at {address}"):
                yield client
        finally:
            client.close()
        return
    if isinstance(scheduler, bool) or not isinstance(scheduler, (int, np.integer)) or scheduler < 1:
        raise InputError(f"must be a scheduler address or a number of workers >= 1, got {scheduler!r}",
                         argument="scheduler")
    # Each worker is one process with one Dask thread; its numba kernels share the
    # machine's cores with the other workers instead of each taking all of them.
    n = int(scheduler)
    numba_threads = max(1, (os.cpu_count() or 1) // n)
    import dask
    with dask.config.set({"distributed.nanny.pre-spawn-environ.NUMBA_NUM_THREADS":
                          str(numba_threads),
                          # a worker lost mid-run is replaced and its tasks run again, at
                          # most this many times, then the run fails with one line
                          "distributed.scheduler.allowed-failures": ALLOWED_FAILURES,
                          "distributed.comm.timeouts.connect": f"{SCHEDULER_TIMEOUT_S}s"}):
        own_threads = os.environ.get("NUMBA_NUM_THREADS")
        try:
            cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=True,
                                   dashboard_address=":0",
                                   memory_limit=_worker_memory(worker_memory),
                                   silence_logs=50)
        except Exception as exc:        # ports, processes, memory: the cluster did not start
            raise InputError(f"the local Dask cluster of {n} workers did not start "
                             f"({type(exc).__name__}: {exc})", argument="--workers") from None
        finally:
            _restore_numba_threads(own_threads)
    client = Client(cluster)
    try:
        with _cluster_failures(f"the local Dask cluster of {n} workers"):
            yield client
    finally:
        client.close()
        cluster.close()
        _restore_numba_threads(own_threads)  # a worker restarted mid-run set it again


def _restore_numba_threads(value):
    """Put back this process's NUMBA_NUM_THREADS: the nanny sets its pre-spawn variables
    here too, and numba refuses its next compile once the variable differs from the
    thread count it started with."""
    if value is None:
        os.environ.pop("NUMBA_NUM_THREADS", None)
    else:
        os.environ["NUMBA_NUM_THREADS"] = value


@contextmanager
def _cluster_failures(what: str):
    """A cluster that loses its workers past the retries, or its scheduler, ends the run
    with one line (ClusterError) instead of Dask's tracebacks."""
    from distributed import KilledWorker
    from distributed.comm import CommClosedError
    from concurrent.futures import CancelledError
    try:
        yield
    except KilledWorker as exc:
        raise ClusterError(f"{what} lost a worker {ALLOWED_FAILURES} times on one task "
                           f"({exc.args[0] if exc.args else 'KilledWorker'}); the run "
                           "stopped and nothing was written: use fewer --workers or run "
                           "without Dask") from None
    except (CancelledError, CommClosedError) as exc:
        raise ClusterError(f"{what} stopped answering ({type(exc).__name__}); the run "
                           "stopped and nothing was written") from None


def _require_dask(argument: str) -> None:
    """InputError naming the extra when Dask is not installed (it is optional)."""
    require_extra("dask", argument=argument)


def _client(client):
    _require_dask("client")
    from distributed import Client
    if not isinstance(client, Client):
        raise InputError(f"must be a distributed.Client, got {type(client).__name__}",
                         argument="client")
    return client


def _gather(client, futures, label, progress):
    """Results in submission order, advancing the progress bar as tasks finish."""
    from distributed import as_completed
    factory = progress or silent
    with open_bar(factory, label, len(futures), unit="tasks") as bar:
        for _ in as_completed(futures):
            bar.advance()
    return client.gather(futures)


def distributed_points(grid, points, method="boussinesq", poisson=None, *, client,
                       algorithm="auto", chunk_size=None, tol=1e-3, floor=0.01,
                       order=DEFAULT_ORDER, retries=DEFAULT_RETRIES,
                       progress=None) -> np.ndarray:
    """Δσz (kPa) at points, chunks evaluated on Dask workers.

    Same arguments and values as :func:`fillstress.solve.auto.stress_at_points`; the
    evaluator (with the far-field pyramid, if chosen) is sent to the workers once.

    Parameters
    ----------
    grid : LoadGrid
        Surface pressures.
    points : array_like, shape (N, 3)
        x, y (m, the grid's coordinates) and depth (m, > 0) of each point.
    method : {"boussinesq", "westergaard"}
        Stress distribution (as for :func:`fillstress.solve.vertical_stress`).
    poisson : float, optional
        Poisson's ratio for Westergaard (default 0); None for Boussinesq.
    client : distributed.Client
        From :func:`connect` (see its example for the ``__main__`` guard).
    algorithm : {"auto", "direct", "far"}
        As :func:`fillstress.solve.auto.stress_at_points`.
    chunk_size : int, optional
        Points per task (default 20 000).
    tol, floor : float
        Far-field accuracy, as :func:`fillstress.solve.auto.stress_at_points`.
    order : int
        Far-field expansion order.
    retries : int
        Times a task lost with its worker is run again.
    progress : callable, optional
        A progress factory (``progress(label, total)``), one step per chunk.

    Returns
    -------
    numpy.ndarray, shape (N,)
        Δσz (kPa), equal to the serial path's.

    Examples
    --------
    Under the ``__main__`` guard of a script (see :func:`connect`):

    >>> from fillstress import LoadGrid
    >>> grid = LoadGrid([[50.0]], x0=0.0, y0=0.0, dx=1.0, dy=1.0)
    >>> if __name__ == "__main__":
    ...     with connect(2) as client:
    ...         dsz = distributed_points(grid, [[0.5, 0.5, 1.0]], client=client)

    Anything but a client is refused before work starts:

    >>> distributed_points(grid, [[0.5, 0.5, 1.0]], client="tcp://127.0.0.1:8786")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument client: must be a distributed.Client, got str
    """
    solver = DistributedSolver(grid, method, poisson, client=client, chunk_size=chunk_size,
                               tol=tol, floor=floor, order=order, retries=retries)
    return solver(points, algorithm=algorithm, progress=progress)


class DistributedSolver:
    """Δσz (kPa) at points below one load grid on Dask workers, for many calls: as
    :class:`fillstress.solve.auto.PointSolver` (each call chooses its algorithm by its
    size), with each evaluator (the far-field pyramid, the node weights) sent to the
    workers once, not once a call. Arguments as :func:`distributed_points`;
    `memory_cap` and `numpy_for_small` as for PointSolver."""

    def __init__(self, grid, method="boussinesq", poisson=None, *, client, chunk_size=None,
                 tol=1e-3, floor=0.01, order=DEFAULT_ORDER, retries=DEFAULT_RETRIES,
                 memory_cap=None, numpy_for_small=True):
        self.client = _client(client)
        self.retries = whole_number(retries, "retries", minimum=0)
        self.step = points_per_chunk(chunk_size, "chunk_size", DEFAULT_CHUNK)
        self.solver = PointSolver(grid, method, poisson, tol=tol, floor=floor, order=order,
                                  memory_cap=memory_cap, numpy_for_small=numpy_for_small)
        self._shared = {}                    # algorithm → the evaluator on the workers

    def __call__(self, points, *, algorithm="auto", progress=None) -> np.ndarray:
        pts = points_array(points)
        chosen = self.solver.choose(pts.shape[0], algorithm)
        if chosen not in self._shared:
            # hash=False: a key of its own; with content keys a later solver on the same
            # data can reuse a key this one is releasing ("lost dependencies").
            self._shared[chosen] = self.client.scatter(self.solver.evaluator(chosen),
                                                       broadcast=True, hash=False)
        futures = [self.client.submit(_apply, self._shared[chosen], pts[s:s + self.step],
                                      retries=self.retries, pure=False)
                   for s in range(0, pts.shape[0], self.step)]
        parts = _gather(self.client, futures, f"stress at points ({chosen}, Dask)", progress)
        return np.concatenate(parts) if parts else np.zeros(0)


def _apply(evaluate, part):
    return evaluate(part)


def _run_tile_with(job, loads):
    return run_tile(replace(job, loads=loads))


def distributed_slices(grid, depths, method="boussinesq", poisson=None, *, client,
                       offset=(0.0, 0.0), pad=0.0, memory_cap=None, tile=None,
                       retries=DEFAULT_RETRIES, progress=None) -> xr.DataArray:
    """Δσz (kPa) on plan slices, one Dask task per depth (or per tile with `tile` or
    `memory_cap`, the cap then applying to each task).

    Same lattice and values as :func:`fillstress.solve.slices.stress_slices` (untiled)
    or :func:`fillstress.solve.tiled.tiled_slices` (tiled).

    Parameters
    ----------
    grid : LoadGrid
        Surface pressures.
    depths : sequence of float
        Slice depths (m, > 0).
    method : {"boussinesq", "westergaard"}
        Stress distribution (as for :func:`fillstress.solve.vertical_stress`).
    poisson : float, optional
        Poisson's ratio for Westergaard (default 0); None for Boussinesq.
    client : distributed.Client
        From :func:`connect` (see its example for the ``__main__`` guard).
    offset : (float, float)
        Shift (m) of the sample points, as :func:`fillstress.solve.slices.stress_slices`.
    pad : float
        Extension (m) of the sample lattice, as :func:`fillstress.solve.slices.stress_slices`.
    memory_cap : float, optional
        Bytes each task may use, as :func:`fillstress.solve.tiled.tiled_slices`; makes
        one task per tile.
    tile : (int, int), optional
        Tile size (rows, columns) in cells, as :func:`fillstress.solve.tiled.tiled_slices`;
        makes one task per tile.
    retries : int
        Times a task lost with its worker is run again.
    progress : callable, optional
        A progress factory (``progress(label, total)``), one step per task.

    Returns
    -------
    xarray.DataArray
        Δσz (kPa) on dims ``(depth, y, x)``, as the serial functions return it.

    Examples
    --------
    Under the ``__main__`` guard of a script (see :func:`connect`):

    >>> from fillstress import LoadGrid
    >>> grid = LoadGrid([[50.0]], x0=0.0, y0=0.0, dx=1.0, dy=1.0)
    >>> if __name__ == "__main__":
    ...     with connect(2) as client:
    ...         stack = distributed_slices(grid, [1.0, 2.0], client=client, pad=2.0)
    >>> distributed_slices(grid, [1.0], client=None)
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument client: must be a distributed.Client, got NoneType
    """
    client = _client(client)
    retries = whole_number(retries, "retries", minimum=0)
    if tile is not None or memory_cap is not None:
        jobs, frame = prepare_tiled(grid, depths, method, poisson, offset=offset, pad=pad,
                                    memory_cap=memory_cap, tile=tile)
        # every job holds the same load tiles (the whole grid): send them to each worker
        # once instead of inside every task
        [loads] = client.scatter([jobs[0].loads], broadcast=True, hash=False)
        futures = [client.submit(_run_tile_with, replace(job, loads=()), loads,
                                 retries=retries, pure=False) for job in jobs]
        parts = _gather(client, futures, "stress slices (tiles, Dask)", progress)
        return assemble(jobs, parts, frame)
    grid, frame = slice_setup(grid, depths, method, poisson, offset=offset, pad=pad)
    spec = frame["spec"]
    pressure = client.scatter(grid.pressure, broadcast=True, hash=False)   # see above
    futures = [client.submit(slice_at_depth, pressure, grid.dx, grid.dy, float(z), spec.method,
                             spec.poisson, offset=frame["offset"], pad_cells=frame["pad_cells"],
                             retries=retries, pure=False)
               for z in frame["depth"]]
    parts = _gather(client, futures, "stress slices (depths, Dask)", progress)
    whole = _Region(0, frame["y"].size, 0, frame["x"].size)
    return assemble([whole], [np.stack(parts)], frame)


class _Region(NamedTuple):
    j0: int
    j1: int
    i0: int
    i1: int


def map_variants(fn, variants, client=None, *, retries=DEFAULT_RETRIES, progress=None) -> list:
    """``[fn(v) for v in variants]``, on Dask workers when a client is given.

    Parameters
    ----------
    fn : callable
        Applied to each variant; on workers it must be importable by them (a module-level
        function, not a lambda defined under the ``__main__`` guard).
    variants : iterable
        The inputs.
    client : distributed.Client, optional
        From :func:`connect`; None runs here, in order.
    retries : int
        Times a task lost with its worker is run again.
    progress : optional
        A progress factory (``progress(label, total)``), one step per variant.

    Returns
    -------
    list
        ``fn(v)`` for each variant, in the order given.

    Examples
    --------
    >>> map_variants(abs, [-2, 3, -4])
    [2, 3, 4]
    """
    if not callable(fn):
        raise InputError(f"must be callable, got {type(fn).__name__}", argument="fn")
    variants = list(variants)
    factory = progress or silent
    if client is None:
        out = []
        with open_bar(factory, "variants", len(variants), unit="variants") as bar:
            for v in variants:
                out.append(fn(v))
                bar.advance()
        return out
    client = _client(client)
    retries = whole_number(retries, "retries", minimum=0)
    futures = [client.submit(fn, v, retries=retries, pure=False) for v in variants]
    return _gather(client, futures, "variants (Dask)", progress)


__all__ = ["connect", "distributed_points", "distributed_slices", "map_variants",
           "DEFAULT_RETRIES"]
