"""Point and receptor tables to CSV and GeoJSON, with unit-suffixed column names.

Values arrive in SI (m, kPa, kN/m³, settlement in m) and leave in the site's
:class:`~fillstress.units.UnitSystem`; each quantity column is renamed ``<name>_<unit>``
(``depth_m``, ``dsz_psf``, ``unit_weight_kN/m3``). Plan coordinates (``x``, ``y`` and
GeoPackage geometry) are internal metres scaled to the site CRS's own axis unit, so they
are the CRS's coordinates; see :func:`plan_unit` for their suffix. GeoJSON follows
RFC 7946 (WGS 84 longitude and latitude) unless asked to keep the site CRS.
"""
from __future__ import annotations

import os
from pathlib import Path
from typing import Mapping

import numpy as np
import pandas as pd
import shapely

from ..crs import as_crs, site_crs
from ..errors import InputError
from ..units import QUANTITIES, SI, UnitSystem
from .atomic import temporary_environ, write_atomic

# geopandas (GDAL) is imported inside the functions that use it: it is slow to load and
# most commands never need it.

# Which physical quantity a column holds; None = dimensionless or a count. "plan" is a
# plan coordinate: written in the site CRS's own unit (see plan_unit), not the unit system's.
DEFAULT_QUANTITIES: dict[str, str | None] = {
    "x": "plan", "y": "plan",
    **dict.fromkeys(["depth", "chainage", "foundation_depth", "top_depth", "bottom_depth",
                     "diameter", "max_height", "thickness", "top", "bottom"], "length"),
    **dict.fromkeys(["dsz", "dsz_max", "sigma_v0", "surface_pressure"], "pressure"),
    **dict.fromkeys(["settlement", "settlement_max", "differential_settlement"], "settlement"),
    "unit_weight": "unit_weight",
    "footprint_area": "area",
    "volume": "volume",
    "total_load": "force",
    **dict.fromkeys(["n_points", "stress_ratio", "angular_distortion", "stage"], None),
}
_CRS_UNIT_LABELS = {"metre": "m", "foot": "ft", "US survey foot": "ftUS"}


def crs_unit_label(crs) -> str:
    """Short label of a site CRS's axis unit: ``m``, ``ft``, ``ftUS`` or pyproj's name.

    Examples
    --------
    >>> crs_unit_label("EPSG:2263"), crs_unit_label("EPSG:32633")
    ('ftUS', 'm')
    """
    return _axis_label(site_crs(crs, argument="crs")[0])


def _axis_label(crs) -> str:
    name = crs.axis_info[0].unit_name
    return _CRS_UNIT_LABELS.get(name, name.replace(" ", "_"))


def plan_unit(crs, units: UnitSystem = SI) -> tuple[str, float]:
    """(column suffix, metres per unit) of plan coordinates in the outputs.

    With a site CRS, plan coordinates are written in the CRS's own axis unit so they match
    the CRS and the engineer's drawings (a US survey foot is not an international foot).
    The suffix is the unit system's length label when the CRS unit is that kind of unit
    (``ft`` for both foot variants, ``m`` for metres), else the CRS unit's own label, so a
    column is never labelled with a different kind of unit; :func:`crs_unit_label` gives
    the exact unit. Without a CRS, coordinates are local lengths in the unit system.

    Examples
    --------
    >>> from fillstress.units import US
    >>> plan_unit("EPSG:32633"), plan_unit(None, US), plan_unit("EPSG:32633", US)
    (('m', 1.0), ('ft', 0.3048), ('m', 1.0))
    >>> label, f = plan_unit("EPSG:2263", US)  # NAD83 / New York Long Island (ftUS)
    >>> label, round(f, 12), plan_unit("EPSG:2263", SI)[0]
    ('ft', 0.304800609601, 'ftUS')
    """
    if crs is None:
        return units.length, units.length_to_m
    parsed, factor = site_crs(crs, argument="crs")
    label = _axis_label(parsed)
    same_kind = {"m": ("m",), "ft": ("ft", "ftUS")}.get(units.length, ())
    return (units.length if label in same_kind else label), factor


