"""Δσz at arbitrary points by direct summation over every loaded cell.

Two numba kernels, both parallel over points and both exact to round-off:

* the node-weight kernel (default), on the node form of :mod:`.nodes`: nodes inside a
  uniform fill have w = 0 and are skipped, and every node costs one corner evaluation
  instead of four per cell.  The per-column and per-row parts of the
  corner form are computed once per point.
* the per-cell kernel: a straightforward loop over cells with the four-corner
  rectangle formula; kept as a second, simpler fast path and compared in tests.
"""
from __future__ import annotations

from typing import NamedTuple

import numba
import numpy as np

from .._validate import points_array
from ..errors import InputError
from ..grid import LoadGrid
from ..kernels import KernelSpec, resolve_method
from ..kernels.corner import (DEEP, FAST_MATH, INV_2PI, corner_deep, corner_sum, cross_ratio,
                              depth_parts, shared_rectangle)
from ._checks import checked_grid, points_per_chunk
from .nodes import node_coordinates, node_weights


# A row with at least this share of non-zero node weights is summed densely (no index
# array); sparser rows list their non-zero nodes.  A listed node cost about 1.35 dense ones
# when every row was listed (benchmarks/bench_engine.py --only ceiling, before the split), so
# the break-even share is about 0.75; 0.7 is that, rounded down, not tuned.
DENSE_ROW_SHARE = 0.7


class NodeRows(NamedTuple):
    """The rows of node weights that carry weight, each dense or listed.

    rows[k] is a node row index; dense[k] says whether it is summed over all nodes of
    `weights[rows[k]]` or over its listed nodes cols[start[k]:start[k+1]] with values.
    """

    weights: np.ndarray
    rows: np.ndarray
    dense: np.ndarray
    start: np.ndarray
    cols: np.ndarray
    values: np.ndarray


def node_rows(weights: np.ndarray, dense_share: float = DENSE_ROW_SHARE) -> NodeRows:
    """Split the weighted rows of `weights` into dense and listed ones by their density.

    Examples
    --------
    >>> r = node_rows(node_weights(np.array([[2.0, 2.0]])))
    >>> r.rows.tolist(), r.dense.tolist(), r.cols.tolist()
    ([0, 1], [False, False], [0, 2, 0, 2])
    """
    counts = np.count_nonzero(weights, axis=1)
    rows = np.flatnonzero(counts).astype(np.int64)
    dense = counts[rows] >= dense_share * weights.shape[1]
    listed = rows[~dense]
    nz_rows, nz_cols = np.nonzero(weights[listed])
    start = np.zeros(rows.size + 1, np.int64)
    start[1:] = np.cumsum(np.where(dense, 0, counts[rows]))
    return NodeRows(weights, rows, dense, start, nz_cols.astype(np.int64),
                    weights[listed][nz_rows, nz_cols].astype(np.float64))


# One row of the node sum, all nodes (_dense_row) or the listed ones (_listed_row).  The
# test of depth is made once per row so that the loop over nodes has no branch.
@numba.njit(cache=True, fastmath=FAST_MATH)
def _dense_row(w, a, a_sq, a_cross, b, b_cross, c, inv_c, deep):
    total = 0.0
    b_sq = b * b
    if deep:
        for i in range(w.size):
            total += w[i] * corner_deep(a[i], b, a_sq[i] + b_sq, inv_c, a_cross[i], b_cross)
    else:
        for i in range(w.size):
            total += w[i] * corner_sum(a[i], b, c, a_sq[i] + b_sq, inv_c, a_cross[i], b_cross)
    return total


@numba.njit(cache=True, fastmath=FAST_MATH)
def _listed_row(cols, values, a, a_sq, a_cross, b, b_cross, c, inv_c, deep):
    total = 0.0
    b_sq = b * b
    if deep:
        for m in range(cols.size):
            i = cols[m]
            total += values[m] * corner_deep(a[i], b, a_sq[i] + b_sq, inv_c, a_cross[i],
                                             b_cross)
    else:
        for m in range(cols.size):
            i = cols[m]
            total += values[m] * corner_sum(a[i], b, c, a_sq[i] + b_sq, inv_c, a_cross[i],
                                            b_cross)
    return total


