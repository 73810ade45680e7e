"""Δσz at points with the algorithm chosen by problem size, evaluated in chunks.

Direct summation (exact) costs one corner evaluation per non-zero node weight per
point; the far-field method (certified to ``tol``) costs a pyramid build plus a few
hundred block visits per point.  ``algorithm="auto"`` uses direct summation while
points × non-zero nodes stays below :data:`DIRECT_WORK_LIMIT`, and beyond it while
direct summation is estimated no slower than the far field (:func:`algorithm_for`).
"""
from __future__ import annotations

import logging

import numpy as np

from .._validate import points_array
from ..errors import InputError
from ..kernels import resolve_method
from ..progress import open_bar, silent
from ._checks import DEFAULT_ORDER, checked_grid, points_per_chunk
from .nodes import listed_nodes, node_weights, numpy_node_sum

log = logging.getLogger(__name__)

# About 1 s of direct summation on the 2-core development machine (see solve/cost.py);
# above it the far field is faster, see docs/performance.md "## Far field".
DIRECT_WORK_LIMIT = 5e7
DEFAULT_CHUNK = 20_000
# Direct summation by numpy (no compiled code) up to this many corner evaluations: a few
# points on a site answer in milliseconds, where numba needs about half a second to load
# its cached kernels in a new process (docs/performance.md, `fillstress point`).
NUMPY_WORK_LIMIT = 1_000_000
ALGORITHMS = ("auto", "direct", "far")


def direct_work(grid, n_points: int) -> int:
    """Corner evaluations direct summation needs: points × non-zero node weights.

    Examples
    --------
    >>> from fillstress import LoadGrid
    >>> direct_work(LoadGrid(np.ones((3, 3)), 0, 0, 1, 1), 10)   # 4 corner nodes
    40
    """
    return int(n_points) * int(np.count_nonzero(node_weights(grid.pressure)))


def choose_algorithm(grid, n_points: int, algorithm: str = "auto", memory_cap=None) -> str:
    """"direct" or "far" for `n_points` points below `grid` (`algorithm` overrides "auto";
    `memory_cap`: bytes the call may use, see :func:`algorithm_for`).

    Examples
    --------
    >>> from fillstress import LoadGrid
    >>> g = LoadGrid(np.ones((3, 3)), 0, 0, 1, 1)
    >>> choose_algorithm(g, 10), choose_algorithm(g, 10, "far")
    ('direct', 'far')
    """
    return PointSolver(grid, memory_cap=memory_cap).choose(n_points, algorithm)


def _checked_algorithm(algorithm: str) -> str:
    if algorithm not in ALGORITHMS:
        raise InputError(f"must be one of {', '.join(ALGORITHMS)}; got {algorithm!r}",
                         argument="algorithm")
    return algorithm


def algorithm_for(work: int, shape=None, n_points: int = 0, memory_cap=None) -> str:
    """What "auto" picks for `work` corner evaluations (see :func:`direct_work`) at
    `n_points` points below a grid of `shape` (ny, nx): direct summation (exact) up to
    :data:`DIRECT_WORK_LIMIT`; beyond it direct summation still where it is estimated no
    slower than the far field with its block pyramid (a few hundred points below a large
    fine grid), or where only it fits `memory_cap` bytes (solve/cost.py); the far field
    otherwise. Without `shape`, by the work alone.

    Examples
    --------
    >>> algorithm_for(DIRECT_WORK_LIMIT), algorithm_for(DIRECT_WORK_LIMIT + 1)
    ('direct', 'far')
    >>> algorithm_for(2e8, (3000, 5000), 500)     # 3.9 s direct, 3.0 s pyramid
    'far'
    >>> algorithm_for(1.4e8, (3000, 5000), 500), algorithm_for(2e8, (3000, 5000), 500, 1e9)
    ('direct', 'direct')
    """
    if work <= DIRECT_WORK_LIMIT:
        return "direct"
    if shape is None:
        return "far"
    from .cost import direct_seconds, estimate_points, far_seconds
    cells = int(np.prod(shape))
    if direct_seconds(work, cells) <= far_seconds(cells, n_points):
        return "direct"
    if memory_cap is not None:
        far = estimate_points(shape, n_points, algorithm="far")
        direct = estimate_points(shape, n_points, algorithm="direct")
        if far.bytes > memory_cap >= direct.bytes:
            return "direct"
    return "far"


