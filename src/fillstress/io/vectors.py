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

import json
import math
import os
import re
from pathlib import Path
from typing import NamedTuple

import numpy as np
import pyproj
import shapely

from .. import crs as crsmod
from ..errors import InputError

# geopandas (GDAL) is imported inside the functions that use it: it is slow to load and
# most commands never need it (pyogrio loads pandas and geopandas with itself).

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
    _check_features(frame.geometry.values, geometry, parts, path, what)
    return frame


def _check_features(geoms, geometry: str, parts: bool, path, what: str) -> None:
    if len(geoms) == 0:
        raise InputError(f"the layer has no features; expected {what}", file=path)
    allowed = {geometry, "Multi" + geometry} if parts else {geometry}
    for k, geom in enumerate(geoms):
        if geom is None or geom.is_empty:
            raise InputError(f"feature {k} has no geometry", file=path)
        if geom.geom_type not in allowed:
            raise InputError(f"feature {k} is a {geom.geom_type}; {what} must be "
                             f"{' or '.join(sorted(allowed))}", file=path)
        if geometry == "Polygon" and not shapely.is_valid(geom):
            raise InputError(f"feature {k} is not a valid polygon "
                             f"({shapely.is_valid_reason(geom)})", file=path)


class Layer(NamedTuple):
    """A vector layer as read, without pandas: the features' geometries (object array),
    their attributes by name (arrays in feature order) and the layer's own CRS (or None).
    """

    geometry: np.ndarray
    fields: dict[str, np.ndarray]
    crs: pyproj.CRS | None

    @classmethod
    def of_frame(cls, frame) -> Layer:
        """The layer of a GeoDataFrame (its attribute columns as numpy arrays)."""
        name = frame.geometry.name
        return cls(np.asarray(frame.geometry.values, dtype=object),
                   {c: frame[c].to_numpy() for c in frame.columns if c != name}, frame.crs)

    @property
    def columns(self) -> list[str]:
        return list(self.fields)

    @property
    def total_bounds(self) -> np.ndarray:
        return shapely.total_bounds(self.geometry)

    def __len__(self) -> int:
        return len(self.geometry)

    def __getitem__(self, name: str) -> np.ndarray:
        return self.fields[name]

    def take(self, rows) -> Layer:
        """The features at positions `rows`."""
        return Layer(self.geometry[rows], {c: v[rows] for c, v in self.fields.items()},
                     self.crs)


def read_layer(path, geometry: str, *, parts: bool = True, what: str = "features") -> Layer:
    """:func:`read_vector` of a file, as a :class:`Layer`: the same features, attributes,
    CRS and errors, without loading pandas where the file is GeoJSON that
    :func:`geojson_layer` reads as GDAL does (anything else goes through geopandas).

    Examples
    --------
    >>> import json, tempfile, os
    >>> f = os.path.join(tempfile.mkdtemp(), "pads.geojson")
    >>> square = {"type": "Polygon", "coordinates": [[[0, 0], [4, 0], [4, 2], [0, 0]]]}
    >>> with open(f, "w") as out:
    ...     json.dump({"type": "FeatureCollection", "features": [{"type": "Feature",
    ...                "properties": {"id": "a"}, "geometry": square}]}, out)
    >>> pads = read_layer(f, "Polygon")
    >>> pads.geometry[0].area, pads["id"].tolist(), pads.crs.to_epsg()
    (4.0, ['a'], 4326)
    """
    path = _read_path(path)
    layer = geojson_layer(path)
    if layer is None:
        return Layer.of_frame(read_vector(path, geometry, parts=parts, what=what))
    _check_features(layer.geometry, geometry, parts, path, what)
    return layer


# GeoJSON read by json and shapely where GDAL's GeoJSON driver gives the same layer:
# text, whole-number and number attributes present in every feature, two-dimensional
# geometries, a CRS stated by EPSG code or none (GDAL then says EPSG:4326). Strings GDAL
# may parse as dates or JSON, nulls, booleans, lists and every other case return None.
_GEOJSON_SUFFIXES = (".geojson", ".json")
_EPSG_NAME = re.compile(r"(?:EPSG:|urn:ogc:def:crs:EPSG::)(\d+)")
_DATE_LIKE = re.compile(r"\s*[+-]?\d.*[-/:]|\s*[\[{]")
_DEPTH = {"Point": 0, "LineString": 1, "Polygon": 2, "MultiPoint": 1, "MultiLineString": 2,
          "MultiPolygon": 3}


