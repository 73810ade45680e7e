"""Footprint fills: a polygon with a flat top, or a sloping top from vertex heights.

Heights here are fill *thickness* above the existing ground (m), not elevations.
A sloping top is defined by a z value on every polygon vertex (3D polygon): the
polygon is split by a constrained Delaunay triangulation (GEOS, via shapely 2; it keeps
every triangle inside the polygon and adds no vertices), the thickness is linear on each
triangle, and the cell averages are exact (:func:`~fillstress.shapes.coverage.tin_cell_average`).
"""
from __future__ import annotations

import os

import numpy as np
import pyproj
import shapely

from .. import crs as crsmod
from .._validate import finite, positive
from ..errors import InputError
from ..grid import GridSpec
from .coverage import check_polygonal, check_spec, coverage_fraction, tin_cell_average

# geopandas (GDAL) is imported inside the functions that use it: it is slow to load and
# most commands never need it.

#: Attribute names tried, in order, when no height field is named.
DEFAULT_HEIGHT_FIELDS = ("height_m", "height")


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
def read_footprints(path, height_field: str | None = None, crs=None, target_crs=None, *,
                    height_to_m: float = 1.0):
    """Read footprint polygons and their fill heights from a vector file.

    Parameters
    ----------
    path : str or path-like
        GeoJSON, GeoPackage, shapefile or anything geopandas/pyogrio reads.
    height_field : str, optional
        Attribute with the fill thickness. If None, ``height_m`` or ``height`` is used;
        without either, 3D polygons take their vertex z values (sloping top).
    crs : CRS-like, optional
        CRS to assume when the file states none.
    target_crs : CRS-like or (pyproj.CRS, float), optional
        The site CRS; coordinates are reprojected to it and converted to metres. A file
        without a CRS (and no `crs`) is taken to be in `target_crs`.
    height_to_m : float
        Metres per unit of the heights (and vertex z); 0.3048 for feet.

    Returns
    -------
    geopandas.GeoDataFrame
        The file's attributes plus ``height_m`` (flat-top thickness, or the highest
        vertex thickness for a sloping top) and ``sloping_top`` (bool); geometry in
        internal metres, CRS the metre twin of the site CRS (:func:`fillstress.crs.metric_twin`).

    Examples
    --------
    >>> import geopandas, shapely, tempfile, os
    >>> d = tempfile.mkdtemp()
    >>> f = os.path.join(d, "pads.geojson")
    >>> geopandas.GeoDataFrame({"height": [2.5]}, geometry=[shapely.box(0, 0, 10, 5)],
    ...                        crs="EPSG:32632").to_file(f)
    >>> gdf = read_footprints(f)
    >>> float(gdf.height_m[0]), float(gdf.geometry[0].area)
    (2.5, 50.0)
    """
    factor = positive(height_to_m, "height_to_m")
    gdf = _read_layer(path)
    source = _layer_crs(gdf, crs, target_crs, path)
    if target_crs is None:
        site = _own_crs_as_site(gdf, source, path)
    elif isinstance(target_crs, tuple):
        site = target_crs
    else:
        site = crsmod.site_crs(target_crs, argument="target_crs")
    _check_geometries(gdf, path)
    field = _height_field(gdf, height_field, path)
    geoms = np.asarray(gdf.geometry.values, dtype=object)
    if field is None:
        geoms = shapely.transform(geoms, lambda c: c * [1.0, 1.0, factor], include_z=True)
        heights = np.array([_max_vertex_z(g, path, k) for k, g in enumerate(geoms)])
    else:
        heights = _height_values(gdf[field], field, path) * factor
    out = gdf.copy()
    out["height_m"] = heights
    out["sloping_top"] = field is None
    out = out.set_geometry(crsmod.to_site(geoms, source, site, file=path), crs=None)
    return out.set_crs(crsmod.metric_twin(site[0]), allow_override=True)


