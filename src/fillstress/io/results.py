"""Reading a results folder through its documented contract (docs/results-folder.md).

The report and the 3D viewer see a run only through this module: JSON, CSV, GeoJSON,
GeoTIFF and the NetCDF stress cube, never the solver's objects. Column names carry the
unit suffix given by ``manifest.json`` → ``units``; every plan field is returned with
``y`` ascending, so ``values[j, i]`` sits at ``(x[i], y[j])`` and row 0 is the south row,
the same convention as :class:`fillstress.grid.LoadGrid`.
"""
from __future__ import annotations

import json
import os
import re
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import pandas as pd
import shapely.geometry
import xarray as xr

from .._validate import regular_file
from ..crs import from_site, site_crs, to_site
from ..errors import InputError
from .tables import plan_unit, restored
from ..units import SYSTEMS, UnitSystem

# rasterio (GDAL) is imported inside the functions that use it: it is slow to load and
# most commands never need it.

#: Quantities that can be shown on plan slices and at sample points; value = unit key.
QUANTITIES = {"dsz": "pressure", "stress_ratio": None, "settlement": "settlement",
              "sigma_v0": "pressure"}
_UNIT_KEYS = ("length", "pressure", "unit_weight", "settlement")
_SLICE_NAME = re.compile(r"^(?P<q>dsz)_(?P<grid>.+)_z(?P<depth>[0-9]+(?:\.[0-9]+)?)(?P<unit>[A-Za-z]+)$")


@dataclass(frozen=True)
class UnitLabels:
    """Unit labels of one results folder, as written in column suffixes.

    ``plan`` is the exact unit of plan coordinates (the site CRS's axis unit, e.g.
    ``ftUS``); ``plan_suffix`` is the suffix of their ``x_``/``y_`` columns, which is the
    length label when the CRS unit is of that kind (docs/results-folder.md). Both default
    to the length label.

    Examples
    --------
    >>> u = UnitLabels("m", "kPa", "kN/m3", "mm")
    >>> u.suffixed("dsz", "pressure"), u.suffixed("stress_ratio", None), u.plan
    ('dsz_kPa', 'stress_ratio', 'm')
    >>> UnitLabels("m", "kPa", "kN/m3", "mm", plan="ftUS", plan_suffix="ftUS").suffixed(
    ...     "x", "plan_suffix")
    'x_ftUS'
    """

    length: str
    pressure: str
    unit_weight: str
    settlement: str
    plan: str = ""
    plan_suffix: str = ""

    def __post_init__(self):
        for name in ("plan", "plan_suffix"):
            if not getattr(self, name):
                object.__setattr__(self, name, self.length)

    @property
    def system(self) -> UnitSystem:
        """The unit system (:data:`fillstress.units.SYSTEMS`) these labels are those of.

        >>> UnitLabels("ft", "psf", "pcf", "in").system.name
        'US'
        """
        for system in SYSTEMS.values():
            if (system.length, system.pressure, system.unit_weight, system.settlement) == (
                    self.length, self.pressure, self.unit_weight, self.settlement):
                return system
        raise InputError(f"labels {self.length}, {self.pressure}, {self.unit_weight}, "
                         f"{self.settlement} are not those of a unit system "
                         f"({', '.join(SYSTEMS)})", key="units")

    def label(self, unit_key: str | None) -> str:
        """The label for a unit key ('length', 'pressure', ...), '' for dimensionless."""
        return "" if unit_key is None else getattr(self, unit_key)

    def suffixed(self, base: str, unit_key: str | None) -> str:
        """Column name `base` with the unit suffix of `unit_key` (none when dimensionless)."""
        from .tables import column_suffix
        label = self.label(unit_key)
        return f"{base}_{column_suffix(label)}" if label else base