# What a CSV keeps, in the output unit: what the method resolves, not the float's last
# bits (docs/results-folder.md states it per column). Plan coordinates and lengths keep
# 6 decimals (1 µm or 1e-6 ft: far below survey precision, so a point recomputed from the
# file lands where it was computed, even beside a vertical fill face); every other number
# 6 significant digits, 100 times finer than the 0.1 % the elastic solutions are checked
# to and enough for far-field stresses of 1e-4 kPa.
CSV_DECIMALS = {"plan": 6, "length": 6}
CSV_SIGNIFICANT = 6


def column_suffix(label: str) -> str:
    """A unit label as a column-name suffix: no ``/`` (spreadsheets and GIS field names).

    >>> column_suffix("kN/m3"), column_suffix("psf")
    ('kN_per_m3', 'psf')
    """
    return label.replace("/", "_per_")


def _csv_rounded(values: np.ndarray, quantity: str | None) -> np.ndarray:
    if quantity in CSV_DECIMALS:
        return np.round(values, CSV_DECIMALS[quantity])
    with np.errstate(divide="ignore", invalid="ignore"):
        scale = 10.0 ** (CSV_SIGNIFICANT - 1 - np.floor(np.log10(np.abs(values))))
    scale = np.where(np.isfinite(scale), scale, 1.0)
    return np.round(values * scale) / scale


def _unit(units: UnitSystem, quantity: str, crs=None) -> tuple[str, float]:
    """(label, SI value of one output unit)."""
    if quantity == "plan":
        return plan_unit(crs, units)
    if quantity not in QUANTITIES:
        raise InputError(f"unknown quantity {quantity!r}; use plan or one of "
                         f"{', '.join(QUANTITIES)}", argument="quantities")
    return units.unit(quantity)


def unit_label(units: UnitSystem, quantity: str, crs=None) -> str:
    """Label of `quantity` in `units`, also the column-name suffix (``dsz_psf``).

    Examples
    --------
    >>> from fillstress.units import US
    >>> unit_label(US, "pressure"), unit_label(US, "volume"), unit_label(US, "force")
    ('psf', 'yd3', 'kip')
    """
    return _unit(units, quantity, crs)[0]


def to_output_units(values, units: UnitSystem, quantity: str | None, crs=None):
    """Convert SI `values` of `quantity` to `units` (returned unchanged for None).

    Examples
    --------
    >>> from fillstress.units import US
    >>> round(float(to_output_units(0.3048, US, "length")), 12)
    1.0
    """
    if quantity is None:
        return values
    return values / _unit(units, quantity, crs)[1]


def labelled_table(table: pd.DataFrame, units: UnitSystem,
                   quantities: Mapping[str, str | None] | None = None, *,
                   crs=None, rounded: bool = False) -> pd.DataFrame:
    """A copy of `table` in output units with unit-suffixed quantity columns.

    Numeric columns must have a quantity, from :data:`DEFAULT_QUANTITIES` or `quantities`
    (``None`` marks a dimensionless column); text and boolean columns pass through. Plan
    coordinates (``x``, ``y``) go to the unit of `crs` (see :func:`plan_unit`). NaN stays
    NaN (e.g. ``chainage`` of non-pipe points; the CSV writes it empty); infinities are
    refused. With `rounded`, values keep what :data:`CSV_DECIMALS` and
    :data:`CSV_SIGNIFICANT` say.

    Examples
    --------
    >>> import pandas as pd
    >>> from fillstress.units import US
    >>> t = pd.DataFrame({"receptor_id": ["B1"], "depth": [3.048], "dsz": [47.8802589804]})
    >>> labelled_table(t, US).round(6).to_dict("records")
    [{'receptor_id': 'B1', 'depth_ft': 10.0, 'dsz_psf': 1000.0}]
    """
    known = {**DEFAULT_QUANTITIES, **dict(quantities or {})}
    out = {}
    for name in table.columns:
        column = table[name]
        numeric = pd.api.types.is_numeric_dtype(column) and not pd.api.types.is_bool_dtype(column)
        if not numeric:
            out[name] = column
            continue
        if name not in known:
            raise InputError(f"numeric column {name!r} has no declared quantity; pass it in "
                             "quantities (None if dimensionless)", argument="quantities")
        q = known[name]
        if q is None and pd.api.types.is_integer_dtype(column):
            out[name] = column              # counts and stage numbers stay whole numbers
            continue
        values = column.to_numpy(dtype=float)
        if np.any(np.isinf(values)):
            raise InputError(f"column {name!r} holds infinite values", argument="table")
        if q is None:
            out[name] = _csv_rounded(values, None) if rounded else values
            continue
        suffix, si_per_unit = _unit(units, q, crs)
        values = values / si_per_unit
        out[f"{name}_{column_suffix(suffix)}"] = (_csv_rounded(values, q) if rounded
                                                  else values)
    return pd.DataFrame(out, index=table.index)


