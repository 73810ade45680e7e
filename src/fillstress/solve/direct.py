"""Δσz at arbitrary points by direct summation over every loaded cell.

Two numba kernels, both parallel over points and both exact to round-off:

* the node-weight kernel (default).  Summing p_c × (four signed corner terms) over
  cells regroups into a sum over grid nodes of F(node) × w_node with
  ``w[j, i] = p[j-1, i-1] − p[j-1, i] − p[j, i-1] + p[j, i]`` (p zero-padded).  Nodes
  inside a uniform fill have w = 0 and are skipped, and every node costs one corner
  evaluation instead of four per cell.  The per-column and per-row parts of the
  corner form are computed once per point.
* the per-cell kernel: a straightforward loop over cells with the four-corner
  rectangle formula; kept as a second, simpler fast path and compared in tests.
"""
from __future__ import annotations

import numba
import numpy as np

from .._validate import points_array
from ..errors import InputError
from ..grid import LoadGrid
from ..kernels import KernelSpec, resolve_method
from ..kernels.corner import (INV_2PI, corner_sum, cross_ratio, inverse_depth,
                              shared_rectangle)
from ._checks import checked_grid, points_per_chunk


def node_weights(pressure: np.ndarray) -> np.ndarray:
    """Node weights ``w[j, i] = p[j-1,i-1] − p[j-1,i] − p[j,i-1] + p[j,i]`` (p zero-padded).

    Shape (ny + 1, nx + 1); node (j, i) sits at x0 + i·dx, y0 + j·dy.

    Examples
    --------
    >>> node_weights(np.array([[2.0, 2.0]])).tolist()
    [[2.0, 0.0, -2.0], [-2.0, 0.0, 2.0]]
    """
    padded = np.zeros((pressure.shape[0] + 2, pressure.shape[1] + 2))
    padded[1:-1, 1:-1] = pressure
    return padded[:-1, :-1] - padded[:-1, 1:] - padded[1:, :-1] + padded[1:, 1:]


def _sparse_rows(weights: np.ndarray):
    """Compressed rows of the non-zero node weights: (rows, row_start, cols, values)."""
    rows = np.flatnonzero(np.any(weights != 0.0, axis=1)).astype(np.int64)
    cols, values, row_start = [], [], [0]
    for j in rows:
        nz = np.flatnonzero(weights[j] != 0.0)
        cols.append(nz)
        values.append(weights[j, nz])
        row_start.append(row_start[-1] + nz.size)
    cat = (lambda parts, dt: np.concatenate(parts).astype(dt) if parts else np.zeros(0, dt))
    return rows, np.asarray(row_start, np.int64), cat(cols, np.int64), cat(values, np.float64)


@numba.njit(parallel=True, cache=True)
def _node_kernel(points, x_nodes, y_nodes, rows, row_start, cols, values,
                 depth_scale, second_term, n_chunks, out):
    # points are split in n_chunks blocks so the scratch rows are allocated once per block
    n_points = points.shape[0]
    n_chunks = max(1, min(n_points, n_chunks))
    for chunk in numba.prange(n_chunks):
        a = np.empty(x_nodes.size)
        a_sq = np.empty(x_nodes.size)
        a_cross = np.empty(x_nodes.size)
        for p in range(chunk * n_points // n_chunks, (chunk + 1) * n_points // n_chunks):
            z = abs(points[p, 2])
            c = depth_scale * z
            inv_c = inverse_depth(c)
            for i in range(x_nodes.size):
                ai = x_nodes[i] - points[p, 0]
                a[i] = ai
                a_sq[i] = ai * ai + c * c
                a_cross[i] = second_term * cross_ratio(ai, z)
            total = 0.0
            for k in range(rows.size):
                b = y_nodes[rows[k]] - points[p, 1]
                b_sq = b * b
                b_cross = second_term * cross_ratio(b, z)
                for m in range(row_start[k], row_start[k + 1]):
                    i = cols[m]
                    total += values[m] * corner_sum(a[i], b, c, a_sq[i] + b_sq, inv_c,
                                                    a_cross[i], b_cross)
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


def node_coordinates(grid: LoadGrid) -> tuple[np.ndarray, np.ndarray]:
    """x of the nx+1 node columns and y of the ny+1 node rows of `grid` (m).

    Examples
    --------
    >>> xs, ys = node_coordinates(LoadGrid([[1.0, 1.0]], x0=5.0, y0=0.0, dx=0.5, dy=2.0))
    >>> xs.tolist(), ys.tolist()
    ([5.0, 5.5, 6.0], [0.0, 2.0])
    """
    return (grid.x0 + np.arange(grid.nx + 1) * grid.dx,
            grid.y0 + np.arange(grid.ny + 1) * grid.dy)


def _run_node_kernel(grid: LoadGrid, pts: np.ndarray, spec: KernelSpec, chunk: int) -> np.ndarray:
    x_nodes, y_nodes = node_coordinates(grid)
    sparse = _sparse_rows(node_weights(grid.pressure))
    out = np.zeros(pts.shape[0])
    for start in range(0, pts.shape[0], chunk):
        part = pts[start:start + chunk]
        _node_kernel(part, x_nodes, y_nodes, *sparse, spec.depth_scale, spec.second_term,
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
                    kernel="nodes") -> np.ndarray:
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
        return _run_node_kernel(grid, pts, spec, step)
    if kernel == "cells":
        return _run_cell_kernel(grid, pts, spec, step)
    raise InputError(f"must be 'nodes' or 'cells', got {kernel!r}", argument="kernel")
