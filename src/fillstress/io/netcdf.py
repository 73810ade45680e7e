"""The stress cube: every plan-grid slice stack and the fill thickness in one NetCDF file.

The file follows the CF-1.8 and ACDD-1.3 conventions, so xarray, rioxarray, GDAL, QGIS and
Panoply read it without help:

- each plan grid ``<g>`` is a variable ``dsz_<g>`` on ``(stage, depth_<g>, y_<g>, x_<g>)``
  (grids need not share nodes); ``fill_thickness`` is on ``(stage, y, x)``, the
  analysis-grid cell centres. Stage ``k`` holds the load of every body with stage ≤ k;
- y runs north to south (north-up, as GDAL expects), depth down from existing ground
  (``axis = "Z"``, ``positive = "down"``);
- the CRS is the grid-mapping variable ``spatial_ref`` (pyproj's ``CRS.to_cf()`` plus the
  WKT under ``crs_wkt`` and ``spatial_ref``), a coordinate of every data variable;
- units are UDUNITS strings: ``m``, ``ft``, ``US_survey_foot``, ``kPa``, ``lbf ft-2``;
- values are float32, compressed (zlib); coordinates carry no ``_FillValue``;
- where the site has a soil profile, ``sigma_v0_<g> (depth_<g>)`` holds σ'v0 at each slice
  depth (the same over the plan: depths are below the existing ground; NaN below the
  stated profile) and ``settlement_<g> (y_<g>, x_<g>)`` the final settlement at the
  ground surface.

Values and depths are in the output unit system, plan coordinates in the site CRS's unit
(internal metres scaled by its axis factor).
"""
from __future__ import annotations

import os
import re
from typing import Mapping, Sequence

import numpy as np
import xarray as xr

from ..cautions import CORE_CAUTION
from ..crs import as_crs, cf_grid_mapping
from ..errors import InputError
from ..grid import GridSpec
from ..units import SI, UnitSystem
from .atomic import write_atomic
from .tables import crs_unit_label, to_output_units, unit_label

_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_-]*$")
SLICE_DIMS = ("depth", "y", "x")
GRID_MAPPING = "spatial_ref"
# The project's short unit labels in UDUNITS-2 spelling (what CF asks for).
UDUNITS = {"ftUS": "US_survey_foot", "psf": "lbf ft-2", "pcf": "lbf ft-3"}


def udunits(label: str) -> str:
    """UDUNITS-2 spelling of a unit label of :mod:`fillstress.io.tables`.

    Examples
    --------
    >>> udunits("psf"), udunits("ftUS"), udunits("kPa")
    ('lbf ft-2', 'US_survey_foot', 'kPa')
    """
    return UDUNITS.get(label, label)


def _checked_slice(name: str, da):
    if not isinstance(name, str) or not _NAME.match(name):
        raise InputError(f"plan grid name must be letters, digits, '_' or '-', got {name!r}",
                         argument="slices")
    dims = tuple(getattr(da, "dims", ()))
    if not isinstance(da, xr.DataArray) or dims not in (SLICE_DIMS, ("stage",) + SLICE_DIMS):
        got = dims or type(da).__name__
        raise InputError(f"slice stack {name!r} must be a DataArray with dims "
                         f"{SLICE_DIMS} or ('stage', ...), got {got}", argument="slices")
    for dim in SLICE_DIMS:
        if dim not in da.coords:
            raise InputError(f"slice stack {name!r} has no {dim!r} coordinate",
                             argument="slices")
    if np.any(np.isinf(da.values)):
        raise InputError(f"slice stack {name!r} holds infinite values", argument="slices")
    return da if "stage" in da.dims else da.expand_dims("stage")


def _length_coord(values_m, units, name: str, axis: str, crs, named: bool = True) -> tuple:
    """Depth in the unit system's length; plan axes in the CRS's unit (see plan_unit).

    Only one x, y pair carries the projection standard names (`named`): a CF checker asks
    for exactly one variable per standard name of the grid mapping, so the others are
    identified by ``axis``, which CF, GDAL and rioxarray read as well.
    """
    quantity = "length" if axis == "depth" else "plan"
    exact = quantity == "plan" and crs is not None
    label = crs_unit_label(crs) if exact else unit_label(units, quantity, crs)
    attrs = {"units": udunits(label)}
    if axis == "depth":
        attrs.update(standard_name="depth", long_name="depth below existing ground",
                     positive="down", axis="Z")
    else:
        long = {"x": "easting", "y": "northing"}[axis]
        attrs.update(long_name=long, axis=axis.upper())
        if named:
            attrs["standard_name"] = f"projection_{axis}_coordinate"
    values = to_output_units(np.asarray(values_m, float), units, quantity, crs)
    if quantity == "plan":      # round CRS coordinates, as the GeoTIFFs carry them
        values = np.round(values, 7)
    return (name, values, attrs)


