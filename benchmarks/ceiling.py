"""The ceiling the direct summation is measured against (benchmarks only).

A plain dense numba kernel of the node form of direct summation: for every point and
every grid node, one corner term F(a, b) times the node weight, with no index arrays,
no skipping of zero weights, numba's own ``math.atan`` and ``fastmath=True``.  The
per-column parts of F are computed once per point, as in the package's kernel.  It is
correct only below the surface (depth > 0), which is all the benchmarks ask of it.
"""
from __future__ import annotations

import math

import numba
import numpy as np

INV_2PI = 1.0 / (2.0 * math.pi)


@numba.njit(parallel=True, fastmath=True, cache=True)
def dense_nodes(points, x_nodes, y_nodes, weights, depth_scale, second_term, out):
    """Δσz at points (depth > 0) from dense node weights (ny + 1, nx + 1)."""
    nx = x_nodes.size
    for p in numba.prange(points.shape[0]):
        z = points[p, 2]
        c = depth_scale * z
        inv_c = 1.0 / c
        a = x_nodes - points[p, 0]
        a_sq = a * a + c * c
        a_cross = second_term * a * z / (a * a + z * z)
        total = 0.0
        for j in range(y_nodes.size):
            b = y_nodes[j] - points[p, 1]
            b_sq = b * b
            b_cross = second_term * b * z / (b * b + z * z)
            for i in range(nx):
                inv_r = 1.0 / math.sqrt(a_sq[i] + b_sq)
                total += weights[j, i] * (math.atan(a[i] * b * inv_r * inv_c)
                                          + (b * a_cross[i] + a[i] * b_cross) * inv_r)
        out[p] = INV_2PI * total


@numba.njit(parallel=True, fastmath=True, cache=True)
def dense_nodes_angle_only(points, x_nodes, y_nodes, weights, depth_scale, out):
    """The same without the second term: the Westergaard form."""
    nx = x_nodes.size
    for p in numba.prange(points.shape[0]):
        c = depth_scale * points[p, 2]
        inv_c = 1.0 / c
        a = x_nodes - points[p, 0]
        a_sq = a * a + c * c
        total = 0.0
        for j in range(y_nodes.size):
            b = y_nodes[j] - points[p, 1]
            b_sq = b * b
            for i in range(nx):
                total += weights[j, i] * math.atan(a[i] * b * inv_c / math.sqrt(a_sq[i] + b_sq))
        out[p] = INV_2PI * total


def ceiling_stress(grid, points, spec) -> np.ndarray:
    """Run the ceiling kernel of `spec`'s form on a LoadGrid (points at depth > 0)."""
    from fillstress.solve.direct import node_coordinates, node_weights
    x_nodes, y_nodes = node_coordinates(grid)
    weights = node_weights(grid.pressure)
    out = np.empty(len(points))
    if spec.second_term:
        dense_nodes(points, x_nodes, y_nodes, weights, spec.depth_scale, spec.second_term, out)
    else:
        dense_nodes_angle_only(points, x_nodes, y_nodes, weights, spec.depth_scale, out)
    return out
