"""Stockpiles: side slopes at the angle of repose rising from a toe outline.

The pile surface is ``h = min(cap, tan(angle) × d)`` where ``d`` is the plan distance
from the point to the nearest toe boundary (exterior ring and holes). Every side then
slopes at the repose angle normal to its toe line, which gives a cone on a circular
toe, a hipped ridge on a long toe, a flat top where the cap is reached, and a pile
ring around a hole. The distance is the nearest of the boundary segments (a numpy loop
over them, or a shapely STRtree query for outlines of very many); the cell averages come from
:func:`~fillstress.shapes.coverage.cell_average`.
"""
from __future__ import annotations

import math

import numpy as np
import shapely

from .._validate import finite, positive
from ..errors import InputError
from ..grid import GridSpec
from .coverage import cell_average, check_polygonal


def boundary_segments(geometry) -> np.ndarray:
    """The straight boundary segments (exterior and holes) of a (multi)polygon, as LineStrings.

    Examples
    --------
    >>> import shapely
    >>> len(boundary_segments(shapely.box(0, 0, 1, 1)))
    4
    """
    rings = shapely.get_parts(shapely.get_rings(shapely.get_parts(geometry)))
    segs = []
    for ring in rings:
        xy = shapely.get_coordinates(ring)
        segs.append(np.stack([xy[:-1], xy[1:]], axis=1))
    return shapely.linestrings(np.concatenate(segs))


#: Up to this many boundary segments the distance loops over them in numpy (N × S work,
#: about 30× faster than the tree on a pile of 28 segments); more use the STRtree.
LOOP_SEGMENTS = 512


def distance_to_boundary(geometry):
    """A function ``d(x, y)``: plan distance (m) to the nearest boundary of `geometry`.

    Examples
    --------
    >>> import shapely
    >>> d = distance_to_boundary(shapely.box(0, 0, 10, 4))
    >>> d(np.array([5.0, 1.0]), np.array([2.0, 3.0])).tolist()
    [2.0, 1.0]
    """
    segments = boundary_segments(geometry)
    if len(segments) > LOOP_SEGMENTS:
        return _tree_distance(segments)
    ends = shapely.get_coordinates(segments).reshape(-1, 2, 2)
    start, along = ends[:, 0], ends[:, 1] - ends[:, 0]

    def distance(x, y):
        x, y = np.broadcast_arrays(np.asarray(x, dtype=float), np.asarray(y, dtype=float))
        return np.sqrt(nearest_on_segments(start, along, x, y))

    return distance


def nearest_on_segments(start, along, x, y, *, where: bool = False):
    """Squared plan distance from points (x, y) to the nearest of the segments
    ``start + t·along`` (0 ≤ t ≤ 1), looping over the segments in numpy (N × S work);
    with `where` also the first nearest segment's index and t on it (as a line's
    projection takes the first of equally near segments).

    Examples
    --------
    >>> start, along = np.array([[0.0, 0.0], [4.0, 0.0]]), np.array([[4.0, 0.0], [0.0, 3.0]])
    >>> d_sq, k, t = nearest_on_segments(start, along, np.array([5.0]), np.array([2.0]), where=True)
    >>> d_sq.tolist(), k.tolist(), t.round(6).tolist()
    ([1.0], [1], [0.666667])
    """
    # a zero-length segment gives t = 0: the distance to its point
    length_sq = np.maximum((along ** 2).sum(axis=1), np.finfo(float).tiny)
    best = np.full(x.shape, np.inf)
    seg, at = (np.zeros(x.shape, np.int64), np.zeros(x.shape)) if where else (None, None)
    for k, ((ax, ay), (dx, dy), l_sq) in enumerate(zip(start, along, length_sq)):
        rx, ry = x - ax, y - ay
        t = np.clip((rx * dx + ry * dy) / l_sq, 0.0, 1.0)   # nearest point on the segment
        d_sq = (rx - t * dx) ** 2 + (ry - t * dy) ** 2
        if where:
            closer = d_sq < best
            seg[closer], at[closer] = k, t[closer]
        np.minimum(best, d_sq, out=best)
    return (best, seg, at) if where else best


def _tree_distance(segments):
    """``d(x, y)`` by the nearest-segment query of a shapely STRtree (many segments)."""
    tree = shapely.STRtree(segments)

    def distance(x, y):
        x = np.asarray(x, dtype=float)
        pts = shapely.points(x.ravel(), np.asarray(y, dtype=float).ravel())
        (_, _), dist = tree.query_nearest(pts, return_distance=True, all_matches=False)
        return dist.reshape(x.shape)

    return distance


def pile_thickness(toe, repose_angle_deg: float, spec: GridSpec, *,
                   crest_height: float | None = None, samples: int = 4) -> np.ndarray:
    """Cell-average thickness (m) of a stockpile on a toe polygon.

    Parameters
    ----------
    toe : shapely.Polygon or shapely.MultiPolygon
        Toe outline in site coordinates (m); holes are left empty with slopes around them.
    repose_angle_deg : float
        Side slope angle from horizontal, degrees, 0 < angle < 90.
    spec : GridSpec
        The analysis lattice.
    crest_height : float, optional
        Height cap (m): the pile is flat-topped where it would rise higher.
    samples : int
        Sub-samples per cell side (see :func:`~fillstress.shapes.coverage.cell_average`).

    Returns
    -------
    numpy.ndarray, shape ``spec.shape``
        Cell-average pile thickness, m (row 0 south).

    Examples
    --------
    A 45° pile on a 4 m square toe is a pyramid 2 m high: volume 16 × 2 / 3.

    >>> import shapely
    >>> spec = GridSpec(0.0, 0.0, 0.5, 0.5, 8, 8)
    >>> t = pile_thickness(shapely.box(0, 0, 4, 4), 45.0, spec, samples=8)
    >>> round(float(t.sum() * spec.cell_area), 2)
    10.67
    """
    check_polygonal(toe, "toe")
    angle = finite(repose_angle_deg, "repose_angle_deg")
    if not 0.0 < angle < 90.0:
        raise InputError(f"must be between 0 and 90 degrees, got {repose_angle_deg!r}",
                         argument="repose_angle_deg")
    cap = math.inf if crest_height is None else positive(crest_height, "crest_height")
    slope = math.tan(math.radians(angle))
    distance = distance_to_boundary(toe)

    def height(x, y):
        return np.minimum(cap, slope * distance(x, y))

    return cell_average(toe, height, spec, samples=samples, argument="toe")