def _depth_profile(values, da, units) -> np.ndarray:
    v = np.asarray(values, float)
    if v.shape != (da.sizes["depth"],) or np.any(np.isinf(v)):
        raise InputError(f"needs one finite value or NaN per slice depth, got shape {v.shape}",
                         argument="sigma_v0")
    return to_output_units(v, units, "pressure")


def _surface(values, da, units) -> np.ndarray:
    v = np.asarray(values, float)
    if v.shape != (da.sizes["y"], da.sizes["x"]) or np.any(np.isinf(v)):
        raise InputError(f"needs a finite value or NaN per plan node, got shape {v.shape}",
                         argument="settlement")
    return to_output_units(v, units, "settlement")


def _stage_numbers(stacks: dict, stages) -> list[int]:
    """Stage numbers of the stage axis: `stages`, else the slices' own, else [1]."""
    first = next(iter(stacks.values()))
    if stages is None:
        stages = first["stage"].values if "stage" in first.coords else [1]
    stages = [int(k) for k in np.atleast_1d(stages)]
    for name, da in stacks.items():
        if da.sizes["stage"] != len(stages):
            raise InputError(f"slice stack {name!r} has {da.sizes['stage']} stage(s), "
                             f"expected {len(stages)} ({stages})", argument="slices")
    return stages


def _thickness(fill_thickness, grid, n_stages: int) -> np.ndarray:
    if not isinstance(grid, GridSpec):
        raise InputError("a GridSpec is needed to place fill_thickness", argument="grid")
    t = np.asarray(fill_thickness, dtype=float)
    t = t[None] if t.ndim == 2 else t
    if t.shape != (n_stages, *grid.shape) or not np.all(np.isfinite(t)):
        raise InputError(f"must be finite with the grid shape {grid.shape} (one per stage, "
                         f"{n_stages}), got {np.shape(fill_thickness)}",
                         argument="fill_thickness")
    return t