@dataclass(frozen=True, eq=False)
class PlanField:
    """A plan grid of values: ``values[j, i]`` at ``(x[i], y[j])``, x and y ascending.

    Examples
    --------
    >>> f = PlanField("dsz", "plan", 2.0, np.array([0.5, 1.5]), np.array([0.5]),
    ...               np.array([[3.0, 4.0]]), "kPa")
    >>> f.value_range()
    (3.0, 4.0)
    """

    quantity: str
    grid: str
    depth: float | None
    x: np.ndarray
    y: np.ndarray
    values: np.ndarray
    units: str

    def value_range(self) -> tuple[float, float]:
        """(min, max) of the finite values; (0, 0) when there are none."""
        finite = self.values[np.isfinite(self.values)]
        if finite.size == 0:
            return (0.0, 0.0)
        return (float(finite.min()), float(finite.max()))


@dataclass(frozen=True)
class Feature:
    """One GeoJSON feature: a shapely geometry and its properties."""

    receptor_id: str
    geometry: object
    properties: dict = field(default_factory=dict)


def own_file(folder: Path, path: Path) -> Path | None:
    """`path` when it is a regular file of `folder` itself, None when absent; InputError
    when it is a link leading outside the folder or not a regular file (a report or a
    view shows only what the run wrote)."""
    if not (path.exists() or path.is_symlink()):
        return None
    real, root = Path(os.path.realpath(path)), Path(os.path.realpath(folder))
    if root not in real.parents:
        raise InputError("leads outside the results folder (a link); the report and view "
                         "read only the folder's own files", file=path)
    return regular_file(path, file=path)


def _read_json(folder: Path, path: Path, *, required: bool) -> dict:
    if own_file(folder, path) is None:
        if required:
            raise InputError("is missing from the results folder", file=path)
        return {}
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"is not valid JSON ({exc})", file=path) from None
    if not isinstance(data, dict):
        raise InputError("must hold a JSON object at the top level", file=path)
    return data


def _ascending(coord: np.ndarray, values: np.ndarray, axis: int):
    """Flip `values` along `axis` when `coord` runs downwards, so coordinates ascend."""
    if coord.size > 1 and coord[0] > coord[-1]:
        return coord[::-1].copy(), np.flip(values, axis=axis).copy()
    return coord, values


