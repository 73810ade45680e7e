"""GeoTIFF writing: north-up flip on an asymmetric array, CRS, nodata, unit conversion."""
from __future__ import annotations

import numpy as np
import pytest
import rasterio

from fillstress import InputError
from fillstress.grid import GridSpec
from fillstress.io.geotiff import cog_problems, crs_transform, write_geotiff
from fillstress.units import US

GRID = GridSpec(4200.0, 9100.0, 2.0, 5.0, nx=4, ny=3, crs="EPSG:32633")
# Asymmetric: every value distinct, value = 10 * row + column, row 0 = south.
FIELD = 10.0 * np.arange(3)[:, None] + np.arange(4)[None, :]


def test_north_up_flip_and_georeferencing(tmp_path):
    path = write_geotiff(tmp_path / "fill_thickness.tif", FIELD, GRID, quantity="length",
                         description="fill thickness")
    with rasterio.open(path) as src:
        data = src.read(1)
        assert src.dtypes == ("float32",) and src.crs.to_epsg() == 32633
        assert data[0].tolist() == FIELD[-1].tolist()  # first file row = northern row
        # Sample every cell centre through the transform: value must be the memory cell.
        for j, y in enumerate(GRID.y_centres):
            for i, x in enumerate(GRID.x_centres):
                row, col = src.index(x, y)
                assert data[row, col] == FIELD[j, i]
        assert src.bounds == (4200.0, 9100.0, 4208.0, 9115.0)
        assert src.descriptions == ("fill thickness",)
        assert src.tags(1)["units"] == "m"


def test_nodata_only_where_nan(tmp_path):
    field = FIELD.copy()
    field[1, 2] = np.nan
    path = write_geotiff(tmp_path / "s.tif", field, GRID, quantity="pressure")
    with rasterio.open(path) as src:
        assert np.isnan(src.nodata)
        mask = src.read_masks(1) == 0
        assert mask.sum() == 1 and mask[3 - 1 - 1, 2]  # memory row 1 of 3 -> file row 1


def test_us_pressure_conversion(tmp_path):
    psf = 0.45359237 * 9.80665 / 0.3048**2 / 1000.0  # kPa per psf, exact definitions
    path = write_geotiff(tmp_path / "surface_pressure.tif", FIELD * psf, GRID,
                         quantity="pressure", units=US)
    with rasterio.open(path) as src:
        assert src.read(1)[::-1] == pytest.approx(FIELD, rel=1e-6)  # float32
        assert src.tags(1)["units"] == "psf"


def test_survey_foot_crs_transform(tmp_path):
    f = 1200 / 3937  # US survey foot in m (US Federal Register, 1959 notice)
    grid = GridSpec(1000 * f, 2000 * f, 10 * f, 10 * f, nx=4, ny=3, crs="EPSG:2263")
    path = write_geotiff(tmp_path / "t.tif", FIELD, grid, quantity="length", units=US)
    with rasterio.open(path) as src:
        assert src.bounds == pytest.approx((1000.0, 2000.0, 1040.0, 2030.0))
        assert src.crs.to_epsg() == 2263


@pytest.mark.parametrize("array, argument", [(np.zeros((4, 3)), "array"),
                                             (np.full((3, 4), np.inf), "array")])
def test_bad_arrays(tmp_path, array, argument):
    with pytest.raises(InputError) as err:
        write_geotiff(tmp_path / "x.tif", array, GRID, quantity="length")
    assert err.value.argument == argument
    assert not list(tmp_path.iterdir())


def test_cloud_optimized_with_overviews_and_band_unit(tmp_path):
    big = GridSpec(300000.0, 4500000.0, 2.0, 2.0, nx=600, ny=400, crs="EPSG:32633")
    values = np.add.outer(np.arange(400.0), np.arange(600.0))
    path = write_geotiff(tmp_path / "big.tif", values, big, quantity="pressure", units=US)
    assert cog_problems(path) == []
    with rasterio.open(path) as src:
        assert src.units == ("psf",)
        assert src.block_shapes == [(256, 256)] and src.overviews(1)
        structure = src.tags(ns="IMAGE_STRUCTURE")
        assert structure["COMPRESSION"] == "DEFLATE" and structure["PREDICTOR"] == "3"


def test_cog_check_finds_a_plain_striped_tiff(tmp_path):
    path = tmp_path / "plain.tif"
    with rasterio.open(path, "w", driver="GTiff", width=600, height=400, count=1,
                       dtype="float32") as dst:
        dst.write(np.zeros((400, 600), np.float32), 1)
    problems = cog_problems(path)
    assert "no GDAL COG header (LAYOUT=IFDS_BEFORE_DATA)" in problems
    assert "not tiled" in problems and "no overviews" in problems


def test_us_foot_lattice_is_round_in_the_crs():
    """4 ft asked on a US-survey-foot CRS: square 4 US ft cells at multiples of 4 US ft
    (the international foot would give 3.999992 US ft)."""
    us_ft = 1200.0 / 3937.0                # m per US survey foot (exact definition)
    spec = GridSpec.covering((950001.0, 60002.0, 950040.0, 60050.0), 4 * 0.3048,
                             unit=us_ft, crs="EPSG:2263")
    t = crs_transform(spec, "EPSG:2263")
    assert (t.a, -t.e) == (4.0, 4.0)
    assert t.c % 4 == 0 and t.f % 4 == 0
    sub = GridSpec(spec.x0 + 3 * spec.dx, spec.y0 + 2 * spec.dy, spec.dx, spec.dy, 2, 2)
    assert crs_transform(sub, "EPSG:2263").c == t.c + 12.0     # same lattice, exactly


def test_deflate_level_one_holds_what_the_default_level_held(tmp_path, monkeypatch):
    """Level 1 (fast) against GDAL's default level 6 (the earlier files): the same
    values, NaN, overviews, tags and georeferencing read back; still a COG."""
    from fillstress.io import geotiff
    rng = np.random.default_rng(3)
    grid = GridSpec(4200.0, 9100.0, 2.0, 5.0, nx=700, ny=300, crs="EPSG:32633")
    field = np.cumsum(rng.random(grid.shape), axis=1)
    field[:40, :90] = np.nan
    fast = write_geotiff(tmp_path / "fast.tif", field, grid, quantity="pressure", units=US,
                         description="dsz")
    earlier = {k: v for k, v in geotiff.COG_OPTIONS.items() if k != "level"}
    monkeypatch.setattr(geotiff, "COG_OPTIONS", earlier)
    slow = write_geotiff(tmp_path / "slow.tif", field, grid, quantity="pressure", units=US,
                         description="dsz")
    assert cog_problems(fast) == []
    with rasterio.open(fast) as a, rasterio.open(slow) as b:
        np.testing.assert_array_equal(a.read(1), b.read(1))
        assert a.overviews(1) == b.overviews(1) and a.overviews(1)
        assert (a.transform, a.crs, a.units, a.descriptions, a.tags(1)) == \
            (b.transform, b.crs, b.units, b.descriptions, b.tags(1))
        assert np.isnan(a.nodata) and np.isnan(b.nodata)
        assert a.profile["compress"] == b.profile["compress"] == "deflate"
        levels = len(a.overviews(1))
    for level in range(levels):
        with rasterio.open(fast, overview_level=level) as oa, \
                rasterio.open(slow, overview_level=level) as ob:
            np.testing.assert_array_equal(oa.read(1), ob.read(1))