def stress_dataset(slices: Mapping, *, grid: GridSpec | None = None, fill_thickness=None,
                   units: UnitSystem = SI, crs=None, stages: Sequence[int] | None = None,
                   attrs: Mapping | None = None, sigma_v0: Mapping | None = None,
                   settlement: Mapping | None = None):
    """Build (without writing) the cube as an :class:`xarray.Dataset` in output units.

    Parameters
    ----------
    slices : mapping of str to xarray.DataArray
        Plan-grid name → Δσz (kPa) with dims ``("depth", "y", "x")`` (one stage) or
        ``("stage", "depth", "y", "x")``, coordinates in internal metres.
    grid : GridSpec, optional
        Analysis lattice, needed for `fill_thickness`; its CRS is used unless `crs` is given.
    fill_thickness : array_like, shape ``grid.shape`` or ``(n_stages, *grid.shape)``, optional
        Fill thickness (m) after each stage, row 0 south.
    units : UnitSystem
        Output unit system.
    crs : optional
        Coordinate reference system of x and y.
    stages : sequence of int, optional
        Stage numbers along the ``stage`` axis (default: the slices' ``stage``
        coordinate, or ``[1]``).
    attrs : mapping, optional
        Global attributes added to (or replacing) the CF/ACDD ones written here, e.g.
        ``title``, ``history``, ``source``.
    sigma_v0 : mapping of str to array_like, optional
        Plan-grid name → σ'v0 (kPa) at each of that grid's slice depths.
    settlement : mapping of str to array_like, optional
        Plan-grid name → final surface settlement (m), shape (y, x) of that grid.

    Returns
    -------
    xarray.Dataset
        North-up, with the ``spatial_ref`` grid mapping; see the module notes.

    Examples
    --------
    >>> import xarray as xr
    >>> da = xr.DataArray(np.zeros((1, 2, 3)), dims=SLICE_DIMS,
    ...                   coords={"depth": [2.0], "y": [0.0, 5.0], "x": [0.0, 5.0, 10.0]})
    >>> ds = stress_dataset({"plan": da})
    >>> dict(ds["dsz_plan"].sizes), ds["dsz_plan"].attrs["units"], ds["y_plan"].values
    ({'stage': 1, 'depth_plan': 1, 'y_plan': 2, 'x_plan': 3}, 'kPa', array([5., 0.]))
    """
    if not slices:
        raise InputError("needs at least one plan grid", argument="slices")
    crs = crs if crs is not None else getattr(grid, "crs", None)
    stacks = {name: _checked_slice(name, da) for name, da in slices.items()}
    stages = _stage_numbers(stacks, stages)
    coords = {"stage": ("stage", np.asarray(stages, np.int32),
                        {"long_name": "construction stage: load of the bodies with stage <= k",
                         "units": "1"})}
    variables = {}
    p_label = udunits(unit_label(units, "pressure"))
    for k, (name, da) in enumerate(stacks.items()):
        dims = ("stage",) + tuple(f"{d}_{name}" for d in SLICE_DIMS)
        for dim, axis in zip(dims[1:], SLICE_DIMS):
            coords[dim] = _length_coord(da[axis].values, units, dim, axis, crs,
                                        named=fill_thickness is None and k == 0)
        values = to_output_units(da.transpose("stage", *SLICE_DIMS).values.astype(
            float, copy=False), units, "pressure")
        variables[f"dsz_{name}"] = (dims, values.astype(np.float32),
                                    {"units": p_label, "grid_mapping": GRID_MAPPING,
                                     "coverage_content_type": "modelResult",
                                     "long_name": f"vertical stress increase, plan grid {name}"})
        if sigma_v0 is not None and name in sigma_v0:
            variables[f"sigma_v0_{name}"] = (
                dims[1:2], _depth_profile(sigma_v0[name], da, units).astype(np.float32),
                {"units": p_label, "coverage_content_type": "modelResult",
                 "long_name": f"effective vertical stress before the fill, plan grid {name}"})
        if crs is not None:
            coords.update(_lonlat_coords(name, coords[dims[3]][1], coords[dims[2]][1], crs))
        if settlement is not None and name in settlement:
            variables[f"settlement_{name}"] = (
                dims[2:], _surface(settlement[name], da, units).astype(np.float32),
                {"units": udunits(unit_label(units, "settlement")), "grid_mapping": GRID_MAPPING,
                 "coverage_content_type": "modelResult",
                 "long_name": f"final settlement at the surface, plan grid {name}"})
    if fill_thickness is not None:
        t = _thickness(fill_thickness, grid, len(stages))
        coords["y"] = _length_coord(grid.y_centres, units, "y", "y", crs)
        coords["x"] = _length_coord(grid.x_centres, units, "x", "x", crs)
        variables["fill_thickness"] = (("stage", "y", "x"),
                                       to_output_units(t, units, "length").astype(np.float32),
                                       {"units": udunits(unit_label(units, "length")),
                                        "grid_mapping": GRID_MAPPING,
                                        "coverage_content_type": "modelResult",
                                        "long_name": "fill thickness (negative = cut)"})
    coords[GRID_MAPPING] = ((), np.int32(0), _crs_attrs(crs))
    ds = xr.Dataset(variables, coords={k: (v[0], v[1], v[2]) for k, v in coords.items()})
    ds = _north_up(ds)
    ds.attrs.update(_global_attrs(ds, units, crs), **dict(attrs or {}))
    return ds


def _north_up(ds):
    """`ds` sorted with every y axis descending (north first): a strictly ascending axis
    reversed as a view, which is that sorting without copying every variable."""
    ys = [d for d in ds.dims if d == "y" or d.startswith("y_")]
    steps = [np.diff(ds[d].values) for d in ys]
    if not all(np.all(s > 0) or np.all(s < 0) for s in steps):
        return ds.sortby(ys, ascending=False)
    return ds.isel({d: slice(None, None, -1) for d, s in zip(ys, steps) if s.size and s[0] > 0})


def _crs_attrs(crs) -> dict:
    if crs is None:
        return {"long_name": "no coordinate reference system (local plan coordinates)"}
    return cf_grid_mapping(crs)


def _lonlat_coords(name: str, x, y, crs) -> dict:
    """Longitude and latitude of each node of plan grid `name` (`x`, `y` in CRS units):
    the auxiliary coordinates CF recommends beside projected ones, so that a plan field
    (the settlement) is located without reading the grid mapping."""
    import pyproj

    gx, gy = np.meshgrid(x, y)
    to_ll = pyproj.Transformer.from_crs(as_crs(crs, "crs"), "EPSG:4326", always_xy=True)
    lon, lat = to_ll.transform(gx, gy)
    dims = (f"y_{name}", f"x_{name}")
    return {f"lat_{name}": (dims, lat, {"standard_name": "latitude", "units": "degrees_north",
                                        "long_name": f"latitude, plan grid {name}"}),
            f"lon_{name}": (dims, lon, {"standard_name": "longitude", "units": "degrees_east",
                                        "long_name": f"longitude, plan grid {name}"})}


