"""The NetCDF stress cube round-trips through xarray (engine h5netcdf), reads its CRS with
rioxarray, and passes the CF-1.8 and ACDD-1.3 checks of compliance-checker."""
from __future__ import annotations

import h5py
import numpy as np
import pyproj
import pytest
import xarray as xr

from fillstress import InputError
from fillstress.grid import GridSpec
from fillstress.io.netcdf import SLICE_DIMS, write_stress_cube
from fillstress.units import SI, US

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
        assert ds["dsz_plan"].dims == ("stage", "depth_plan", "y_plan", "x_plan")
        # y is stored north-up: the file's first row is the northern one
        np.testing.assert_array_equal(ds["dsz_plan"].values[0], plan.values[:, ::-1])
        np.testing.assert_array_equal(ds["dsz_strip-A"].values[0], strip.values[:, ::-1])
        np.testing.assert_array_equal(ds["y_strip-A"].values, [704, 703, 702, 701])
        np.testing.assert_array_equal(ds["depth_plan"].values, [2.0, 6.0])
        np.testing.assert_array_equal(ds["fill_thickness"].values[0], thickness[::-1])
        np.testing.assert_array_equal(ds["x"].values, GRID.x_centres)
        assert ds["dsz_plan"].attrs["units"] == "kPa"
        assert ds["depth_plan"].attrs["positive"] == "down"
        assert ds["depth_plan"].attrs["axis"] == "Z"
        assert pyproj.CRS.from_wkt(ds["spatial_ref"].attrs["crs_wkt"]).to_epsg() == 32633
        assert ds["spatial_ref"].attrs["grid_mapping_name"] == "transverse_mercator"
        assert ds["dsz_plan"].dtype == np.float32
        assert ds["dsz_plan"].encoding["zlib"] or ds["dsz_plan"].encoding.get("compression")
        # Value at a named node, by label: plan, depth 6, y 703, x 310
        assert float(ds["dsz_plan"].sel(stage=1, depth_plan=6.0, y_plan=703.0,
                                        x_plan=310.0)) == 100.0 + 10 + 2
    with h5py.File(path) as raw:           # CF: coordinates carry no _FillValue
        for name in ("x", "y", "stage", "depth_plan", "x_plan", "y_strip-A"):
            assert "_FillValue" not in raw[name].attrs, name


def test_every_stage_along_the_stage_axis(tmp_path):
    one = _stack([300.0, 305.0], [700.0], [2.0], 1.0)
    staged = xr.concat([one, 3 * one], dim="stage").assign_coords(stage=[1, 3])
    path = write_stress_cube(tmp_path / "c.nc", {"plan": staged}, grid=GRID,
                             fill_thickness=[np.ones((3, 5)), 2 * np.ones((3, 5))])
    with xr.open_dataset(path) as ds:
        assert ds["stage"].values.tolist() == [1, 3]
        np.testing.assert_allclose(ds["dsz_plan"].sel(stage=3), 3 * ds["dsz_plan"].sel(stage=1))
        assert float(ds["fill_thickness"].sel(stage=3).max()) == 2.0
    with pytest.raises(InputError, match="stage"):
        write_stress_cube(tmp_path / "d.nc", {"plan": staged}, stages=[1])


def test_rioxarray_finds_crs_and_north_up_transform(tmp_path):
    rioxarray = pytest.importorskip("rioxarray")  # in the test extra
    assert rioxarray
    plan = _stack([301.0, 303.0, 305.0], [701.0, 703.0], [2.0], 1.0)
    path = write_stress_cube(tmp_path / "c.nc", {"plan": plan}, grid=GRID,
                             fill_thickness=np.zeros((3, 5)))
    with xr.open_dataset(path) as ds:
        for var in ("dsz_plan", "fill_thickness"):
            assert ds[var].rio.crs.to_epsg() == 32633
        t = ds["dsz_plan"].rio.transform()
        assert (t.a, t.e, t.c, t.f) == (2.0, -2.0, 300.0, 704.0)   # cell edges, north-up


def _failures(path, checker: str):
    """(weight, check name, messages) of every failed check of compliance-checker."""
    from compliance_checker.runner import CheckSuite
    suite = CheckSuite()
    suite.load_all_available_checkers()
    groups, errors = suite.run_all(suite.load_dataset(str(path)), [checker], [])[checker]
    assert not errors, errors
    return [(r.weight, r.name, r.msgs) for r in groups if r.value[0] < r.value[1]]


def checker_problems(path) -> list:
    """compliance-checker's high-priority CF-1.8 and ACDD-1.3 failures of a cube, less the
    one ACDD asks that CF cannot answer: a standard_name for every variable (the CF table
    has none for a stress or fill thickness in soil, and only one x, y pair may carry the
    projection names)."""
    high = 3                                      # compliance-checker's HIGH priority
    cf = [f for f in _failures(path, "cf:1.8") if f[0] >= high]
    acdd = [f for f in _failures(path, "acdd:1.3") if f[0] >= high
            and not (f[1].startswith("variable") and f[2] == ["standard_name"])]
    return cf + acdd


