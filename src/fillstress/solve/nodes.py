"""The node form of direct summation, and its numpy evaluation for small problems.

Summing p_c × (four signed corner terms) over cells regroups into a sum over grid nodes of
F(node) × w_node with ``w[j, i] = p[j-1, i-1] − p[j-1, i] − p[j, i-1] + p[j, i]`` (p
zero-padded): nodes inside a uniform fill have w = 0. The compiled kernels
(:mod:`.direct`) sum it in numba; :func:`numpy_node_sum` sums the same terms with numpy,
which for a handful of points answers before numba could even load its cached kernel
(``fillstress point``).
"""
from __future__ import annotations

import numpy as np

from ..grid import LoadGrid

#: Points × non-zero nodes held in memory at once by :func:`numpy_node_sum` (8 MB a term).
NUMPY_BLOCK = 1_000_000


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


def _cross_ratio(t: np.ndarray, z: np.ndarray) -> np.ndarray:
    # t·z/(t² + z²) as (t/h)(z/h), h = hypot(t, z): no underflow, and 0 where t = z = 0
    h = np.hypot(t, z)
    safe = np.where(h > 0.0, h, 1.0)
    return np.where(h > 0.0, (t / safe) * (z / safe), 0.0)


def corner_terms(a: np.ndarray, b: np.ndarray, z: np.ndarray, depth_scale: float,
                 second_term: float) -> np.ndarray:
    """2π·F(a, b, z) of the shared corner form, elementwise (see :mod:`fillstress.kernels`):
    ``atan2(a·b/R, c) + s·(b·ac(a) + a·ac(b))/R``, c = depth_scale·z, R = |(a, b, c)| by
    hypot, so tiny offsets neither underflow nor lose their quadrant; 0 where R = 0.

    Examples
    --------
    >>> round(float(corner_terms(np.array(1.0), np.array(1.0), np.array(1.0), 1.0, 1.0))
    ...       / (2 * np.pi), 4)                                  # Newmark m = n = 1
    0.1752
    """
    c = depth_scale * z
    r = np.hypot(np.hypot(a, b), c)
    safe = np.where(r > 0.0, r, 1.0)
    angle = np.arctan2(a * (b / safe), c)
    second = second_term * (b * _cross_ratio(a, z) + a * _cross_ratio(b, z)) / safe
    return np.where(r > 0.0, angle + second, 0.0)


def listed_nodes(grid: LoadGrid, weights: np.ndarray | None = None):
    """x, y (m) and weight of every node with a non-zero weight (`weights`: the grid's
    :func:`node_weights`, computed when not given).

    Examples
    --------
    >>> xn, yn, w = listed_nodes(LoadGrid([[2.0]], x0=0.0, y0=0.0, dx=1.0, dy=1.0))
    >>> xn.tolist(), yn.tolist(), w.tolist()
    ([0.0, 1.0, 0.0, 1.0], [0.0, 0.0, 1.0, 1.0], [2.0, -2.0, -2.0, 2.0])
    """
    weights = node_weights(grid.pressure) if weights is None else weights
    rows, cols = np.nonzero(weights)
    x_nodes, y_nodes = node_coordinates(grid)
    return x_nodes[cols], y_nodes[rows], weights[rows, cols]


def numpy_node_sum(grid: LoadGrid, points: np.ndarray, depth_scale: float,
                   second_term: float, *, listed=None) -> np.ndarray:
    """Δσz (kPa) at (N, 3) checked points by the node form in numpy (no compiled code).

    Equal to the compiled node kernel to round-off; meant for points × non-zero nodes up
    to about 10⁶ (the work is done in blocks of :data:`NUMPY_BLOCK` terms). `listed`: the
    grid's :func:`listed_nodes`, when already at hand.

    Examples
    --------
    >>> g = LoadGrid([[100.0]], x0=0.0, y0=0.0, dx=2.0, dy=2.0)
    >>> numpy_node_sum(g, np.array([[0, 0, 2.0], [1, 1, 0.0]]), 1.0, 1.0).round(2).tolist()
    [17.52, 100.0]
    """
    xn, yn, w = listed_nodes(grid) if listed is None else listed
    out = np.zeros(points.shape[0])
    step = max(1, NUMPY_BLOCK // max(w.size, 1))
    for start in range(0, points.shape[0], step):
        p = points[start:start + step]
        a = xn[None, :] - p[:, :1]
        b = yn[None, :] - p[:, 1:2]
        z = np.abs(p[:, 2:3])              # |−0.0| = +0.0: atan2 stays in the right half-plane
        out[start:start + p.shape[0]] = corner_terms(a, b, z, depth_scale, second_term) @ w
    return out / (2.0 * np.pi)
