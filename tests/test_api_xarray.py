"""stress_slices returns a DataArray that xarray and rioxarray users can use as is: CF
attributes on every coordinate, the load grid's CRS as a CF grid mapping."""
import numpy as np
import pytest

from fillstress import LoadGrid, stress_slices


def test_slices_carry_cf_coordinates_and_the_crs(tmp_path):
    rioxarray = pytest.importorskip("rioxarray")   # in the test extra
    assert rioxarray
    grid = LoadGrid(np.full((4, 5), 50.0), 500000.0, 5500000.0, 2.0, 2.0, crs="EPSG:32633")
    da = stress_slices(grid, [2.0, 5.0])
    assert {"units": "m", "positive": "down", "axis": "Z"}.items() <= da["depth"].attrs.items()
    assert da["x"].attrs["standard_name"] == "projection_x_coordinate"
    assert da["y"].attrs["axis"] == "Y"
    assert da.rio.crs.to_epsg() == 32633
    assert da.rio.resolution() == (2.0, 2.0)          # y ascending: row 0 is the south
    out = tmp_path / "slice.tif"
    da.isel(depth=0).sortby("y", ascending=False).rio.to_raster(out)
    import rasterio
    with rasterio.open(out) as src:
        assert src.crs.to_epsg() == 32633 and src.transform.e == -2.0
        assert src.transform.f == 5500008.0


def test_no_crs_no_grid_mapping():
    da = stress_slices(LoadGrid(np.ones((2, 2)), 0.0, 0.0, 1.0, 1.0), [1.0])
    assert "spatial_ref" not in da.coords and "grid_mapping" not in da.attrs
