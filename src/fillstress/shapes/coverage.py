"""Exact cell coverage of polygons and cell averages of heights over polygon ∩ cell.

Every builder in :mod:`fillstress.shapes` returns a *cell-average* thickness: the volume
of fill inside a cell divided by the whole cell area, so ``thickness.sum() * cell_area``
is the fill volume. This module does the geometry for that.

Method
------
Only the cells inside the polygon's bounding box are looked at (the candidate cells),
and of those only the cells near a boundary segment are tested against the boundary.
A candidate cell is either

* cut by the polygon boundary (an *edge cell*): it is clipped to the polygon with
  shapely (exact area), the clipped piece is split into triangles by a constrained
  Delaunay triangulation, each triangle is split uniformly into ``samples²``
  sub-triangles and the height is taken at each sub-triangle centroid (a composite
  centroid rule, exact for constant and for linear heights over each sub-triangle); or
* not cut: then it is wholly inside (centre inside the polygon) or wholly outside.
  Inside cells use a ``samples × samples`` midpoint rule.

So the *area* (and the volume of a constant-height footprint) is exact to rounding,
whatever the cell size; varying heights converge as O(cell²) where they are smooth.
For a height that is linear on known triangles (a TIN), :func:`tin_cell_average`
is exact.
"""
from __future__ import annotations

from typing import Callable

import numpy as np
import shapely

from .._validate import whole_number
from ..errors import InputError
from ..grid import GridSpec

HeightFunction = Callable[[np.ndarray, np.ndarray], np.ndarray]

_MAX_SAMPLES = 16


# --- argument checks -----------------------------------------------------------------
def check_spec(spec, argument: str = "spec") -> GridSpec:
    """Refuse anything that is not a :class:`~fillstress.grid.GridSpec`."""
    if not isinstance(spec, GridSpec):
        raise InputError(f"must be a GridSpec, got {type(spec).__name__}", argument=argument)
    return spec


def check_samples(samples, argument: str = "samples") -> int:
    """Sub-samples per cell side: an integer 1…16."""
    return whole_number(samples, argument, minimum=1, maximum=_MAX_SAMPLES,
                        meaning=f"an integer from 1 to {_MAX_SAMPLES}")


def check_polygonal(geometry, argument: str = "geometry"):
    """Return `geometry` if it is a valid, non-empty Polygon or MultiPolygon."""
    if not isinstance(geometry, (shapely.Polygon, shapely.MultiPolygon)):
        raise InputError(f"must be a shapely Polygon or MultiPolygon, got "
                         f"{type(geometry).__name__}", argument=argument)
    if geometry.is_empty:
        raise InputError("is empty", argument=argument)
    if not shapely.is_valid(geometry):
        raise InputError(f"is not a valid polygon ({shapely.is_valid_reason(geometry)})",
                         argument=argument)
    if geometry.area <= 0:
        raise InputError("has zero area", argument=argument)
    if not np.all(np.isfinite(shapely.get_coordinates(geometry))):
        raise InputError("has NaN or infinite coordinates", argument=argument)
    return geometry


def check_within_grid(bounds, spec: GridSpec, argument: str) -> None:
    """Refuse a body that reaches outside the analysis grid (its load would be lost)."""
    xmin, ymin, xmax, ymax = bounds
    gx0, gy0, gx1, gy1 = spec.extent
    # a body's region is a slightly generous polygon (a sloped toe's rounded corners, by
    # segments): a thousandth of a cell past the edge carries no load worth refusing for
    tol = max(1e-9 * max(abs(gx0), abs(gx1), abs(gy0), abs(gy1)), 1e-3 * min(spec.dx, spec.dy))
    if xmin < gx0 - tol or ymin < gy0 - tol or xmax > gx1 + tol or ymax > gy1 + tol:
        raise InputError(
            f"reaches outside the analysis grid: body bounds ({xmin:.3f}, {ymin:.3f}, "
            f"{xmax:.3f}, {ymax:.3f}) m, grid extent ({gx0:.3f}, {gy0:.3f}, {gx1:.3f}, "
            f"{gy1:.3f}) m; enlarge the grid", argument=argument)