@numba.njit(parallel=True, cache=True, fastmath=FAST_MATH)
def _node_kernel(points, x_nodes, y_nodes, node, depth_scale, second_term, n_chunks, out):
    # points are split in n_chunks blocks so the scratch rows are allocated once per block
    n_points = points.shape[0]
    n_chunks = max(1, min(n_points, n_chunks))
    nx = x_nodes.size
    for chunk in numba.prange(n_chunks):
        a = np.empty(nx)
        a_sq = np.empty(nx)
        a_cross = np.empty(nx)
        for p in range(chunk * n_points // n_chunks, (chunk + 1) * n_points // n_chunks):
            z, c, inv_c = depth_parts(points[p, 2], depth_scale)
            for i in range(nx):
                ai = x_nodes[i] - points[p, 0]
                a[i] = ai
                a_sq[i] = ai * ai + c * c
                a_cross[i] = second_term * cross_ratio(ai, z)
            deep = c >= DEEP
            total = 0.0
            for k in range(node.rows.size):
                b = y_nodes[node.rows[k]] - points[p, 1]
                b_cross = second_term * cross_ratio(b, z)
                if node.dense[k]:
                    total += _dense_row(node.weights[node.rows[k]], a, a_sq, a_cross, b,
                                        b_cross, c, inv_c, deep)
                else:
                    lo, hi = node.start[k], node.start[k + 1]
                    total += _listed_row(node.cols[lo:hi], node.values[lo:hi], a, a_sq,
                                         a_cross, b, b_cross, c, inv_c, deep)
            out[p] = INV_2PI * total


@numba.njit(parallel=True, cache=True)
def _cell_kernel(points, x_nodes, y_nodes, pressure, depth_scale, second_term, out):
    ny, nx = pressure.shape
    for p in numba.prange(points.shape[0]):
        px, py, z = points[p, 0], points[p, 1], points[p, 2]
        total = 0.0
        for j in range(ny):
            y1 = y_nodes[j] - py
            y2 = y_nodes[j + 1] - py
            for i in range(nx):
                q = pressure[j, i]
                if q == 0.0:
                    continue
                x1 = x_nodes[i] - px
                x2 = x_nodes[i + 1] - px
                total += q * shared_rectangle(x1, x2, y1, y2, z, depth_scale, second_term)
        out[p] = total


def _run_node_kernel(grid: LoadGrid, pts: np.ndarray, spec: KernelSpec, chunk: int,
                     node: NodeRows | None = None) -> np.ndarray:
    x_nodes, y_nodes = node_coordinates(grid)
    node = node_rows(node_weights(grid.pressure)) if node is None else node
    out = np.zeros(pts.shape[0])
    for start in range(0, pts.shape[0], chunk):
        part = pts[start:start + chunk]
        _node_kernel(part, x_nodes, y_nodes, node, spec.depth_scale, spec.second_term,
                     8 * numba.get_num_threads(), out[start:start + chunk])
    return out


def _run_cell_kernel(grid: LoadGrid, pts: np.ndarray, spec: KernelSpec, chunk: int) -> np.ndarray:
    x_nodes, y_nodes = node_coordinates(grid)
    out = np.zeros(pts.shape[0])
    for start in range(0, pts.shape[0], chunk):
        _cell_kernel(pts[start:start + chunk], x_nodes, y_nodes, grid.pressure,
                     spec.depth_scale, spec.second_term, out[start:start + chunk])
    return out


def vertical_stress(grid, points, method="boussinesq", poisson=None, *, chunk=None,
                    kernel="nodes", node: NodeRows | None = None) -> np.ndarray:
    """Vertical stress increase Δσz (kPa) at points below a loaded grid.

    Parameters
    ----------
    grid : LoadGrid
        Surface pressure per cell (kPa).
    points : array_like, shape (N, 3) or (3,)
        x (m, east), y (m, north), depth (m, >= 0 below the existing ground).
    method : {"boussinesq", "westergaard"}
        Stress distribution.
    poisson : float, optional
        Poisson's ratio for Westergaard, 0 <= ν < 0.5 (default 0); must be None for
        Boussinesq.
    chunk : int, optional
        Points handed to the compiled kernel per call (bounds the time between
        interrupts on huge runs); the result does not depend on it.
    kernel : {"nodes", "cells"}
        "nodes" (default, faster) or the plain per-cell loop; equal to round-off.
    node : NodeRows, optional
        ``node_rows(node_weights(grid.pressure))`` when already at hand (a caller that
        sums over one grid many times); computed here otherwise.

    Returns
    -------
    numpy.ndarray, shape (N,)
        Δσz in kPa.  At depth 0 the surface limit: q inside a cell, q/2 on an edge,
        q/4 at a corner, 0 outside.

    Examples
    --------
    >>> g = LoadGrid([[100.0]], x0=0.0, y0=0.0, dx=2.0, dy=2.0)
    >>> vertical_stress(g, [[0, 0, 2.0], [1, 1, 0.0], [1, 0, 0.0]]).round(2).tolist()
    [17.52, 100.0, 50.0]
    """
    grid = checked_grid(grid)
    pts = points_array(points)
    spec = resolve_method(method, poisson)
    step = points_per_chunk(chunk, "chunk", max(pts.shape[0], 1))
    if kernel == "nodes":
        return _run_node_kernel(grid, pts, spec, step, node)
    if kernel == "cells":
        return _run_cell_kernel(grid, pts, spec, step)
    raise InputError(f"must be 'nodes' or 'cells', got {kernel!r}", argument="kernel")
