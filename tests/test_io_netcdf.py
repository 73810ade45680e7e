"""The NetCDF stress cube round-trips through xarray (engine h5netcdf)."""
from __future__ import annotations

import numpy as np
import pyproj
import pytest
import xarray as xr

from fillstress import InputError
from fillstress.grid import GridSpec
from fillstress.io.netcdf import SLICE_DIMS, write_stress_cube
from fillstress.units import US

GRID = GridSpec(300.0, 700.0, 2.0, 2.0, nx=5, ny=3, crs="EPSG:32633")


def _stack(x, y, depths, scale):
    values = (scale * np.arange(len(depths))[:, None, None] + 10 * np.arange(len(y))[:, None]
              + np.arange(len(x))[None, :])
    return xr.DataArray(values.astype(float), dims=SLICE_DIMS,
                        coords={"depth": depths, "y": y, "x": x})


def test_two_grids_and_thickness_round_trip(tmp_path):
    plan = _stack([300.0, 305.0, 310.0], [700.0, 703.0], [2.0, 6.0], 100.0)
    strip = _stack([301.0, 302.0], [701.0, 702.0, 703.0, 704.0], [1.0], 50.0)
    thickness = np.arange(15.0).reshape(3, 5)
    path = write_stress_cube(tmp_path / "stress_cube.nc", {"plan": plan, "strip-A": strip},
                             grid=GRID, fill_thickness=thickness)
    with xr.open_dataset(path, engine="h5netcdf") as ds:
        assert ds["dsz_plan"].dims == ("depth_plan", "y_plan", "x_plan")
        np.testing.assert_array_equal(ds["dsz_plan"].values, plan.values)
        np.testing.assert_array_equal(ds["dsz_strip-A"].values, strip.values)
        np.testing.assert_array_equal(ds["y_strip-A"].values, [701, 702, 703, 704])
        np.testing.assert_array_equal(ds["depth_plan"].values, [2.0, 6.0])
        np.testing.assert_array_equal(ds["fill_thickness"].values, thickness)
        np.testing.assert_array_equal(ds["x"].values, GRID.x_centres)
        assert ds["dsz_plan"].attrs["units"] == "kPa"
        assert ds["depth_plan"].attrs["positive"] == "down"
        assert pyproj.CRS.from_wkt(ds["crs"].attrs["crs_wkt"]).to_epsg() == 32633
        # Value at a named node, by label: plan, depth 6, y 703, x 310
        assert float(ds["dsz_plan"].sel(depth_plan=6.0, y_plan=703.0, x_plan=310.0)) == \
            100.0 + 10 + 2


def test_us_units(tmp_path):
    psf = 0.45359237 * 9.80665 / 0.3048**2 / 1000.0  # kPa per psf from exact definitions
    da = xr.DataArray(np.full((1, 1, 2), 500 * psf), dims=SLICE_DIMS,
                      coords={"depth": [3.048], "y": [0.0], "x": [0.0, 3.048]})
    path = write_stress_cube(tmp_path / "c.nc", {"plan": da}, units=US)
    with xr.open_dataset(path, engine="h5netcdf") as ds:
        assert ds["dsz_plan"].values == pytest.approx(500.0)
        assert ds["depth_plan"].values == pytest.approx([10.0])
        assert ds["x_plan"].values == pytest.approx([0.0, 10.0])  # no CRS: length unit
        assert ds["dsz_plan"].attrs["units"] == "psf"
        assert ds.attrs["units_system"] == "US"


@pytest.mark.parametrize("slices", [
    {},
    {"plan": xr.DataArray(np.zeros((2, 2)), dims=("y", "x"))},
    {"bad name": _stack([0.0], [0.0], [1.0], 1.0)},
    {"plan": _stack([0.0], [0.0], [1.0], 1.0) + np.inf},
    {"plan": np.zeros((1, 1, 1))},
])
def test_bad_slices(tmp_path, slices):
    with pytest.raises(InputError):
        write_stress_cube(tmp_path / "c.nc", slices)
    assert not list(tmp_path.iterdir())


def test_thickness_needs_its_grid(tmp_path):
    da = _stack([0.0], [0.0], [1.0], 1.0)
    with pytest.raises(InputError, match="GridSpec"):
        write_stress_cube(tmp_path / "c.nc", {"plan": da}, fill_thickness=np.zeros((3, 5)))
    with pytest.raises(InputError, match="grid shape"):
        write_stress_cube(tmp_path / "c.nc", {"plan": da}, grid=GRID,
                          fill_thickness=np.zeros((5, 3)))
