"""The stress cube: every plan-grid slice stack and the fill thickness in one NetCDF file.

Each plan grid ``<g>`` becomes a variable ``dsz_<g>`` on its own dimensions
``(depth_<g>, y_<g>, x_<g>)`` (grids need not share nodes); the fill thickness is
``fill_thickness (y, x)`` on the analysis-grid cell centres. Where the site has a soil
profile, ``sigma_v0_<g> (depth_<g>)`` holds σ'v0 at each slice depth (the same over the
plan: depths are below the existing ground; NaN below the stated profile) and
``settlement_<g> (y_<g>, x_<g>)`` the final settlement at the ground surface. Values and
depths are in the output unit system, plan coordinates in the site CRS's unit (internal metres scaled by its
axis factor); the CRS is carried CF-style in a ``crs`` variable (``crs_wkt``).
"""
from __future__ import annotations

import os
import re
from typing import Mapping

import numpy as np
import xarray as xr

from ..crs import as_crs
from ..errors import InputError
from ..grid import GridSpec
from ..units import SI, UnitSystem
from .atomic import write_atomic
from .tables import crs_unit_label, to_output_units, unit_label

_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_-]*$")
SLICE_DIMS = ("depth", "y", "x")


def _checked_slice(name: str, da):

    if not isinstance(name, str) or not _NAME.match(name):
        raise InputError(f"plan grid name must be letters, digits, '_' or '-', got {name!r}",
                         argument="slices")
    if not isinstance(da, xr.DataArray) or tuple(da.dims) != SLICE_DIMS:
        dims = getattr(da, "dims", type(da).__name__)
        raise InputError(f"slice stack {name!r} must be a DataArray with dims "
                         f"{SLICE_DIMS}, got {dims}", argument="slices")
    for dim in SLICE_DIMS:
        if dim not in da.coords:
            raise InputError(f"slice stack {name!r} has no {dim!r} coordinate",
                             argument="slices")
    if np.any(np.isinf(da.values)):
        raise InputError(f"slice stack {name!r} holds infinite values", argument="slices")
    return da


def _length_coord(values_m, units, name: str, axis: str, crs) -> tuple:
    """Depth in the unit system's length; plan axes in the CRS's unit (see plan_unit)."""
    quantity = "length" if axis == "depth" else "plan"
    exact = quantity == "plan" and crs is not None
    attrs = {"units": crs_unit_label(crs) if exact else unit_label(units, quantity, crs)}
    if axis == "depth":
        attrs.update(long_name="depth below existing ground", positive="down")
    else:
        attrs.update(standard_name=f"projection_{axis}_coordinate", axis=axis.upper())
    values = to_output_units(np.asarray(values_m, float), units, quantity, crs)
    return (name, values, attrs)