def point_evaluator(grid, method="boussinesq", poisson=None, *, algorithm="direct",
                    tol=1e-3, floor=0.01, order=DEFAULT_ORDER):
    """A picklable callable ``f(points) -> Δσz`` for one algorithm (no choice made here).

    The far-field pyramid is built once, so chunks (and Dask tasks) share it.

    Examples
    --------
    >>> from fillstress import LoadGrid
    >>> f = point_evaluator(LoadGrid([[100.0]], 0, 0, 2, 2), algorithm="far")
    >>> f(np.array([[1.0, 1.0, 0.0]])).round(9).tolist()
    [100.0]
    """
    grid = checked_grid(grid)
    spec = resolve_method(method, poisson)
    if algorithm == "direct":
        return _Direct(grid, spec.method, spec.poisson)
    if algorithm == "far":
        from .farfield import _accuracy, build_pyramid
        tol, floor = _accuracy(tol, floor)
        return _Far(build_pyramid(grid, spec.method, spec.poisson, order=order), tol, floor)
    raise InputError(f"must be 'direct' or 'far', got {algorithm!r}", argument="algorithm")


class _Direct:
    """Direct summation: numpy for a call of small work (`numpy_for_small`), the compiled
    node kernel otherwise. The node weights, their rows and the numpy path's listed nodes
    are prepared once, so a solver called many times on one grid (a run's settlement
    columns) pays them once."""

    def __init__(self, grid, method, poisson, numpy_for_small=True):
        self.grid, self.spec = grid, resolve_method(method, poisson)
        self.weights = node_weights(grid.pressure)
        self.nodes = int(np.count_nonzero(self.weights))
        self.numpy_limit = NUMPY_WORK_LIMIT if numpy_for_small else -1
        self._rows = self._listed = None

    def __call__(self, points):
        pts = points_array(points)
        if pts.shape[0] * self.nodes <= self.numpy_limit:
            if self._listed is None:
                self._listed = listed_nodes(self.grid, self.weights)
            return numpy_node_sum(self.grid, pts, self.spec.depth_scale,
                                  self.spec.second_term, listed=self._listed)
        from .direct import node_rows, vertical_stress
        if self._rows is None:
            self._rows = node_rows(self.weights)
        return vertical_stress(self.grid, pts, self.spec.method, self.spec.poisson,
                               node=self._rows)


class _Far:
    def __init__(self, pyramid, tol, floor):
        self.pyramid, self.tol, self.floor = pyramid, tol, floor

    def __call__(self, points):
        from .farfield import evaluate_pyramid
        return evaluate_pyramid(self.pyramid, points, tol=self.tol, floor=self.floor)