# --- lattice helpers -----------------------------------------------------------------
def grid_window(bounds, spec: GridSpec) -> tuple[int, int, int, int]:
    """Index range ``(j0, j1, i0, i1)`` (end exclusive) of the cells meeting `bounds`.

    Examples
    --------
    >>> spec = GridSpec(0.0, 0.0, 1.0, 1.0, 10, 10)
    >>> grid_window((2.5, 0.0, 4.0, 1.5), spec)
    (0, 2, 2, 4)
    """
    xmin, ymin, xmax, ymax = bounds
    i0 = int(np.clip(np.floor((xmin - spec.x0) / spec.dx), 0, spec.nx))
    i1 = int(np.clip(np.ceil((xmax - spec.x0) / spec.dx), 0, spec.nx))
    j0 = int(np.clip(np.floor((ymin - spec.y0) / spec.dy), 0, spec.ny))
    j1 = int(np.clip(np.ceil((ymax - spec.y0) / spec.dy), 0, spec.ny))
    return j0, j1, i0, i1


def cells_meeting_boxes(boxes, spec: GridSpec, margin: int = 1) -> np.ndarray:
    """Mask (shape ``spec.shape``) of the cells within `margin` cells of any of the
    `boxes`, rows ``(xmin, ymin, xmax, ymax)`` (m); the margin keeps a point that
    rounding moves across a box edge among the cells found.

    Each box marks where its column range starts and ends on every row it spans; a
    running sum along each row counts the boxes over every cell.

    Examples
    --------
    >>> spec = GridSpec(0.0, 0.0, 1.0, 1.0, 6, 3)
    >>> cells_meeting_boxes([(2.2, 0.5, 2.8, 0.6)], spec, margin=0).astype(int).tolist()
    [[0, 0, 1, 0, 0, 0], [0, 0, 0, 0, 0, 0], [0, 0, 0, 0, 0, 0]]
    """
    b = np.asarray(boxes, dtype=float).reshape(-1, 4)

    def index_range(low, high, origin, step, n):
        first = np.floor((low - origin) / step) - margin
        last = np.floor((high - origin) / step) + margin + 1
        return np.clip(first, 0, n).astype(int), np.clip(last, 0, n).astype(int)

    i0, i1 = index_range(b[:, 0], b[:, 2], spec.x0, spec.dx, spec.nx)
    j0, j1 = index_range(b[:, 1], b[:, 3], spec.y0, spec.dy, spec.ny)
    some = np.flatnonzero((i0 < i1) & (j0 < j1))
    rows = j1[some] - j0[some]
    box = np.repeat(some, rows)
    row = j0[box] + np.arange(rows.sum()) - np.repeat(np.cumsum(rows) - rows, rows)
    marks = np.zeros((spec.ny, spec.nx + 1), np.int32)
    np.add.at(marks, (row, i0[box]), 1)
    np.add.at(marks, (row, i1[box]), -1)
    count = np.cumsum(marks, axis=1, dtype=np.int32)
    return count[:, :spec.nx] > 0


def _window_cells(spec: GridSpec, window):
    """Flattened row/column indices of the cells in `window`."""
    j0, j1, i0, i1 = window
    jj, ii = np.meshgrid(np.arange(j0, j1), np.arange(i0, i1), indexing="ij")
    return jj.ravel(), ii.ravel()


def _cell_boxes(spec: GridSpec, jj: np.ndarray, ii: np.ndarray):
    x0 = spec.x0 + ii * spec.dx
    y0 = spec.y0 + jj * spec.dy
    return shapely.box(x0, y0, x0 + spec.dx, y0 + spec.dy)


def _segment_boxes(boundary, length: float) -> np.ndarray:
    """(xmin, ymin, xmax, ymax) of the pieces, at most `length` long, of every segment of
    a polygon boundary's rings (a long diagonal segment's own box would span many cells
    it does not meet)."""
    rings = shapely.get_parts(shapely.segmentize(boundary, length))
    xy, ring = shapely.get_coordinates(rings, return_index=True)
    same = ring[1:] == ring[:-1]                       # no segment joins two rings
    a, b = xy[:-1][same], xy[1:][same]
    return np.column_stack([np.minimum(a, b), np.maximum(a, b)])


