"""The one reader of vector layers (GeoJSON, GeoPackage, shapefile, … anything GDAL reads),
for fill outlines, footprints and receptors alike, with one policy:

* a missing file, an unreadable one and a layer without features are refused, naming the
  file;
* every feature needs a geometry of the expected kind; multi-part features (MultiPolygon,
  MultiLineString) are accepted only where the caller allows parts (a fill body may be
  several pads; a building or a pipe is one outline or one line);
* polygons must be valid, and the first invalid feature is named with the reason;
* :func:`to_site` takes the layer to internal site metres: a layer that states no CRS is
  taken to be in the site CRS, and with neither stated it is refused.
"""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pyproj
import shapely

from .. import crs as crsmod
from ..errors import InputError

# geopandas (GDAL) is imported inside the functions that use it: it is slow to load and
# most commands never need it.

def source_name(source, what: str = "features") -> str:
    """How messages name a vector source: its path, or ``the <what> GeoDataFrame`` for
    features given in memory.

    >>> source_name("pads.geojson"), source_name(__import__("geopandas").GeoSeries(), "pads")
    ('pads.geojson', 'the pads GeoSeries')
    """
    if _in_memory(source):
        return f"the {what} {type(source).__name__}"
    return os.fspath(source)


def _in_memory(source) -> bool:
    import geopandas as gpd
    return isinstance(source, (gpd.GeoDataFrame, gpd.GeoSeries))


def read_vector(path, geometry: str, *, parts: bool = True, layer=None, what: str = "features"):
    """Read a vector layer and check its features (see the module docstring).

    Parameters
    ----------
    path : path-like, geopandas.GeoDataFrame or geopandas.GeoSeries
        A vector file, or features already in memory (checked the same way; messages
        name them with :func:`source_name`).
    geometry : {"Polygon", "LineString", "Point"}
        The kind every feature must be.
    parts : bool
        Accept the multi-part form (``Multi<geometry>``) too.
    layer : str or int, optional
        Layer of a multi-layer file.
    what : str
        What the features are, for messages ("footprints", "pipe receptors").

    Returns
    -------
    geopandas.GeoDataFrame
        The layer as read: attributes, geometry and the layer's own CRS (or None).

    Examples
    --------
    >>> import geopandas, shapely, tempfile, os
    >>> f = os.path.join(tempfile.mkdtemp(), "pads.geojson")
    >>> geopandas.GeoDataFrame({"id": ["a"]}, geometry=[shapely.box(0, 0, 4, 2)],
    ...                        crs="EPSG:32632").to_file(f)
    >>> read_vector(f, "Polygon").geometry.area.tolist()
    [8.0]
    >>> read_vector(f, "LineString", what="pipes")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    fillstress.errors.InputError: ...pads.geojson: feature 0 is a Polygon; pipes must be LineString or MultiLineString
    """
    import geopandas as gpd

    if _in_memory(path):
        frame = gpd.GeoDataFrame(geometry=path) if isinstance(path, gpd.GeoSeries) else path
        frame, path = frame.copy(), source_name(path, what)
    else:
        path = _read_path(path)
        try:
            frame = gpd.read_file(path, layer=layer)
        except Exception as exc:  # pyogrio and fiona raise several types for unreadable data
            raise InputError(f"cannot be read as a vector layer "
                             f"({str(exc).splitlines()[0]})", file=path) from None
    if len(frame) == 0:
        raise InputError(f"the layer has no features; expected {what}", file=path)
    allowed = {geometry, "Multi" + geometry} if parts else {geometry}
    for k, geom in enumerate(frame.geometry.values):
        if geom is None or geom.is_empty:
            raise InputError(f"feature {k} has no geometry", file=path)
        if geom.geom_type not in allowed:
            raise InputError(f"feature {k} is a {geom.geom_type}; {what} must be "
                             f"{' or '.join(sorted(allowed))}", file=path)
        if geometry == "Polygon" and not shapely.is_valid(geom):
            raise InputError(f"feature {k} is not a valid polygon "
                             f"({shapely.is_valid_reason(geom)})", file=path)
    return frame


def _read_path(path) -> Path:
    try:
        path = Path(os.fspath(path))
    except TypeError:
        raise InputError("must be a vector file path, a GeoDataFrame or a GeoSeries, got "
                         f"{type(path).__name__}", argument="path") from None
    if not path.exists():
        raise InputError("file not found", file=path)
    return path


def select(frame, id_field: str, where, path):
    """The features of `frame` whose `id_field` equals `where` (all when None)."""
    if where is None:
        return frame
    if id_field not in frame.columns:
        raise InputError(f"no attribute {id_field!r} to select {where!r} with; attributes: "
                         f"{', '.join(map(str, frame.columns))}", file=path)
    frame = frame[frame[id_field].astype(str) == str(where)]
    if frame.empty:
        raise InputError(f"no feature with {id_field} = {where!r}", file=path)
    return frame


def to_site(frame, site_crs, path) -> np.ndarray:
    """The layer's geometries in internal site metres (object array).

    `site_crs` is ``(pyproj.CRS, metres per unit)`` from :func:`fillstress.crs.site_crs`,
    or None when the site states no CRS.
    """
    if frame.crs is None and site_crs is None:
        raise InputError("the layer states no CRS and neither does the site; add "
                         "crs = \"EPSG:...\" to [site]", file=path)
    # crs.to_site also refuses "degrees" that cannot be (GeoJSON without a crs member)
    return crsmod.to_site(np.asarray(frame.geometry.values, dtype=object), frame.crs, site_crs,
                          argument="crs", file=path)


def layer_and_site_crs(frame, crs, target_crs, path):
    """The CRS a layer read by a public reader is in, and the site CRS it goes to.

    The layer's own CRS wins; `crs` is assumed when it states none; a layer without
    either is taken to be in `target_crs`. With no `target_crs` the layer's own (projected)
    CRS becomes the site CRS. A layer in another CRS than `target_crs` is reprojected by
    the caller (:func:`fillstress.crs.to_site`).

    Parameters
    ----------
    frame : geopandas.GeoDataFrame
        The layer as read.
    crs : CRS-like or None
        The CRS to assume when the layer states none.
    target_crs : CRS-like, (pyproj.CRS, float) or None
        The site CRS.
    path : str
        The layer's name in messages.

    Returns
    -------
    (pyproj.CRS, (pyproj.CRS, float))
        The layer's CRS, and the site CRS with its metres per unit.

    Examples
    --------
    >>> import geopandas, shapely
    >>> pads = geopandas.GeoDataFrame(geometry=[shapely.box(0, 0, 1, 1)])
    >>> layer, (site, factor) = layer_and_site_crs(pads, None, "EPSG:2263", "pads")
    >>> layer.to_epsg(), site.to_epsg(), round(factor, 6)
    (2263, 2263, 0.304801)
    >>> layer_and_site_crs(pads, None, None, "the pads GeoDataFrame")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: the pads GeoDataFrame: the layer has no CRS and none was given (pass crs= or a site CRS)
    """
    source = _layer_crs(frame, crs, target_crs, path)
    if target_crs is None:
        return source, _own_crs_as_site(frame, source, path)
    if isinstance(target_crs, tuple):
        return source, target_crs
    return source, crsmod.site_crs(target_crs, argument="target_crs")


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