class ResultsFolder:
    """Read-only view of one results folder.

    Parameters
    ----------
    path : str or path-like
        The folder holding ``manifest.json`` and the other documented files.

    Examples
    --------
    >>> import tempfile, json, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "manifest.json").write_text(json.dumps({"units": {"system": "SI",
    ...     "length": "m", "pressure": "kPa", "unit_weight": "kN/m3", "settlement": "mm"}}))
    >>> ResultsFolder(d).units.pressure, ResultsFolder(d).plan_to_length
    ('kPa', 1.0)
    """

    def __init__(self, path):
        self.path = Path(path)
        if not self.path.is_dir():
            raise InputError("is not a results folder (no such directory)", argument="results_dir")
        self.manifest = _read_json(self.path, self.path / "manifest.json", required=True)
        self.summary = _read_json(self.path, self.path / "summary.json", required=False)
        self.units = self._read_units()
        self._read_once: dict = {}

    @classmethod
    def of(cls, folder) -> "ResultsFolder":
        """`folder` itself when it is a ResultsFolder (what it has read is kept: the run
        hands one to the report and then to the scene), else a new view of that path."""
        return folder if isinstance(folder, cls) else cls(folder)

    def _once(self, key: str, read):
        """`read()` the first time `key` is asked for, the kept result after: the report and
        the scene ask for the stress cube and the fill raster from several places."""
        if key not in self._read_once:
            self._read_once[key] = read()
        return self._read_once[key]

    def _read_units(self) -> UnitLabels:
        manifest = self.path / "manifest.json"
        units = self.manifest.get("units")
        if not isinstance(units, dict):
            raise InputError("must be an object of unit labels", file=manifest, key="units")
        missing = [k for k in (*_UNIT_KEYS, "system") if not isinstance(units.get(k), str)]
        if missing:
            raise InputError(f"lacks label(s) {', '.join(missing)}", file=manifest, key="units")
        if units["system"] not in SYSTEMS:
            raise InputError(f"unknown unit system {units['system']!r}; expected "
                             f"{' or '.join(SYSTEMS)}", file=manifest, key="units.system")
        plan = units.get("plan")
        labels = UnitLabels(*(units[k] for k in _UNIT_KEYS),
                            plan=plan if isinstance(plan, str) and plan else units["length"])
        try:
            system = labels.system
        except InputError as exc:
            raise InputError(exc.reason, file=manifest, key="units") from None
        if units["system"] != system.name:
            raise InputError(f"system {units['system']!r} does not match the labels, which are "
                             f"those of {system.name}", file=manifest, key="units.system")
        # The writer's own rule (io.tables.plan_unit) gives the x_/y_ suffix and the
        # metres per plan unit of this folder's CRS.
        try:
            suffix, metres = plan_unit(self.manifest.get("crs") or None, system)
        except InputError as exc:
            raise InputError(f"is not a usable CRS ({exc.reason})", file=manifest,
                             key="crs") from None
        #: Site lengths per plan-coordinate unit (1 unless the CRS unit differs).
        self.plan_to_length = metres / system.length_to_m
        return replace(labels, plan_suffix=suffix)

    # --- tables ----------------------------------------------------------------
    def table(self, name: str):
        """The CSV ``<name>.csv`` as a pandas DataFrame, or None when absent."""
        path = self.path / f"{name}.csv"
        if own_file(self.path, path) is None:
            return None
        try:
            return restored(pd.read_csv(path, dtype={"receptor_id": str, "point_id": str,
                                                     "body": str},
                                        keep_default_na=False, na_values=[""]))
        except (pd.errors.ParserError, UnicodeDecodeError) as exc:
            raise InputError(f"cannot be read as CSV ({exc})", file=path) from None

    def _tables(self, suffix: str) -> dict:
        kinds = sorted(p.name[: -len(suffix)] for p in self.path.glob(f"*{suffix}"))
        return {k: self.table(k + suffix[:-4]) for k in kinds}

    def point_tables(self) -> dict:
        """``{kind: DataFrame}`` for every ``<kind>_points.csv``."""
        return self._tables("_points.csv")

    def summary_tables(self) -> dict:
        """``{kind: DataFrame}`` for every ``<kind>_summary.csv``."""
        return self._tables("_summary.csv")

    def column(self, df, base: str, unit_key: str | None, *, name: str) -> str:
        """The column of `df` for `base` in this folder's unit, or InputError naming it."""
        col = self.units.suffixed(base, unit_key)
        if col not in df.columns:
            raise InputError(f"has no column {col!r}", file=self.path / f"{name}.csv", key=col)
        return col

    def optional_column(self, df, base: str, unit_key: str | None) -> str | None:
        """Like :meth:`column` but None when the column is absent."""
        col = self.units.suffixed(base, unit_key)
        return col if col in df.columns else None

    # --- vectors ---------------------------------------------------------------
    def features(self, name: str) -> list[Feature]:
        """Features of ``<name>.geojson`` in plan coordinates of the site CRS (empty list
        when the file is absent).

        An RFC 7946 file (``manifest.json`` → ``settings.geojson_crs`` is ``EPSG:4326``)
        is reprojected from WGS 84 to the site CRS; a file kept in the site CRS, or one of
        a folder that does not say (written before RFC 7946 output), is read as it is.
        """
        path = self.path / f"{name}.geojson"
        data = _read_json(self.path, path, required=False)
        geoms, props = [], []
        for k, feat in enumerate(data.get("features", [])):
            try:
                geoms.append(shapely.geometry.shape(feat["geometry"]))
            except (KeyError, TypeError, ValueError, AttributeError) as exc:
                raise InputError(f"feature {k} has no valid geometry ({exc})", file=path) from None
            props.append(feat.get("properties") or {})
        geoms = self._geojson_to_plan(np.array(geoms, dtype=object), path)
        return [Feature(str(p.get("receptor_id", f"{name}-{k}")), g, p)
                for k, (g, p) in enumerate(zip(geoms, props))]

    def _geojson_to_plan(self, geoms: np.ndarray, path: Path) -> np.ndarray:
        settings = self.manifest.get("settings") or {}
        stated = settings.get("geojson_crs", "site") if isinstance(settings, dict) else "site"
        if stated == "site" or not len(geoms):
            return geoms
        site = self.manifest.get("crs")
        if not site:
            raise InputError(f"holds {stated} coordinates but manifest.json names no site CRS "
                             "to bring them back to", file=path)
        try:
            parsed = site_crs(site, argument="crs")
            return from_site(to_site(geoms, stated, parsed, file=path), parsed)
        except InputError as exc:
            raise InputError(exc.reason, file=path) from None

    # --- rasters and the stress cube ---------------------------------------------
    def raster(self, relpath: str, quantity: str, units: str) -> PlanField | None:
        """A north-up GeoTIFF as a PlanField (nodata → NaN), or None when absent."""
        return self._once(f"raster:{relpath}:{quantity}:{units}",
                          lambda: self._read_raster(relpath, quantity, units))

    def _read_raster(self, relpath: str, quantity: str, units: str) -> PlanField | None:
        import rasterio
        path = self.path / relpath
        if own_file(self.path, path) is None:
            return None
        try:
            with rasterio.open(path) as src:
                t = src.transform
                if t.b != 0 or t.d != 0:
                    raise InputError("is rotated; expected a north-up raster", file=path)
                values = src.read(1, masked=True).astype(float).filled(np.nan)
                x = t.c + (np.arange(src.width) + 0.5) * t.a
                y = t.f + (np.arange(src.height) + 0.5) * t.e
        except rasterio.errors.RasterioIOError as exc:
            raise InputError(f"cannot be read as GeoTIFF ({exc})", file=path) from None
        x, values = _ascending(x, values, 1)
        y, values = _ascending(y, values, 0)
        return PlanField(quantity, "", None, x, y, values, units)

    def fill_thickness(self) -> PlanField | None:
        """Final-stage fill thickness (length unit), from the GeoTIFF or else the cube."""
        field_ = self.raster("fill_thickness.tif", "fill_thickness", self.units.length)
        if field_ is None:
            cube = self.cube()
            if cube is not None and "fill_thickness" in cube:
                field_ = self._plan_from_array(_final_stage(cube["fill_thickness"]), "fill_thickness", "",
                                               None, self.units.length)
        return field_

    def ground_elevation(self) -> PlanField | None:
        """Existing ground elevation, when the site has one."""
        return self.raster("ground_elevation.tif", "ground_elevation", self.units.length)

    def cube(self):
        """The stress cube as an xarray Dataset (loaded into memory, read once), or None."""
        return self._once("cube", self._read_cube)

    def _read_cube(self):
        path = self.path / "stress_cube.nc"
        if own_file(self.path, path) is None:
            return None
        from xarray.backends.h5netcdf_ import H5netcdfBackendEntrypoint
        try:      # the writer's engine given as its class: naming it would load every engine
            with xr.open_dataset(path, engine=H5netcdfBackendEntrypoint) as ds:
                return ds.load()
        except (OSError, ValueError) as exc:
            raise InputError(f"cannot be read as NetCDF ({exc})", file=path) from None

    @staticmethod
    def _plan_from_array(da, quantity, grid, depth, units) -> PlanField:
        ydim, xdim = da.dims[-2:]
        x = np.asarray(da[xdim].values if xdim in da.coords else np.arange(da.shape[-1]), float)
        y = np.asarray(da[ydim].values if ydim in da.coords else np.arange(da.shape[-2]), float)
        values = np.asarray(da.values, float)
        x, values = _ascending(x, values, 1)
        y, values = _ascending(y, values, 0)
        return PlanField(quantity, grid, depth, x, y, values, units)

    def plan_slices(self, quantity: str = "dsz") -> list[PlanField]:
        """Every horizontal slice of `quantity`, sorted by plan grid then depth.

        Read from ``stress_cube.nc`` (variables ``<quantity>_<grid>``); σ'v0 and the
        stress ratio also come from the per-depth profile ``sigma_v0_<grid>`` beside
        ``dsz_<grid>``; Δσz falls back to ``slices/dsz_<grid>_z<depth><len>.tif`` when there
        is no cube.
        """
        unit_key = quantity_unit_key(quantity)
        units = self.units.label(unit_key)
        cube = self.cube()
        slices = []
        if cube is not None:
            stacks = {g: _stack(_final_stage(cube[v])) for v in sorted(cube.data_vars)
                      if (g := _grid_of(v, quantity)) is not None
                      and _final_stage(cube[v]).ndim in (2, 3)}
            if not stacks and quantity in ("sigma_v0", "stress_ratio"):
                stacks = _from_sigma_profile(cube, quantity)
            for grid, da in stacks.items():
                depths = np.asarray(da[da.dims[0]].values, float)
                for k in np.argsort(depths):
                    slices.append(self._plan_from_array(da.isel({da.dims[0]: int(k)}), quantity,
                                                        grid, float(depths[k]), units))
        elif quantity == "dsz":
            slices = self._tif_slices(units)
        return sorted(slices, key=lambda s: (s.grid, s.depth))

    def _tif_slices(self, units: str) -> list[PlanField]:
        out = []
        for path in sorted((self.path / "slices").glob("*.tif")):
            m = _SLICE_NAME.match(path.stem)
            if m is None:
                continue
            f = self.raster(f"slices/{path.name}", "dsz", units)
            out.append(PlanField("dsz", m["grid"], float(m["depth"]), f.x, f.y, f.values, units))
        return out


