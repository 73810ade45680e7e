"""One projected site CRS for every layer; metres inside the code.

The site CRS must be projected (a plan grid in degrees makes no sense for stress). Its
axis unit may be the metre or any length unit pyproj knows (international foot, US
survey foot, ...). Internally fillstress works in metres, so a layer is first
reprojected to the site CRS (pyproj, ``always_xy``) and its coordinates are then
multiplied by the site's metres-per-unit factor (pyproj
``crs.axis_info[0].unit_conversion_factor``); :func:`from_site` divides on the way out.

:func:`metric_twin` builds the same projection with metre axes, so a GeoDataFrame that
holds internal (metre) coordinates can carry an honest CRS.

Examples
--------
>>> crs, f = site_crs("EPSG:2263")     # NAD83 / New York Long Island (ftUS)
>>> round(f, 12)
0.304800609601
>>> to_site((1000.0, 2000.0), None, (crs, f))   # a layer stated in the site CRS
(304.80060960121924, 609.6012192024385)
"""
from __future__ import annotations

import numpy as np
import pyproj
import shapely
from pyproj.aoi import AreaOfInterest
from pyproj.crs import ProjectedCRS
from pyproj.crs.coordinate_system import Cartesian2DCS
from pyproj.database import query_utm_crs_info

from .errors import InputError

def as_crs(crs_like, argument: str = "crs") -> pyproj.CRS:
    """Parse anything pyproj accepts ('EPSG:32633', WKT, pyproj.CRS) or raise InputError.

    Examples
    --------
    >>> as_crs(32633).to_epsg()
    32633
    """
    try:
        return pyproj.CRS.from_user_input(crs_like)
    except (pyproj.exceptions.CRSError, TypeError, ValueError) as exc:
        raise InputError(f"is not a coordinate reference system pyproj understands "
                         f"({str(exc).splitlines()[0]})", argument=argument) from None


def _horizontal(crs: pyproj.CRS) -> pyproj.CRS:
    """The horizontal part of a compound (horizontal + vertical) CRS."""
    if crs.is_compound:
        return crs.sub_crs_list[0]
    return crs


def suggest_projected(lon: float, lat: float) -> str:
    """Name the WGS 84 UTM zone holding (lon, lat), e.g. for an error message.

    Examples
    --------
    >>> suggest_projected(10.5, 59.9)
    'EPSG:32632 (WGS 84 / UTM zone 32N)'
    """
    hits = query_utm_crs_info(datum_name="WGS 84",
                              area_of_interest=AreaOfInterest(lon, lat, lon, lat))
    if not hits:
        return "a projected CRS in metres for the site"
    return f"{hits[0].auth_name}:{hits[0].code} ({hits[0].name})"


def site_crs(crs_like, *, near_lonlat=None, argument: str = "crs") -> tuple[pyproj.CRS, float]:
    """Validate the site CRS and return it with its metres-per-unit factor.

    Parameters
    ----------
    crs_like : str, int or pyproj.CRS
        The site CRS; must be projected with east/north axes in a length unit.
    near_lonlat : (float, float), optional
        Longitude/latitude of the site, used only to suggest a UTM zone when
        `crs_like` is geographic.
    argument : str
        Name used in error messages.

    Returns
    -------
    (pyproj.CRS, float)
        The horizontal CRS and the metres per CRS unit (1.0, 0.3048, 1200/3937, ...).

    Examples
    --------
    >>> site_crs("EPSG:32632")[1]
    1.0
    >>> site_crs("EPSG:4326")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument crs: EPSG:4326 is geographic (degrees); use a projected CRS in metres or feet, e.g. the UTM zone of the site (pyproj.database.query_utm_crs_info)
    """
    crs = _horizontal(as_crs(crs_like, argument))
    label = crs.to_string()
    if crs.is_geographic:
        hint = ("the UTM zone of the site (pyproj.database.query_utm_crs_info)"
                if near_lonlat is None else suggest_projected(*near_lonlat))
        raise InputError(f"{label} is geographic (degrees); use a projected CRS in metres "
                         f"or feet, e.g. {hint}", argument=argument)
    if not crs.is_projected:
        raise InputError(f"{label} is not a projected CRS", argument=argument)
    axes = crs.axis_info[:2]
    if {a.direction.lower() for a in axes} != {"east", "north"}:
        raise InputError(f"{label} axes point {[a.direction for a in axes]}; fillstress "
                         "needs east and north axes", argument=argument)
    factors = [a.unit_conversion_factor for a in axes]
    if not np.isclose(factors[0], factors[1], rtol=1e-12) or factors[0] <= 0:
        raise InputError(f"{label} has unequal or invalid axis units {factors}",
                         argument=argument)
    return crs, float(factors[0])