class PointSolver:
    """Δσz (kPa) at points below one load grid, for many calls: what does not depend on
    the points (node weights, their rows, the far-field pyramid) is prepared once, and
    each call chooses its algorithm by its own size as :func:`stress_at_points` does, so
    its values are those of a :func:`stress_at_points` call with the same points.

    The grid's pressures are read once: a solver does not see later changes to them.
    `memory_cap` (bytes) keeps a call that would not fit in the far field's memory on
    direct summation (:func:`algorithm_for`). `numpy_for_small`: small direct sums by
    numpy, which answers before numba has loaded its kernels (``fillstress point``); a
    run, which loads them anyway, passes False.

    Examples
    --------
    >>> from fillstress import LoadGrid
    >>> solve = PointSolver(LoadGrid([[100.0]], x0=0.0, y0=0.0, dx=2.0, dy=2.0))
    >>> solve([[0, 0, 2.0]]).round(2).tolist(), solve([[1, 1, 0.0]], algorithm="far").tolist()
    ([17.52], [100.0])
    """

    def __init__(self, grid, method="boussinesq", poisson=None, *, tol=1e-3, floor=0.01,
                 order=DEFAULT_ORDER, memory_cap=None, numpy_for_small=True):
        self.grid, self.memory_cap = checked_grid(grid), memory_cap
        self.spec = resolve_method(method, poisson)
        self.far_options = {"tol": tol, "floor": floor, "order": order}
        self.direct = _Direct(self.grid, self.spec.method, self.spec.poisson, numpy_for_small)
        self._far = None

    def choose(self, n_points: int, algorithm: str = "auto") -> str:
        """"direct" or "far" for `n_points` points (see :func:`choose_algorithm`)."""
        if _checked_algorithm(algorithm) != "auto":
            return algorithm
        return algorithm_for(n_points * self.direct.nodes, self.grid.pressure.shape, n_points,
                             self.memory_cap)

    def evaluator(self, algorithm: str):
        """The picklable callable ``f(points)`` of "direct" or "far" (built on first use)."""
        if algorithm == "direct":
            return self.direct
        if self._far is None:
            self._far = point_evaluator(self.grid, self.spec.method, self.spec.poisson,
                                        algorithm="far", **self.far_options)
        return self._far

    def __call__(self, points, *, algorithm="auto", chunk_size=None, progress=None):
        pts = points_array(points)
        step = points_per_chunk(chunk_size, "chunk_size", DEFAULT_CHUNK)
        chosen = self.choose(pts.shape[0], algorithm)
        evaluate = self.evaluator(chosen)
        out = np.empty(pts.shape[0])
        log.info("stress at %d points by the %s algorithm, on a %s-cell load grid",
                 pts.shape[0], chosen, " × ".join(map(str, np.shape(self.grid.pressure))))
        with open_bar(progress or silent, f"stress at points ({chosen})", pts.shape[0],
                      unit="points") as bar:
            for start in range(0, pts.shape[0], step):
                part = pts[start:start + step]
                out[start:start + part.shape[0]] = evaluate(part)
                bar.advance(part.shape[0])
        return out


def stress_at_points(grid, points, method="boussinesq", poisson=None, *, algorithm="auto",
                     chunk_size=None, progress=None, tol=1e-3, floor=0.01,
                     order=DEFAULT_ORDER) -> np.ndarray:
    """Δσz (kPa) at points, by direct summation or the far-field method.

    Parameters
    ----------
    grid : LoadGrid
        Surface pressure per cell (kPa).
    points : array_like, shape (N, 3)
        x (m), y (m), depth (m, >= 0).
    method : {"boussinesq", "westergaard"}
        Stress distribution (as for :func:`fillstress.solve.vertical_stress`).
    poisson : float, optional
        Poisson's ratio for Westergaard (default 0); None for Boussinesq.
    algorithm : {"auto", "direct", "far"}
        "auto" picks by points × non-zero nodes (see :func:`choose_algorithm`).
    chunk_size : int, optional
        Points per chunk (default 20 000); the result does not depend on it.
    progress : callable, optional
        Progress factory ``progress(label, total)``, advanced by points done.
    tol, floor : float
        Far-field accuracy (see :func:`fillstress.solve.farfield.vertical_stress_far`):
        ``|error| <= tol · max(|Δσz|, floor · max|p|)``.  Direct summation is exact.
    order : int
        Far-field expansion order (the default meets `tol`).

    Returns
    -------
    numpy.ndarray, shape (N,)
        Δσz (kPa) at each point.

    Examples
    --------
    >>> from fillstress import LoadGrid
    >>> g = LoadGrid([[100.0]], x0=0.0, y0=0.0, dx=2.0, dy=2.0)
    >>> pts = [[0, 0, 2.0], [1, 1, 0.0]]
    >>> a = stress_at_points(g, pts, algorithm="direct")
    >>> b = stress_at_points(g, pts, algorithm="far", chunk_size=1)
    >>> bool(np.all(np.abs(a - b) <= 1e-3 * np.maximum(np.abs(a), 1.0))), a.round(2).tolist()
    (True, [17.52, 100.0])
    """
    solver = PointSolver(grid, method, poisson, tol=tol, floor=floor, order=order)
    return solver(points, algorithm=algorithm, chunk_size=chunk_size, progress=progress)


__all__ = ["stress_at_points", "choose_algorithm", "algorithm_for", "direct_work",
           "point_evaluator", "PointSolver", "DIRECT_WORK_LIMIT", "NUMPY_WORK_LIMIT", "ALGORITHMS"]