def _classify(geometry, spec: GridSpec):
    """Split the candidate cells into edge cells and wholly-inside cells.

    Only cells within a cell of a boundary segment's bounding box can be cut by the
    boundary; they alone get shapely boxes and the exact test. Any other cell is wholly
    inside or wholly outside, as its centre is: a long diagonal or curved footprint so
    skips most of its bounding box."""
    jj, ii = _window_cells(spec, grid_window(geometry.bounds, spec))
    boundary = geometry.boundary
    pieces = _segment_boxes(boundary, 2.0 * min(spec.dx, spec.dy))
    near = cells_meeting_boxes(pieces, spec, margin=1)[jj, ii]
    cx = spec.x0 + (ii + 0.5) * spec.dx
    cy = spec.y0 + (jj + 0.5) * spec.dy
    centre_inside = shapely.contains_xy(geometry, cx, cy)
    keep = near | centre_inside
    jj, ii, near, centre_inside = jj[keep], ii[keep], near[keep], centre_inside[keep]
    boxes = np.full(jj.size, None, dtype=object)
    boxes[near] = _cell_boxes(spec, jj[near], ii[near])
    shapely.prepare(boundary)
    edge = np.zeros(jj.size, bool)
    edge[near] = shapely.intersects(boxes[near], boundary)
    inside = ~edge & centre_inside
    return jj, ii, boxes, edge, inside


def _polygon_pieces(boxes, geometry):
    """Polygonal parts of ``box ∩ geometry`` and the index of the box each came from."""
    pieces = shapely.intersection(boxes, geometry)
    parts, owner = shapely.get_parts(pieces, return_index=True)
    keep = (shapely.get_type_id(parts) == 3) & (shapely.area(parts) > 0)
    return parts[keep], owner[keep]


# --- public functions ----------------------------------------------------------------
def coverage_fraction(geometry, spec: GridSpec, *, argument: str = "geometry") -> np.ndarray:
    """Fraction of each cell's area covered by a (multi)polygon, holes respected.

    Parameters
    ----------
    geometry : shapely.Polygon or shapely.MultiPolygon
        Footprint in site coordinates (m); must lie inside the grid.
    spec : GridSpec
        The analysis lattice.
    argument : str
        Name used in error messages.

    Returns
    -------
    numpy.ndarray, shape ``spec.shape``
        ``area(geometry ∩ cell) / cell area`` in [0, 1]; exact to rounding.

    Examples
    --------
    >>> import shapely
    >>> spec = GridSpec(0.0, 0.0, 1.0, 1.0, 3, 2)
    >>> coverage_fraction(shapely.box(0.5, 0.0, 2.0, 1.0), spec).tolist()
    [[0.5, 1.0, 0.0], [0.0, 0.0, 0.0]]
    """
    check_spec(spec)
    check_polygonal(geometry, argument)
    check_within_grid(geometry.bounds, spec, argument)
    jj, ii, boxes, edge, inside = _classify(geometry, spec)
    out = spec.zeros()
    out[jj[inside], ii[inside]] = 1.0
    pieces = shapely.intersection(boxes[edge], geometry)
    out[jj[edge], ii[edge]] = shapely.area(pieces) / spec.cell_area
    return np.clip(out, 0.0, 1.0)


def _subtriangle_weights(samples: int) -> np.ndarray:
    """Barycentric (u, v) of the centroids of the samples² equal sub-triangles."""
    n = samples
    up = [((i + 1 / 3) / n, (j + 1 / 3) / n) for i in range(n) for j in range(n - i)]
    down = [((i + 2 / 3) / n, (j + 2 / 3) / n) for i in range(n) for j in range(n - 1 - i)]
    return np.array(up + down)