def _resolve_site(site) -> tuple[pyproj.CRS, float]:
    if isinstance(site, tuple) and len(site) == 2 and isinstance(site[0], pyproj.CRS):
        return site
    return site_crs(site, argument="site")


def _layer_centre_lonlat(geom_or_xy, crs: pyproj.CRS):
    xy = _as_xy_array(geom_or_xy)
    cx, cy = np.nanmean(xy[:, 0]), np.nanmean(xy[:, 1])
    if crs.is_geographic:
        to_ll = pyproj.Transformer.from_crs(crs, "EPSG:4326", always_xy=True)
        return to_ll.transform(cx, cy)
    return None


def _as_xy_array(geom_or_xy) -> np.ndarray:
    """(N, 2) x, y of a geometry, an array of geometries (numpy or geopandas), an (x, y)
    pair or an (N, 2|3) array."""
    if isinstance(geom_or_xy, shapely.Geometry):
        return shapely.get_coordinates(geom_or_xy)
    if isinstance(geom_or_xy, tuple) and len(geom_or_xy) == 2:
        return np.column_stack([np.ravel(geom_or_xy[0]), np.ravel(geom_or_xy[1])])
    arr = np.asarray(geom_or_xy)
    if arr.dtype == object:
        return shapely.get_coordinates(arr)
    return arr.astype(float).reshape(-1, arr.shape[-1])[:, :2]


def _xy_columns(func):
    """Wrap ``func`` so it changes only x and y of an (N, 2) or (N, 3) array."""
    def wrapped(coords):
        out = np.array(coords, dtype=float)
        if len(out):
            out[:, :2] = func(out[:, :2])
        return out
    return wrapped


def _apply(geom_or_xy, func, argument):
    """Apply ``func((N, 2) array) -> (N, 2) array`` to a geometry, an (x, y) pair or an array."""
    if isinstance(geom_or_xy, shapely.Geometry) or (
            isinstance(geom_or_xy, np.ndarray) and geom_or_xy.dtype == object):
        return shapely.transform(geom_or_xy, _xy_columns(func), include_z=None)
    if isinstance(geom_or_xy, tuple) and len(geom_or_xy) == 2:
        x = np.asarray(geom_or_xy[0], dtype=float)
        y = np.asarray(geom_or_xy[1], dtype=float)
        out = func(np.column_stack([x.ravel(), y.ravel()]))
        if x.ndim == 0:
            return float(out[0, 0]), float(out[0, 1])
        return out[:, 0].reshape(x.shape), out[:, 1].reshape(y.shape)
    arr = np.array(geom_or_xy, dtype=float)
    if arr.ndim != 2 or arr.shape[1] not in (2, 3):
        raise InputError(f"must be a geometry, an (x, y) pair or an (N, 2|3) array, got "
                         f"shape {arr.shape}", argument=argument)
    arr[:, :2] = func(arr[:, :2])  # z (elevation) is left as it is
    return arr