def write_table_csv(path, table: pd.DataFrame, units: UnitSystem,
                    quantities: Mapping[str, str | None] | None = None, *,
                    crs=None) -> os.PathLike:
    """Write `table` to CSV in output units (atomic); `crs` sets the unit of x and y.

    UTF-8 with a byte-order mark, so a spreadsheet on Windows reads names with accents and
    dashes right; numbers rounded per quantity (:data:`CSV_DECIMALS`, 6 significant digits
    otherwise).

    Examples
    --------
    >>> import tempfile, os, pandas as pd
    >>> from fillstress.units import SI
    >>> f = os.path.join(tempfile.mkdtemp(), "t.csv")
    >>> t = pd.DataFrame({"receptor_id": ["P1"], "chainage": [2.5], "dsz": [125.00000000000001]})
    >>> _ = write_table_csv(f, t, SI)
    >>> open(f, encoding="utf-8-sig").read().splitlines()
    ['receptor_id,chainage_m,dsz_kPa', 'P1,2.5,125.0']
    """
    labelled = neutralised(labelled_table(table, units, quantities, crs=crs, rounded=True))
    return write_atomic(path, lambda tmp: labelled.to_csv(tmp, index=False,
                                                          encoding="utf-8-sig"))


#: A spreadsheet runs a cell beginning with one of these as a formula (OWASP, "CSV
#: Injection"): such text cells are written with a leading apostrophe.
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def neutralised(table: pd.DataFrame) -> pd.DataFrame:
    """`table` with text cells that a spreadsheet would run as a formula prefixed by ``'``
    (OWASP guidance on CSV injection); numeric columns are left as numbers.

    >>> t = neutralised(pd.DataFrame({"id": ["=1+2", "B-1", "-x"], "v": [-1.0, 2.0, 3.0]}))
    >>> t["id"].tolist(), t["v"].tolist()
    (["'=1+2", 'B-1', "'-x"], [-1.0, 2.0, 3.0])
    """
    out = table.copy()
    for col in out.columns:
        if _text_column(out[col]):
            out[col] = [f"'{v}" if isinstance(v, str) and v.startswith(FORMULA_STARTS) else v
                        for v in out[col]]
    return out


def _text_column(column: pd.Series) -> bool:
    return column.dtype == object or pd.api.types.is_string_dtype(column)


def restored(table: pd.DataFrame) -> pd.DataFrame:
    """The inverse of :func:`neutralised`, for readers of fillstress's own CSV files.

    >>> restored(neutralised(pd.DataFrame({"id": ["=1+2", "'quoted"]})))["id"].tolist()
    ['=1+2', "'quoted"]
    """
    out = table.copy()
    for col in out.columns:
        if _text_column(out[col]):
            out[col] = [v[1:] if isinstance(v, str) and v.startswith("'")
                        and v[1:].startswith(FORMULA_STARTS) else v for v in out[col]]
    return out


def _pyproj_crs(crs):
    if crs is None:
        return None
    return as_crs(crs, "crs")


#: Ground length of one degree along a meridian at the poles, the longest degree of
#: WGS 84 (111.69 km; NGA, "Length of a degree" tables, recalled from memory): the bound
#: used to turn a coordinate resolution in metres into decimals of degrees.
METRES_PER_DEGREE_MAX = 111_700.0
#: GeoJSON coordinates in degrees keep at least this many decimals (about 1 cm).
GEOJSON_DECIMALS_MIN = 7


