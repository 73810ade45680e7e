"""Footprint fills: a polygon with a flat top, or a sloping top from vertex heights.

Heights here are fill *thickness* above the existing ground (m), not elevations.
A sloping top is defined by a z value on every polygon vertex (3D polygon): the
polygon is split by a constrained Delaunay triangulation (GEOS, via shapely 2; it keeps
every triangle inside the polygon and adds no vertices), the thickness is linear on each
triangle, and the cell averages are exact (:func:`~fillstress.shapes.coverage.tin_cell_average`).
"""
from __future__ import annotations


import numpy as np
import shapely

from .._validate import finite
from ..errors import InputError
from ..grid import GridSpec
from .coverage import check_polygonal, check_spec, coverage_fraction, tin_cell_average


#: Attribute names tried, in order, when no height field is named.


def footprint_thickness(geometry, height: float, spec: GridSpec) -> np.ndarray:
    """Cell-average thickness (m) of a flat-topped fill on a (multi)polygon footprint.

    Parameters
    ----------
    geometry : shapely.Polygon or shapely.MultiPolygon
        Footprint in site coordinates (m), holes allowed; inside the grid.
    height : float
        Fill thickness (m), >= 0.
    spec : GridSpec
        The analysis lattice.

    Returns
    -------
    numpy.ndarray, shape ``spec.shape``
        ``height × coverage``; ``sum × cell area`` = ``height × area`` exactly.

    Examples
    --------
    >>> import shapely
    >>> spec = GridSpec(0.0, 0.0, 1.0, 1.0, 4, 4)
    >>> t = footprint_thickness(shapely.box(0.5, 0.5, 3.5, 2.5), 2.0, spec)
    >>> float(t.sum() * spec.cell_area), float(t[1, 1]), float(t[0, 0])
    (12.0, 2.0, 0.5)
    """
    h = finite(height, "height")
    if h < 0:
        raise InputError(f"must be >= 0 m, got {height!r}", argument="height")
    return h * coverage_fraction(geometry, spec)


def footprint_triangles(geometry, *, argument: str = "geometry") -> np.ndarray:
    """Constrained triangulation of a 3D polygon: an array (T, 3, 3) of x, y, z.

    Every vertex (exterior and holes) must carry a finite z >= 0 (thickness, m).

    Examples
    --------
    >>> import shapely
    >>> sq = shapely.Polygon([(0, 0, 0), (2, 0, 2), (2, 2, 2), (0, 2, 0)])
    >>> footprint_triangles(sq).shape
    (2, 3, 3)
    """
    check_polygonal(geometry, argument)
    if not geometry.has_z:
        raise InputError("needs a z value (fill thickness, m) on every vertex for a "
                         "sloping top", argument=argument)
    z = shapely.get_coordinates(geometry, include_z=True)[:, 2]
    if not np.all(np.isfinite(z)):
        raise InputError("has vertices without a finite z value", argument=argument)
    if np.any(z < 0):
        raise InputError(f"vertex thickness must be >= 0 m, got minimum {z.min():g}",
                         argument=argument)
    parts = shapely.get_parts(shapely.constrained_delaunay_triangles(geometry))
    tri = shapely.get_coordinates(parts, include_z=True).reshape(-1, 4, 3)[:, :3, :]
    if not np.all(np.isfinite(tri)) or not np.isclose(shapely.area(parts).sum(),
                                                       geometry.area, rtol=1e-9):
        raise InputError("could not be triangulated inside its outline", argument=argument)
    return tri


def sloping_footprint_thickness(geometry, spec: GridSpec) -> np.ndarray:
    """Cell-average thickness (m) of a fill whose top is linear between vertex heights.

    Parameters
    ----------
    geometry : shapely.Polygon or shapely.MultiPolygon with z
        Footprint whose vertex z values are the fill thickness (m) there.
    spec : GridSpec
        The analysis lattice.

    Returns
    -------
    numpy.ndarray, shape ``spec.shape``
        Cell-average fill thickness, m (row 0 south).

    Examples
    --------
    A wedge 2 m long rising from 0 to 2 m: volume = 2 × 1 × 1 m = 2 m³.

    >>> import shapely
    >>> spec = GridSpec(0.0, 0.0, 0.5, 0.5, 4, 2)
    >>> wedge = shapely.Polygon([(0, 0, 0), (2, 0, 2), (2, 1, 2), (0, 1, 0)])
    >>> t = sloping_footprint_thickness(wedge, spec)
    >>> float(t.sum() * spec.cell_area), t[0].round(6).tolist()
    (2.0, [0.25, 0.75, 1.25, 1.75])
    """
    check_spec(spec)
    return tin_cell_average(footprint_triangles(geometry), spec, argument="geometry")


# --- reading footprint layers --------------------------------------------------------