def _global_attrs(ds, units: UnitSystem, crs) -> dict:
    """CF and ACDD discovery attributes that follow from the data (no clock time, so the
    same run writes the same file)."""
    attrs = {"Conventions": "CF-1.8, ACDD-1.3",
             "title": "Vertical stress increase below a fill",
             "summary": "Vertical stress increase in an elastic half-space (Boussinesq: "
                        "homogeneous; Westergaard: reinforced by thin rigid horizontal "
                        "layers) under flexible fill loads, on horizontal slices below "
                        "existing ground, with the fill thickness, for each construction "
                        "stage. " + CORE_CAUTION,
             "keywords": "vertical stress, fill, embankment, settlement, elastic half-space",
             "cdm_data_type": "Grid", "processing_level": "model output",
             "units_system": units.name}
    depths = [ds[d].values for d in ds.dims if d.startswith("depth_")]
    if depths:
        attrs.update(geospatial_vertical_min=float(min(d.min() for d in depths)),
                     geospatial_vertical_max=float(max(d.max() for d in depths)),
                     geospatial_vertical_units=udunits(unit_label(units, "length")),
                     geospatial_vertical_positive="down")
    if crs is not None:
        attrs.update(_lonlat_bounds(ds, crs))
    return attrs


def _lonlat_bounds(ds, crs) -> dict:
    import pyproj

    xs = np.concatenate([ds[d].values for d in ds.dims if d == "x" or d.startswith("x_")])
    ys = np.concatenate([ds[d].values for d in ds.dims if d == "y" or d.startswith("y_")])
    to_ll = pyproj.Transformer.from_crs(as_crs(crs, "crs"), "EPSG:4326", always_xy=True)
    w, s, e, n = to_ll.transform_bounds(xs.min(), ys.min(), xs.max(), ys.max())
    return {"geospatial_lon_min": w, "geospatial_lon_max": e, "geospatial_lat_min": s,
            "geospatial_lat_max": n, "geospatial_lon_units": "degree_east",
            "geospatial_lat_units": "degree_north"}


def _encoding(ds) -> dict:
    """Compressed data (zlib level 1 after shuffling: files 2 % larger than at level 4,
    written faster); coordinates without _FillValue (CF: coordinates have no gaps)."""
    enc = {v: {"zlib": True, "complevel": 1, "shuffle": True} for v in ds.data_vars}
    enc.update({c: {"_FillValue": None} for c in ds.coords})
    return enc


def write_stress_cube(path, slices: Mapping, *, grid: GridSpec | None = None,
                      fill_thickness=None, units: UnitSystem = SI, crs=None,
                      stages: Sequence[int] | None = None, attrs: Mapping | None = None,
                      sigma_v0: Mapping | None = None,
                      settlement: Mapping | None = None) -> os.PathLike:
    """Write :func:`stress_dataset` to NetCDF-4 (engine h5netcdf), atomically.

    Parameters
    ----------
    path : str or path-like
        Output ``.nc``.
    slices, grid, fill_thickness, units, crs, stages, attrs, sigma_v0, settlement
        As :func:`stress_dataset`.

    Returns
    -------
    path-like
        `path`.

    Examples
    --------
    >>> import tempfile, xarray as xr
    >>> from fillstress.units import US
    >>> da = xr.DataArray(np.full((1, 1, 1), 47.8802589803), dims=SLICE_DIMS,
    ...                   coords={"depth": [3.048], "y": [0.0], "x": [0.0]})
    >>> f = os.path.join(tempfile.mkdtemp(), "stress_cube.nc")
    >>> _ = write_stress_cube(f, {"plan": da}, units=US)
    >>> with xr.open_dataset(f, engine="h5netcdf") as ds:
    ...     round(float(ds["dsz_plan"][0, 0, 0, 0]), 3), float(ds["depth_plan"][0])
    (1000.0, 10.0)
    """
    ds = stress_dataset(slices, grid=grid, fill_thickness=fill_thickness, units=units, crs=crs,
                        stages=stages, attrs=attrs, sigma_v0=sigma_v0, settlement=settlement)
    return write_atomic(path, lambda tmp: _to_h5netcdf(ds, tmp))


def _to_h5netcdf(ds, path) -> None:
    """``ds.to_netcdf(path, engine="h5netcdf")`` with :func:`_encoding`, the same file,
    through xarray's store with HDF5's own lock: ``to_netcdf`` asks Dask which scheduler
    is active to choose its file lock, and that question loads dask.distributed (0.1 s
    of a sample run) even where no Dask is used. The data are loaded first: the store
    writes numpy arrays as it is given them (Dask arrays would wait for a sync)."""
    from xarray.backends import H5NetCDFStore
    from xarray.backends.locks import HDF5_LOCK
    ds = ds.load()
    store = H5NetCDFStore.open(path, mode="w", lock=HDF5_LOCK)
    try:
        ds.dump_to_store(store, encoding=_encoding(ds))
    finally:
        store.close()