def geojson_decimals(cell_m: float | None = None) -> int:
    """Decimals of degrees that GeoJSON coordinates keep for a survey on `cell_m` cells.

    Rounding to d decimals moves a point by at most half a unit of the last decimal,
    ``0.5 * 10**-d`` degrees; the decimals are the fewest that keep that within a
    hundredth of the cell and within 1 cm (a site survey's precision, common practice),
    never fewer than :data:`GEOJSON_DECIMALS_MIN`.

    Parameters
    ----------
    cell_m : float, optional
        The analysis cell in metres; None gives the 1 cm rule alone.

    Returns
    -------
    int
        Decimals of degrees (7 for cells of 1 m and more, 8 down to 0.06 m).

    Examples
    --------
    >>> geojson_decimals(), geojson_decimals(1.524), geojson_decimals(0.25)
    (7, 7, 8)
    """
    resolution = 0.01 if cell_m is None else min(0.01, cell_m / 100.0)
    if not resolution > 0:
        raise InputError(f"cell must be positive, got {cell_m!r}", argument="cell_m")
    needed = int(np.ceil(np.log10(0.5 * METRES_PER_DEGREE_MAX / resolution)))
    return max(GEOJSON_DECIMALS_MIN, needed)


def write_geojson(path, frame, units: UnitSystem, *, crs=None,
                  quantities: Mapping[str, str | None] | None = None,
                  site_coordinates: bool = False,
                  decimals: int = GEOJSON_DECIMALS_MIN) -> os.PathLike:
    """Write a GeoDataFrame in internal metres to GeoJSON (atomic).

    With a CRS (`crs`, the site CRS, or else the frame's own), the file follows RFC 7946:
    longitude and latitude of WGS 84 (reprojected with pyproj), no ``crs`` member,
    polygon rings by the right-hand rule (exterior counterclockwise), a ``bbox``, and
    coordinates rounded to `decimals` of a degree (:func:`geojson_decimals`). With
    `site_coordinates`, or without any CRS, the geometry stays in plan coordinates of the
    site (the CRS's axis unit, or the unit system's length for a local site), and GDAL
    names the CRS in a ``crs`` member where it has an authority code. Attributes go to
    output units either way.

    Parameters
    ----------
    path : str or path-like
        Output ``.geojson``; the layer is named after its stem.
    frame : geopandas.GeoDataFrame
        Features in internal metres.
    units : UnitSystem
        Output unit system of the attributes.
    crs : optional
        The site CRS; overrides the frame's own.
    quantities : mapping, optional
        Quantities of the numeric columns beyond :data:`DEFAULT_QUANTITIES`.
    site_coordinates : bool
        Keep the site CRS instead of WGS 84 (not RFC 7946).
    decimals : int
        Decimals of degrees kept in the RFC 7946 file.

    Returns
    -------
    path-like
        `path`.

    Examples
    --------
    >>> import tempfile, os, json, geopandas as gpd
    >>> from shapely.geometry import box
    >>> from fillstress.units import SI
    >>> f = os.path.join(tempfile.mkdtemp(), "buildings.geojson")
    >>> g = gpd.GeoDataFrame({"receptor_id": ["B1"], "foundation_depth": [1.2]},
    ...                      geometry=[box(500000, 0, 500008, 5)], crs="EPSG:32633")
    >>> _ = write_geojson(f, g, SI)
    >>> doc = json.load(open(f))
    >>> "crs" in doc, doc["features"][0]["geometry"]["coordinates"][0][0]
    (False, [15.0000718, 0.0])
    >>> list(gpd.read_file(f).columns)
    ['receptor_id', 'foundation_depth_m', 'geometry']
    """
    out = output_frame(frame, units, crs=crs, quantities=quantities)
    # the layer is named after the final file, not the temporary one (same bytes every run)
    options = {"layer": Path(os.fspath(path)).name.removesuffix(".geojson")}
    if out.crs is not None and not site_coordinates:
        out = out.to_crs("EPSG:4326")
        options.update(RFC7946="YES", COORDINATE_PRECISION=int(decimals), WRITE_BBOX="YES")
    return write_atomic(path, lambda tmp: out.to_file(tmp, driver="GeoJSON", **options))


