"""Footprint layers: polygons of fill pads with their heights, from an attribute or from
the vertices' z (a sloping top), read through the one vector reader (io/vectors.py) into
internal site metres."""
from __future__ import annotations

import numpy as np
import shapely

from .. import crs as crsmod
from .._validate import positive
from ..errors import InputError
from .vectors import layer_and_site_crs, read_vector, source_name

DEFAULT_HEIGHT_FIELDS = ("height_m", "height")


def read_footprints(path, height_field: str | None = None, crs=None, target_crs=None, *,
                    height_to_m: float = 1.0):
    """Read footprint polygons and their fill heights from a vector file.

    Parameters
    ----------
    path : str, path-like or geopandas.GeoDataFrame
        GeoJSON, GeoPackage, shapefile or anything geopandas/pyogrio reads, or the
        footprints already in memory (a GeoDataFrame, or a GeoSeries with `height_field`
        absent and 3D polygons).
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
    gdf = read_vector(path, "Polygon", what="footprints")
    path = source_name(path, "footprints")
    source, site = layer_and_site_crs(gdf, crs, target_crs, path)
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