def _final_stage(da):
    """The last construction stage of a cube variable (cubes carry every stage)."""
    return da.isel(stage=-1) if "stage" in da.dims else da


def quantity_unit_key(quantity: str) -> str | None:
    """Unit key of a quantity of :data:`QUANTITIES`, or InputError naming `quantity`.

    >>> quantity_unit_key("dsz"), quantity_unit_key("stress_ratio")
    ('pressure', None)
    """
    if quantity not in QUANTITIES:
        raise InputError(f"unknown quantity {quantity!r}; choose one of {', '.join(QUANTITIES)}",
                         argument="quantity")
    return QUANTITIES[quantity]


def _stack(da):
    """A (depth, y, x) stack; a plan field (settlement at the surface) is one at depth 0."""
    return da if da.ndim == 3 else da.expand_dims(depth=[0.0])


def _from_sigma_profile(cube, quantity: str) -> dict:
    """σ'v0 or Δσz / σ'v0 slice stacks from ``dsz_<g>`` and the profile ``sigma_v0_<g>``."""
    out = {}
    for var in sorted(cube.data_vars):
        grid = _grid_of(var, "dsz")
        profile = cube.get(f"sigma_v0_{grid}") if grid is not None else None
        if profile is None or profile.ndim != 1 or _final_stage(cube[var]).ndim != 3:
            continue
        dsz = _final_stage(cube[var])
        sigma = profile.broadcast_like(dsz).transpose(*dsz.dims)
        if quantity == "sigma_v0":
            out[grid] = sigma
        else:
            out[grid] = dsz / sigma.where(sigma > 0)
    return out


def _grid_of(var: str, quantity: str) -> str | None:
    """Plan grid name of cube variable `var` if it holds `quantity`, else None."""
    if var == quantity:
        return "plan"
    if var.startswith(quantity + "_"):
        rest = var[len(quantity) + 1:]
        # 'stress_ratio_plan' must not count as quantity 'stress'; all quantities are listed.
        if not any(var.startswith(q + "_") and len(q) > len(quantity) for q in QUANTITIES):
            return rest
    return None