def stress_dataset(slices: Mapping, *, grid: GridSpec | None = None, fill_thickness=None,
                   units: UnitSystem = SI, crs=None, sigma_v0: Mapping | None = None,
                   settlement: Mapping | None = None):
    """Build (without writing) the cube as an :class:`xarray.Dataset` in output units.

    Parameters
    ----------
    slices : mapping of str to xarray.DataArray
        Plan-grid name → Δσz (kPa) with dims ``("depth", "y", "x")`` and coordinates in
        internal metres.
    grid : GridSpec, optional
        Analysis lattice, needed for `fill_thickness`; its CRS is used unless `crs` is given.
    fill_thickness : array_like, shape ``grid.shape``, optional
        Final fill thickness (m), row 0 south.
    units : UnitSystem
        Output unit system.
    crs : optional
        Coordinate reference system of x and y.
    sigma_v0 : mapping of str to array_like, optional
        Plan-grid name → σ'v0 (kPa) at each of that grid's slice depths.
    settlement : mapping of str to array_like, optional
        Plan-grid name → final surface settlement (m), shape (y, x) of that grid.

    Examples
    --------
    >>> import xarray as xr
    >>> da = xr.DataArray(np.zeros((1, 2, 3)), dims=SLICE_DIMS,
    ...                   coords={"depth": [2.0], "y": [0.0, 5.0], "x": [0.0, 5.0, 10.0]})
    >>> ds = stress_dataset({"plan": da})
    >>> dict(ds["dsz_plan"].sizes), ds["dsz_plan"].attrs["units"]
    ({'depth_plan': 1, 'y_plan': 2, 'x_plan': 3}, 'kPa')
    """

    if not slices:
        raise InputError("needs at least one plan grid", argument="slices")
    crs = crs if crs is not None else getattr(grid, "crs", None)
    variables, coords = {}, {}
    p_label = unit_label(units, "pressure")
    for name, da in slices.items():
        da = _checked_slice(name, da)
        dims = tuple(f"{d}_{name}" for d in SLICE_DIMS)
        for dim, axis in zip(dims, SLICE_DIMS):
            coords[dim] = _length_coord(da[axis].values, units, dim, axis, crs)
        variables[f"dsz_{name}"] = (dims, to_output_units(da.values.astype(float), units,
                                                          "pressure"),
                                    {"units": p_label, "grid_mapping": "crs",
                                     "long_name": f"vertical stress increase, plan grid {name}"})
        if sigma_v0 is not None and name in sigma_v0:
            variables[f"sigma_v0_{name}"] = (dims[:1], _depth_profile(sigma_v0[name], da, units),
                                             {"units": p_label, "long_name": "effective vertical "
                                              f"stress before the fill, plan grid {name}"})
        if settlement is not None and name in settlement:
            variables[f"settlement_{name}"] = (dims[1:], _surface(settlement[name], da, units),
                                               {"units": unit_label(units, "settlement"),
                                                "grid_mapping": "crs", "long_name":
                                                f"final settlement at the surface, plan grid {name}"})
    if fill_thickness is not None:
        if not isinstance(grid, GridSpec):
            raise InputError("a GridSpec is needed to place fill_thickness", argument="grid")
        t = np.asarray(fill_thickness, dtype=float)
        if t.shape != grid.shape or not np.all(np.isfinite(t)):
            raise InputError(f"must be finite with the grid shape {grid.shape}, got "
                             f"{t.shape}", argument="fill_thickness")
        coords["y"] = _length_coord(grid.y_centres, units, "y", "y", crs)
        coords["x"] = _length_coord(grid.x_centres, units, "x", "x", crs)
        variables["fill_thickness"] = (("y", "x"), to_output_units(t, units, "length"),
                                       {"units": unit_label(units, "length"),
                                        "grid_mapping": "crs",
                                        "long_name": "final fill thickness (negative = cut)"})
    variables["crs"] = ((), np.int32(0), _crs_attrs(crs))
    ds = xr.Dataset(variables, coords={k: (v[0], v[1], v[2]) for k, v in coords.items()})
    ds.attrs.update(Conventions="CF-1.8", title="fillstress stress cube", units_system=units.name)
    return ds


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


def _crs_attrs(crs) -> dict:
    if crs is None:
        return {"crs_wkt": ""}
    wkt = as_crs(crs, "crs").to_wkt()
    return {"crs_wkt": wkt, "spatial_ref": wkt}


def write_stress_cube(path, slices: Mapping, *, grid: GridSpec | None = None,
                      fill_thickness=None, units: UnitSystem = SI, crs=None,
                      sigma_v0: Mapping | None = None,
                      settlement: Mapping | None = None) -> os.PathLike:
    """Write :func:`stress_dataset` to NetCDF-4 (engine h5netcdf), atomically.

    Examples
    --------
    >>> import tempfile, xarray as xr
    >>> from fillstress.units import US
    >>> da = xr.DataArray(np.full((1, 1, 1), 47.8802589803), dims=SLICE_DIMS,
    ...                   coords={"depth": [3.048], "y": [0.0], "x": [0.0]})
    >>> f = os.path.join(tempfile.mkdtemp(), "stress_cube.nc")
    >>> _ = write_stress_cube(f, {"plan": da}, units=US)
    >>> with xr.open_dataset(f, engine="h5netcdf") as ds:
    ...     round(float(ds["dsz_plan"][0, 0, 0]), 6), float(ds["depth_plan"][0])
    (1000.0, 10.0)
    """
    ds = stress_dataset(slices, grid=grid, fill_thickness=fill_thickness, units=units, crs=crs,
                        sigma_v0=sigma_v0, settlement=settlement)
    return write_atomic(path, lambda tmp: ds.to_netcdf(tmp, engine="h5netcdf"))