def check_degrees(geom_or_xy, crs_like, *, file=None, argument: str = "geometry") -> None:
    """Refuse coordinates that cannot be longitude/latitude in a geographic CRS.

    A GeoJSON file without a ``crs`` member is WGS 84 by definition (RFC 7946), so
    projected coordinates saved without one are read as degrees, and pyproj turns them
    into infinities. Longitudes beyond ±360° or latitudes beyond ±90° are refused; a
    projected (or missing) `crs_like` is not checked. Small local coordinates that happen
    to fit the ranges cannot be told from degrees and pass.

    Parameters
    ----------
    geom_or_xy : shapely geometry (or array of them), (x, y) pair, or (N, 2|3) array
        Coordinates in `crs_like`, x = longitude, y = latitude.
    crs_like : CRS-like or None
        The CRS the coordinates are said to be in.
    file, argument : optional
        Where the coordinates came from, for the error message (`file` wins).

    Examples
    --------
    >>> check_degrees((10.5, 59.9), "EPSG:4326")
    >>> check_degrees((583914.1, 6641224.9), "EPSG:4326", file="toes.geojson")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: toes.geojson: coordinates reach x = 583914, y = 6641225, which cannot be degrees (longitude, latitude) of WGS 84; if they are projected, state the file's CRS (a GeoJSON file without a "crs" member is read as WGS 84, RFC 7946)
    """
    if crs_like is None:
        return
    crs = _horizontal(as_crs(crs_like, argument))
    if not crs.is_geographic:
        return
    xy = _as_xy_array(geom_or_xy)
    xy = xy[np.all(np.isfinite(xy), axis=1)]
    if not len(xy):
        return
    worst = np.abs(xy).max(axis=0)
    if worst[0] <= 360.0 and worst[1] <= 90.0:
        return
    k = int(np.argmax(np.abs(xy[:, 0]) > 360.0) if worst[0] > 360.0
            else np.argmax(np.abs(xy[:, 1]) > 90.0))
    where = {"file": file} if file is not None else {"argument": argument}
    raise InputError(f"coordinates reach x = {xy[k, 0]:.0f}, y = {xy[k, 1]:.0f}, which cannot "
                     f"be degrees (longitude, latitude) of {crs.name}; if they are projected, "
                     "state the file's CRS (a GeoJSON file without a \"crs\" member is read as "
                     "WGS 84, RFC 7946)", **where)


def to_site(geom_or_xy, from_crs, site, *, argument: str = "geometry", file=None):
    """Bring a layer into internal site coordinates (metres in the site projection).

    Parameters
    ----------
    geom_or_xy : shapely geometry (or array of them), (x, y) pair, or (N, 2|3) array
        Coordinates in `from_crs`. A third column (elevation) is not changed.
    from_crs : CRS-like or None
        The layer's CRS. None means the layer is in the site CRS.
    site : (pyproj.CRS, float) from :func:`site_crs`, CRS-like, or None
        The site CRS. None means the site states no CRS: that is an error, naming a
        projected CRS to use (a layer without a CRS needs the site to state one).
    argument : str
        Name used in error messages.
    file : str or path-like, optional
        The file the layer came from, named in error messages instead of `argument`.

    Returns
    -------
    The same kind of object as `geom_or_xy`, in metres.

    Raises
    ------
    InputError
        Also when `from_crs` is geographic but the coordinates cannot be degrees
        (:func:`check_degrees`).

    Examples
    --------
    >>> x, y = to_site((10.5, 59.9), "EPSG:4326", "EPSG:32632")
    >>> round(x, 1), round(y, 1)
    (583914.1, 6641224.9)
    """
    named = {"file": file} if file is not None else {"argument": argument}
    check_degrees(geom_or_xy, from_crs, file=file, argument=argument)
    if site is None:
        if from_crs is None:
            raise InputError("the layer has no CRS and the site states none; state the "
                             "site CRS", **named)
        layer = as_crs(from_crs, argument)
        where = _layer_centre_lonlat(geom_or_xy, layer)
        hint = suggest_projected(*where) if where else layer.to_string()
        raise InputError(f"the layer is in {layer.to_string()} but the site states no CRS; "
                         f"state a projected site CRS, e.g. {hint}", **named)
    crs, factor = _resolve_site(site)
    layer = crs if from_crs is None else _horizontal(as_crs(from_crs, argument))
    transformer = None if layer.equals(crs) else pyproj.Transformer.from_crs(
        layer, crs, always_xy=True)

    def func(xy):
        if transformer is not None:
            xy = np.column_stack(transformer.transform(xy[:, 0], xy[:, 1]))
        return xy * factor

    return _apply(geom_or_xy, func, argument)


def from_site(geom_or_xy, site, *, argument: str = "geometry"):
    """Internal metres back to site-CRS units (for writing outputs in the site CRS).

    Examples
    --------
    >>> from_site((0.3048, 3.048), "EPSG:2229")[0] != 1.0   # US survey foot, not 0.3048 m
    True
    """
    if site is None:
        return _apply(geom_or_xy, lambda xy: xy, argument)
    _, factor = _resolve_site(site)
    return _apply(geom_or_xy, lambda xy: xy / factor, argument)