def _read_layer(path):
    import geopandas
    if not os.path.exists(path):
        raise InputError("file not found", file=path)
    try:
        gdf = geopandas.read_file(path)
    except Exception as exc:  # pyogrio raises several classes for unreadable data
        raise InputError(f"cannot be read as a vector layer ({str(exc).splitlines()[0]})",
                         file=path) from None
    if len(gdf) == 0:
        raise InputError("the layer has no features", file=path)
    return gdf


def _layer_crs(gdf, crs, target_crs, path):
    if gdf.crs is not None:
        return gdf.crs
    if crs is not None:
        return crsmod.as_crs(crs, "crs")
    if target_crs is not None:
        return target_crs[0] if isinstance(target_crs, tuple) else crsmod.as_crs(target_crs,
                                                                                 "target_crs")
    raise InputError("the layer has no CRS and none was given (pass crs= or a site CRS)",
                     file=path)


def _own_crs_as_site(gdf, source, path):
    """With no site CRS the layer's own CRS is used; it must be projected."""

    source = crsmod.as_crs(source, "crs")
    if source.is_geographic:
        crsmod.check_degrees(gdf.geometry.values, source, file=path)  # before the hint uses them
        xmin, ymin, xmax, ymax = gdf.total_bounds
        to_lonlat = pyproj.Transformer.from_crs(source, "EPSG:4326", always_xy=True)
        lonlat = to_lonlat.transform((xmin + xmax) / 2, (ymin + ymax) / 2)
        raise InputError(f"the layer is in geographic {source.to_string()} (degrees) and no "
                         f"site CRS was given; use a projected one, e.g. "
                         f"{crsmod.suggest_projected(*lonlat)}", file=path)
    try:
        return crsmod.site_crs(source)
    except InputError as exc:
        raise InputError(exc.reason, file=path) from None


def _check_geometries(gdf, path) -> None:
    for k, geom in enumerate(gdf.geometry.values):
        if geom is None or geom.is_empty:
            raise InputError(f"feature {k} has no geometry", file=path)
        if not isinstance(geom, (shapely.Polygon, shapely.MultiPolygon)):
            raise InputError(f"feature {k} is a {geom.geom_type}; footprints must be "
                             "polygons", file=path)
        if not shapely.is_valid(geom):
            raise InputError(f"feature {k} is not a valid polygon "
                             f"({shapely.is_valid_reason(geom)})", file=path)


def _height_field(gdf, height_field, path):
    columns = [c for c in gdf.columns if c != gdf.geometry.name]
    if height_field is not None:
        if height_field not in gdf.columns:
            raise InputError(f"no height attribute {height_field!r}; attributes are "
                             f"{columns}", file=path)
        return height_field
    for name in DEFAULT_HEIGHT_FIELDS:
        if name in gdf.columns:
            return name
    if all(g.has_z for g in gdf.geometry.values):
        return None
    raise InputError(f"no height attribute (looked for {list(DEFAULT_HEIGHT_FIELDS)}; "
                     f"attributes are {columns}) and the polygons carry no z values",
                     file=path)


def _height_values(series, field, path) -> np.ndarray:
    try:
        values = np.asarray(series, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"attribute {field!r} must be numeric", file=path) from None
    bad = np.flatnonzero(~np.isfinite(values))
    if bad.size:
        raise InputError(f"attribute {field!r} is missing or NaN in feature {bad[0]}",
                         file=path)
    neg = np.flatnonzero(values < 0)
    if neg.size:
        raise InputError(f"attribute {field!r} is negative ({values[neg[0]]:g}) in feature "
                         f"{neg[0]}; use an excavation body for cuts", file=path)
    return values


def _max_vertex_z(geom, path, k) -> float:
    z = shapely.get_coordinates(geom, include_z=True)[:, 2]
    if not np.all(np.isfinite(z)):
        raise InputError(f"feature {k} has vertices without z values", file=path)
    if np.any(z < 0):
        raise InputError(f"feature {k} has a negative vertex thickness ({z.min():g})",
                         file=path)
    return float(z.max())