def geojson_layer(path: Path) -> Layer | None:
    """The GeoJSON file at `path` as GDAL reads it, or None where it might read otherwise
    (or the file is no GeoJSON that json parses)."""
    if path.suffix.lower() not in _GEOJSON_SUFFIXES:
        return None
    try:
        doc = json.loads(path.read_bytes())
    except (OSError, ValueError):
        return None
    if not (isinstance(doc, dict) and doc.get("type") == "FeatureCollection"
            and set(doc) <= {"type", "name", "crs", "features"}):
        return None
    features = doc["features"]
    crs = _geojson_crs(doc["crs"]) if "crs" in doc else pyproj.CRS.from_user_input("EPSG:4326")
    if not (isinstance(features, list) and features and crs is not None):
        return None
    if not all(isinstance(f, dict) and f.get("type") == "Feature"
               and set(f) == {"type", "properties", "geometry"}
               and isinstance(f["properties"], dict) for f in features):
        return None
    names = list(features[0]["properties"])
    if {"", "geometry"} & set(names) or any(list(f["properties"]) != names for f in features):
        return None
    fields = {n: _geojson_field([f["properties"][n] for f in features]) for n in names}
    geoms = [_geojson_geometry(f["geometry"]) for f in features]
    if any(v is None for v in fields.values()) or any(g is None for g in geoms):
        return None
    return Layer(_objects(geoms), fields, crs)


def _objects(items: list) -> np.ndarray:
    out = np.empty(len(items), dtype=object)
    out[:] = items
    return out


def _geojson_crs(member) -> pyproj.CRS | None:
    """The CRS of a ``crs`` member naming an EPSG code, else None."""
    try:
        name = member["properties"]["name"] if member["type"] == "name" else None
        match = _EPSG_NAME.fullmatch(name)
        return pyproj.CRS.from_user_input(f"EPSG:{match.group(1)}") if match else None
    except (TypeError, KeyError, pyproj.exceptions.CRSError):
        return None


def _geojson_field(values: list) -> np.ndarray | None:
    """An attribute's values as GDAL types them (text, int32, float64), or None."""
    if all(isinstance(v, str) for v in values):
        if any(_DATE_LIKE.match(v) for v in values):
            return None
        return _objects(values)
    if not all(type(v) in (int, float) for v in values):
        return None
    if all(type(v) is int for v in values):     # GDAL: int64 past int32 (left to it)
        return np.array(values, dtype=np.int32) if max(map(abs, values)) < 2**31 - 1 else None
    if not all(math.isfinite(v) and abs(v) < 2**53 for v in values):
        return None
    return np.array(values, dtype=np.float64)


def _geojson_geometry(geom):
    """The shapely geometry of a GeoJSON geometry object, or None where GDAL might read
    it otherwise (null, a collection, three dimensions, open rings, too few points)."""
    if not (isinstance(geom, dict) and set(geom) == {"type", "coordinates"}
            and geom["type"] in _DEPTH):
        return None
    if not _plain_positions(geom["coordinates"], _DEPTH[geom["type"]], geom["type"]):
        return None
    return shapely.geometry.shape(geom)


def _plain_positions(coords, depth: int, kind: str) -> bool:
    """Whether `coords` nests [x, y] pairs of numbers `depth` lists deep, LineStrings of two
    points or more and closed rings of four or more."""
    if depth == 0:
        return (isinstance(coords, list) and len(coords) == 2
                and all(type(c) in (int, float) and math.isfinite(c) for c in coords))
    if not (isinstance(coords, list) and coords):
        return False
    if depth == 1 and kind.endswith("LineString") and len(coords) < 2:
        return False
    if depth == 1 and kind.endswith("Polygon") and (len(coords) < 4 or coords[0] != coords[-1]):
        return False
    return all(_plain_positions(c, depth - 1, kind) for c in coords)


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
    """The features of `frame` (a GeoDataFrame or a :class:`Layer`) whose `id_field`
    equals `where` as text (all when None)."""
    if where is None:
        return frame
    if id_field not in frame.columns:
        raise InputError(f"no attribute {id_field!r} to select {where!r} with; attributes: "
                         f"{', '.join(map(str, frame.columns))}", file=path)
    frame = frame.take(np.flatnonzero([str(v) == str(where) for v in frame[id_field]]))
    if len(frame) == 0:
        raise InputError(f"no feature with {id_field} = {where!r}", file=path)
    return frame


def to_site(frame, site_crs, path) -> np.ndarray:
    """The geometries of `frame` (a GeoDataFrame or a :class:`Layer`) in internal site
    metres (object array).

    `site_crs` is ``(pyproj.CRS, metres per unit)`` from :func:`fillstress.crs.site_crs`,
    or None when the site states no CRS.
    """
    if frame.crs is None and site_crs is None:
        raise InputError("the layer states no CRS and neither does the site; add "
                         "crs = \"EPSG:...\" to [site]", file=path)
    # crs.to_site also refuses "degrees" that cannot be (GeoJSON without a crs member)
    return crsmod.to_site(np.asarray(frame.geometry, dtype=object), frame.crs, site_crs,
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