def cf_grid_mapping(crs_like) -> dict:
    """CF grid-mapping attributes of a CRS: pyproj's ``CRS.to_cf()`` (with
    ``grid_mapping_name`` and ``crs_wkt``) plus the WKT under ``spatial_ref``, where
    rioxarray and GDAL look for it.

    Examples
    --------
    >>> attrs = cf_grid_mapping("EPSG:32633")
    >>> attrs["grid_mapping_name"], attrs["spatial_ref"] == attrs["crs_wkt"]
    ('transverse_mercator', True)
    """
    cf = {k: (list(v) if isinstance(v, tuple) else v)
          for k, v in as_crs(crs_like, "crs").to_cf().items()}
    return {"long_name": "coordinate reference system", **cf, "spatial_ref": cf["crs_wkt"]}


def metric_twin(crs_like) -> pyproj.CRS:
    """The same projection as `crs_like` with metre axes (east, north).

    Coordinates in the twin are exactly the site-CRS coordinates times the
    metres-per-unit factor, so it is the honest CRS of internal coordinates.

    Examples
    --------
    >>> metric_twin("EPSG:2263").axis_info[0].unit_name
    'metre'
    """
    crs, factor = site_crs(crs_like)
    if factor == 1.0:
        return crs
    return ProjectedCRS(conversion=crs.coordinate_operation, geodetic_crs=crs.geodetic_crs,
                        cartesian_cs=Cartesian2DCS(), name=f"{crs.name} (metres)")


def layer_and_site(layer_crs, site, *, file=None) -> tuple[pyproj.CRS, tuple[pyproj.CRS, float]]:
    """The CRS a layer is in and the site CRS it goes to, by fillstress's rules.

    A layer without a CRS is taken to be in the site CRS; a site without a CRS adopts
    the layer's (which must then be projected); both missing is an error naming `file`.

    Examples
    --------
    >>> layer, (site, f) = layer_and_site(None, "EPSG:32632")
    >>> layer.to_epsg(), site.to_epsg(), f
    (32632, 32632, 1.0)
    """
    if site is not None:
        site = _resolve_site(site)
        layer = site[0] if layer_crs is None else _horizontal(as_crs(layer_crs, "crs"))
        return layer, site
    if layer_crs is None:
        raise InputError("has no CRS and the site states none; state the site CRS "
                         "(or the file's)", file=file)
    try:
        site = site_crs(layer_crs)
    except InputError as exc:
        raise InputError(exc.reason, file=file) from None
    return site[0], site


#: A layer moved by more than NEAR_MISS_M[0] but less than NEAR_MISS_M[1] on its way into the
#: site CRS is in a near twin of it (another foot, another realisation of the datum): the
#: transformation is right, but files of the same origin that state no CRS were taken as
#: already in the site CRS and are off by that much (common practice: 1 ft is a blunder on
#: a road job; beyond a kilometre the systems are plainly different).
NEAR_MISS_M = (0.3, 1000.0)


def near_miss_shift(xy, layer_crs, site) -> float:
    """How far (m) the point `xy` of a layer moves between its own CRS and the site's,
    compared with taking its numbers as site-CRS numbers; 0 when it is not a near miss
    (same CRS, or moved by NEAR_MISS_M[1] or more).

    Examples
    --------
    >>> texas_central_in_feet = ("+proj=lcc +lat_0=29.6666666666667 +lon_0=-100.333333333333 "
    ...     "+lat_1=31.8833333333333 +lat_2=30.1166666666667 +x_0=700000 +y_0=3000000 "
    ...     "+datum=NAD83 +units=ft")                # EPSG:2277 in international feet
    >>> xy = (3048000.0, 10071000.0)
    >>> round(near_miss_shift(xy, "EPSG:2277", texas_central_in_feet) / 0.3048, 1)
    21.0
    """
    crs, factor = _resolve_site(site)
    layer = _horizontal(as_crs(layer_crs))
    if layer.equals(crs):
        return 0.0
    x, y = pyproj.Transformer.from_crs(layer, crs, always_xy=True).transform(*xy)
    shift = float(np.hypot(x - xy[0], y - xy[1]) * factor)
    return shift if NEAR_MISS_M[0] < shift < NEAR_MISS_M[1] else 0.0