def output_frame(frame, units: UnitSystem, *, crs=None,
                 quantities: Mapping[str, str | None] | None = None):
    """A GeoDataFrame in internal metres as written: geometry in the site CRS's unit,
    attributes in output units with unit-suffixed names, text columns that hold no value
    at all dropped (a GIS would type them as empty strings)."""
    import geopandas as gpd

    if not isinstance(frame, gpd.GeoDataFrame):
        raise InputError(f"must be a GeoDataFrame, got {type(frame).__name__}", argument="frame")
    site = _pyproj_crs(crs) if crs is not None else frame.crs
    factor = plan_unit(site, units)[1]
    geometry = shapely.transform(frame.geometry.to_numpy(), lambda xy: xy / factor)
    attrs = pd.DataFrame(frame.drop(columns=frame.geometry.name))
    empty = [c for c in attrs.columns if attrs[c].dtype == object and
             attrs[c].map(lambda v: v is None or v == "" or v != v).all()]
    attrs = labelled_table(attrs.drop(columns=empty), units, quantities, crs=site)
    return gpd.GeoDataFrame(attrs, geometry=geometry, crs=site)


def write_geopackage(path, layers: Mapping, units: UnitSystem, *, crs=None,
                     quantities: Mapping[str, Mapping] | None = None) -> os.PathLike:
    """Write every vector layer of a run to one GeoPackage in the site CRS (atomic).

    Parameters
    ----------
    path : str or path-like
        Output ``.gpkg``.
    layers : mapping of str to geopandas.GeoDataFrame
        Layer name → features in internal metres (as :func:`write_geojson` takes them).
    units : UnitSystem
        Output unit system of the attributes.
    crs : optional
        The site CRS.
    quantities : mapping of layer name to a quantities mapping, optional
        Quantities of the numeric columns beyond :data:`DEFAULT_QUANTITIES`.

    Returns
    -------
    path-like
        `path`; the file's timestamps are fixed so the same run writes the same bytes.

    Examples
    --------
    >>> import tempfile, os, geopandas as gpd
    >>> from shapely.geometry import Point, box
    >>> from fillstress.units import SI
    >>> f = os.path.join(tempfile.mkdtemp(), "layers.gpkg")
    >>> pads = gpd.GeoDataFrame({"receptor_id": ["B1"]}, geometry=[box(0, 0, 8, 5)])
    >>> holes = gpd.GeoDataFrame({"receptor_id": ["H1"], "depth": [2.0]}, geometry=[Point(1, 1)])
    >>> _ = write_geopackage(f, {"buildings": pads, "boreholes": holes}, SI, crs="EPSG:32633")
    >>> gpd.list_layers(f)["name"].tolist(), gpd.read_file(f, layer="boreholes").crs.to_epsg()
    (['buildings', 'boreholes'], 32633)
    """
    frames = {name: output_frame(frame, units, crs=crs, quantities=(quantities or {}).get(name))
              for name, frame in layers.items()}
    if not frames:
        raise InputError("needs at least one layer", argument="layers")

    def write(tmp):
        # GDAL stamps GeoPackage tables with the clock unless OGR_CURRENT_DATE is set
        with temporary_environ("OGR_CURRENT_DATE", "2000-01-01T00:00:00.000Z"):
            for name, frame in frames.items():
                frame.to_file(tmp, layer=name, driver="GPKG")

    return write_atomic(path, write)


def write_points_geojson(path, points: pd.DataFrame, units: UnitSystem, *, crs=None,
                         quantities: Mapping[str, str | None] | None = None,
                         **options) -> os.PathLike:
    """Write a point table (``x``, ``y`` in internal metres) as GeoJSON points.

    The properties are the same unit-suffixed columns as the CSV; `options`
    (``site_coordinates``, ``decimals``) are those of :func:`write_geojson`.

    Examples
    --------
    >>> import tempfile, os, geopandas as gpd
    >>> from fillstress.site.receptors import borehole_points
    >>> from fillstress.units import SI
    >>> f = os.path.join(tempfile.mkdtemp(), "borehole_points.geojson")
    >>> _ = write_points_geojson(f, borehole_points("BH1", 500, 600, 0, 1, 1), SI,
    ...                          crs="EPSG:32633", site_coordinates=True)
    >>> gpd.read_file(f).geometry.x.tolist()
    [500.0, 500.0]
    """
    import geopandas as gpd

    for col in ("x", "y"):
        if col not in points.columns:
            raise InputError(f"point table has no {col!r} column", argument="points")
    geometry = gpd.points_from_xy(points["x"].to_numpy(float), points["y"].to_numpy(float))
    frame = gpd.GeoDataFrame(points.reset_index(drop=True), geometry=geometry)
    return write_geojson(path, frame, units, crs=crs, quantities=quantities, **options)