@pytest.mark.parametrize("units, crs", [(SI, "EPSG:32633"), (US, "EPSG:2263")])
def test_cf_and_acdd_checks_pass(tmp_path, units, crs):
    pytest.importorskip("compliance_checker")     # in the test extra
    grid = GridSpec(300000.0, 4500000.0, 2.0, 2.0, nx=5, ny=3, crs=crs)
    one = _stack([300001.0, 300003.0], [4500001.0, 4500003.0], [1.0, 3.0], 1.0)
    staged = xr.concat([one, 2 * one], dim="stage").assign_coords(stage=[1, 2])
    path = write_stress_cube(tmp_path / "c.nc", {"plan": staged, "b": staged}, grid=grid,
                             fill_thickness=np.ones((2, 3, 5)), units=units,
                             attrs={"history": "test", "source": "test"},
                             sigma_v0={"plan": [20.0, np.nan]},
                             settlement={"plan": np.full((2, 2), 0.01)})
    assert checker_problems(path) == []
    if units is US:
        with xr.open_dataset(path) as ds:
            assert ds["x"].attrs["units"] == "US_survey_foot"
            assert ds["dsz_plan"].attrs["units"] == "lbf ft-2"
            assert ds["settlement_plan"].attrs["units"] == "in"
            assert ds["settlement_plan"].rio.crs is not None


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


def test_zlib_level_one_holds_what_level_four_held(tmp_path, monkeypatch):
    """The cube at zlib level 1 (fast) and at level 4 (the earlier files) read back the
    same, variable by variable, attributes included."""
    from fillstress.io import netcdf
    rng = np.random.default_rng(11)
    x, y = 300.0 + 2.0 * np.arange(120), 700.0 + 2.0 * np.arange(80)
    values = rng.random((3, 80, 120)) * 50
    values[:, :10] = np.nan
    plan = xr.DataArray(values, dims=SLICE_DIMS, coords={"depth": [1.0, 3.0, 7.0], "y": y,
                                                         "x": x})
    grid = GridSpec(299.0, 699.0, 2.0, 2.0, nx=120, ny=80, crs="EPSG:32633")
    args = {"grid": grid, "fill_thickness": rng.random((80, 120)), "units": US,
            "settlement": {"plan": values[0] / 1000}}
    fast = write_stress_cube(tmp_path / "fast.nc", {"plan": plan}, **args)
    level_four = netcdf._encoding

    def earlier(ds):
        enc = level_four(ds)
        return {k: {**v, "complevel": 4} if "complevel" in v else v for k, v in enc.items()}
    monkeypatch.setattr(netcdf, "_encoding", earlier)
    slow = write_stress_cube(tmp_path / "slow.nc", {"plan": plan}, **args)
    with xr.open_dataset(fast, engine="h5netcdf") as a, \
            xr.open_dataset(slow, engine="h5netcdf") as b:
        xr.testing.assert_identical(a, b)
        assert a["dsz_plan"].encoding["complevel"] == 1 and b["dsz_plan"].encoding["complevel"] == 4


@pytest.mark.parametrize("north_first", [False, True])
def test_north_up_by_reversing_is_the_sorted_dataset(north_first):
    """Reversing the y axes (a view) gives the dataset sorting them gave (the earlier
    way), axes already north-first and one-row grids included."""
    from fillstress.io import netcdf
    plan = _stack([300.0, 305.0, 310.0], [700.0, 703.0, 709.0], [2.0, 6.0], 100.0)
    row = _stack([301.0, 302.0], [701.0], [1.0], 50.0)
    if north_first:
        plan = plan.isel(y=slice(None, None, -1))
    ds = xr.Dataset({"dsz_plan": (("depth_plan", "y_plan", "x_plan"), plan.values),
                     "dsz_row": (("depth_row", "y_row", "x_row"), row.values)},
                    coords={"y_plan": plan["y"].values, "y_row": row["y"].values,
                            "x_plan": plan["x"].values, "x_row": row["x"].values})
    ys = ["y_plan", "y_row"]
    xr.testing.assert_identical(netcdf._north_up(ds), ds.sortby(ys, ascending=False))
    shuffled = ds.isel(y_plan=[1, 0, 2])                       # not a lattice: sorted
    xr.testing.assert_identical(netcdf._north_up(shuffled),
                                shuffled.sortby(ys, ascending=False))


def test_the_cube_is_the_file_to_netcdf_writes(tmp_path):
    """The store written directly (no Dask scheduler asked for a lock) gives the file
    xarray's own ``to_netcdf`` gives: the same data, attributes, encodings and HDF5
    filters, variable by variable, and a Dask-chunked dataset loses nothing."""
    from fillstress.io import netcdf
    plan = _stack([300.0, 305.0, 310.0], [700.0, 703.0], [2.0, 6.0], 100.0)
    ds = netcdf.stress_dataset({"plan": plan}, grid=GRID, fill_thickness=np.ones((3, 5)))
    netcdf._to_h5netcdf(ds.chunk({"x": 2}), tmp_path / "direct.nc")
    ds.to_netcdf(tmp_path / "xarray.nc", engine="h5netcdf", encoding=netcdf._encoding(ds))
    with xr.open_dataset(tmp_path / "direct.nc", engine="h5netcdf") as a, \
            xr.open_dataset(tmp_path / "xarray.nc", engine="h5netcdf") as b:
        xr.testing.assert_identical(a, b)
    with h5py.File(tmp_path / "direct.nc") as a, h5py.File(tmp_path / "xarray.nc") as b:
        assert sorted(a) == sorted(b) and dict(a.attrs).keys() == dict(b.attrs).keys()
        for name in a:
            assert dict(a[name].attrs).keys() == dict(b[name].attrs).keys(), name
            assert (a[name].compression, a[name].shuffle) == (b[name].compression,
                                                              b[name].shuffle), name