def _call_height(height: HeightFunction, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    z = np.asarray(height(x, y), dtype=float)
    if z.shape != x.shape:
        raise InputError(f"must return an array of the input shape {x.shape}, got {z.shape}",
                         argument="height")
    if not np.all(np.isfinite(z)):
        raise InputError("returned NaN or infinite heights inside the footprint",
                         argument="height")
    return z


_CHUNK_POINTS = 1 << 20  # sample points evaluated at once (bounds memory)


def _inside_cell_means(height, spec, jj, ii, samples):
    offs = (np.arange(samples) + 0.5) / samples
    ox, oy = np.meshgrid(offs * spec.dx, offs * spec.dy, indexing="xy")
    ox, oy = ox.ravel()[None, :], oy.ravel()[None, :]
    means = np.empty(len(jj))
    step = max(1, _CHUNK_POINTS // samples**2)
    for k in range(0, len(jj), step):
        x = (spec.x0 + ii[k:k + step] * spec.dx)[:, None] + ox
        y = (spec.y0 + jj[k:k + step] * spec.dy)[:, None] + oy
        means[k:k + step] = _call_height(height, x, y).mean(axis=1)
    return means


def _edge_cell_integrals(height, geometry, boxes, samples):
    """∫ h dA over each box ∩ geometry, by the composite centroid rule on triangles."""
    parts, owner = _polygon_pieces(boxes, geometry)
    tris = shapely.constrained_delaunay_triangles(parts)
    tri_parts, tri_owner = shapely.get_parts(tris, return_index=True)
    cells = owner[tri_owner]
    xy = shapely.get_coordinates(tri_parts).reshape(-1, 4, 2)[:, :3, :]
    a, b, c = xy[:, 0], xy[:, 1], xy[:, 2]
    area = 0.5 * np.abs((b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1])
                        - (c[:, 0] - a[:, 0]) * (b[:, 1] - a[:, 1]))
    uv = _subtriangle_weights(samples)
    px = a[:, None, 0] + uv[None, :, 0] * (b - a)[:, None, 0] + uv[None, :, 1] * (c - a)[:, None, 0]
    py = a[:, None, 1] + uv[None, :, 0] * (b - a)[:, None, 1] + uv[None, :, 1] * (c - a)[:, None, 1]
    per_triangle = _call_height(height, px, py).mean(axis=1) * area
    sums = np.zeros(len(boxes))
    np.add.at(sums, cells, per_triangle)
    return sums


def cell_average(geometry, height: HeightFunction, spec: GridSpec, *, samples: int = 4,
                 argument: str = "geometry") -> np.ndarray:
    """Cell-average of a height field over ``geometry ∩ cell`` (zero outside `geometry`).

    Parameters
    ----------
    geometry : shapely.Polygon or shapely.MultiPolygon
        Where the height applies (m); must lie inside the grid.
    height : callable
        ``height(x, y) -> z`` on numpy arrays of any shape, in metres; must be finite
        inside `geometry`.
    spec : GridSpec
        The analysis lattice.
    samples : int
        Sub-samples per cell side (inside cells) and per triangle side (edge cells).
    argument : str
        Name used in error messages.

    Returns
    -------
    numpy.ndarray, shape ``spec.shape``
        ``∫ h dA over geometry ∩ cell`` divided by the whole cell area (m).

    Examples
    --------
    A plane z = x over the square 0…2 × 0…1 averages to the cell-centre x:

    >>> import shapely
    >>> spec = GridSpec(0.0, 0.0, 1.0, 1.0, 2, 1)
    >>> cell_average(shapely.box(0, 0, 2, 1), lambda x, y: x, spec).round(12).tolist()
    [[0.5, 1.5]]
    """
    check_spec(spec)
    check_polygonal(geometry, argument)
    check_within_grid(geometry.bounds, spec, argument)
    if not callable(height):
        raise InputError("must be a callable height(x, y)", argument="height")
    samples = check_samples(samples)
    jj, ii, boxes, edge, inside = _classify(geometry, spec)
    out = spec.zeros()
    if inside.any():
        out[jj[inside], ii[inside]] = _inside_cell_means(height, spec, jj[inside], ii[inside],
                                                         samples)
    if edge.any():
        integrals = _edge_cell_integrals(height, geometry, boxes[edge], samples)
        out[jj[edge], ii[edge]] = integrals / spec.cell_area
    return out


def tin_cell_average(triangles, spec: GridSpec, *, argument: str = "triangles") -> np.ndarray:
    """Exact cell-average of a function that is linear on each of the given triangles.

    For every triangle and cell it meets, ``∫ z dA = area(tri ∩ cell) · z(centroid)``
    because z is linear on the piece; the sum over triangles is divided by the cell area.
    Zero outside the triangles.

    Parameters
    ----------
    triangles : array_like, shape (T, 3, 3)
        Vertices ``(x, y, z)`` of non-overlapping triangles (m); degenerate ones are skipped.
    spec : GridSpec
        The analysis lattice; the triangles must lie inside it.
    argument : str
        Name used in error messages.

    Returns
    -------
    numpy.ndarray, shape ``spec.shape``

    Examples
    --------
    Half of a 1 m cell under a triangle rising from 0 to 3 m: volume 1/2 · mean z.

    >>> spec = GridSpec(0.0, 0.0, 1.0, 1.0, 1, 1)
    >>> tin_cell_average([[(0, 0, 0), (1, 0, 3), (0, 1, 0)]], spec).tolist()
    [[0.5]]
    """
    check_spec(spec)
    tri = np.asarray(triangles, dtype=float)
    if tri.ndim != 3 or tri.shape[1:] != (3, 3):
        raise InputError(f"must have shape (T, 3, 3), got {tri.shape}", argument=argument)
    if not np.all(np.isfinite(tri)):
        raise InputError("contains NaN or infinite coordinates", argument=argument)
    out = spec.zeros()
    if len(tri) == 0:
        return out
    lo, hi = tri[:, :, :2].min(axis=1), tri[:, :, :2].max(axis=1)
    check_within_grid((lo[:, 0].min(), lo[:, 1].min(), hi[:, 0].max(), hi[:, 1].max()),
                      spec, argument)
    plane, ok = _planes(tri)
    tri, plane, lo, hi = tri[ok], plane[ok], lo[ok], hi[ok]
    t_idx, jj, ii = _triangle_cell_pairs(lo, hi, spec)
    polys = shapely.polygons(np.concatenate([tri[:, :, :2], tri[:, :1, :2]], axis=1))
    x0 = spec.x0 + ii * spec.dx
    y0 = spec.y0 + jj * spec.dy
    pieces = shapely.intersection(polys[t_idx], shapely.box(x0, y0, x0 + spec.dx, y0 + spec.dy))
    area = shapely.area(pieces)
    hit = area > 0
    cxy = shapely.get_coordinates(shapely.centroid(pieces[hit]))
    p = plane[t_idx[hit]]
    z = p[:, 0] + p[:, 1] * cxy[:, 0] + p[:, 2] * cxy[:, 1]
    np.add.at(out, (jj[hit], ii[hit]), z * area[hit] / spec.cell_area)
    return out


def _planes(tri: np.ndarray):
    """Coefficients (a, b, c) of z = a + b·x + c·y per triangle, and a non-degenerate mask."""
    d1 = tri[:, 1] - tri[:, 0]
    d2 = tri[:, 2] - tri[:, 0]
    det = d1[:, 0] * d2[:, 1] - d2[:, 0] * d1[:, 1]
    scale = np.maximum(np.abs(d1[:, :2]).max(axis=1), np.abs(d2[:, :2]).max(axis=1))
    ok = np.abs(det) > 1e-12 * np.maximum(scale, 1e-300) ** 2
    det = np.where(ok, det, 1.0)
    b = (d1[:, 2] * d2[:, 1] - d2[:, 2] * d1[:, 1]) / det
    c = (d2[:, 2] * d1[:, 0] - d1[:, 2] * d2[:, 0]) / det
    a = tri[:, 0, 2] - b * tri[:, 0, 0] - c * tri[:, 0, 1]
    return np.stack([a, b, c], axis=1), ok


def _triangle_cell_pairs(lo, hi, spec):
    """(triangle, row, column) for every cell inside each triangle's bounding box."""
    i0 = np.clip(np.floor((lo[:, 0] - spec.x0) / spec.dx), 0, spec.nx - 1).astype(int)
    i1 = np.clip(np.ceil((hi[:, 0] - spec.x0) / spec.dx), i0 + 1, spec.nx).astype(int)
    j0 = np.clip(np.floor((lo[:, 1] - spec.y0) / spec.dy), 0, spec.ny - 1).astype(int)
    j1 = np.clip(np.ceil((hi[:, 1] - spec.y0) / spec.dy), j0 + 1, spec.ny).astype(int)
    ni, nj = i1 - i0, j1 - j0
    count = ni * nj
    t_idx = np.repeat(np.arange(len(lo)), count)
    local = np.arange(count.sum()) - np.repeat(np.cumsum(count) - count, count)
    jj = j0[t_idx] + local // ni[t_idx]
    ii = i0[t_idx] + local % ni[t_idx]
    return t_idx, jj, ii
