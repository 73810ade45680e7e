"""manifest.json: checksums, fields, and a whole results folder read back by the report's reader."""
from __future__ import annotations

import datetime as dt
import hashlib
import json

import numpy as np
import pyproj
import pytest
import xarray as xr
from shapely.geometry import box

import fillstress
from fillstress import InputError
from fillstress.grid import GridSpec
from fillstress.io import (ResultsWriter, build_manifest, sha256_file, write_geotiff,
                           write_manifest, write_points_geojson, write_stress_cube,
                           write_table_csv)
from fillstress.io.netcdf import SLICE_DIMS
from fillstress.site.receptors import building_points, summarise
from fillstress.units import SI, US


def test_sha256_against_published_vectors(tmp_path):
    # FIPS 180-2 (2002), appendix B.1: SHA-256("abc"); and the well-known digest of b"".
    (tmp_path / "abc").write_bytes(b"abc")
    (tmp_path / "empty").write_bytes(b"")
    assert sha256_file(tmp_path / "abc") == (
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad")
    assert sha256_file(tmp_path / "empty") == (
        "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855")


def test_sha256_reads_in_chunks_like_hashlib(tmp_path):
    data = np.random.default_rng(1).bytes(3_000_001)
    (tmp_path / "big").write_bytes(data)
    assert sha256_file(tmp_path / "big", chunk_size=4096) == hashlib.sha256(data).hexdigest()


def test_missing_file_is_an_input_error(tmp_path):
    with pytest.raises(InputError, match="file not found"):
        sha256_file(tmp_path / "gone.toml")


def test_manifest_fields(tmp_path):
    site = tmp_path / "site.toml"
    site.write_text("# invented\n")
    grid = GridSpec(1000 * 1200 / 3937, 0.0, 3.048, 3.048, 10, 5, crs="EPSG:2263")
    when = dt.datetime(2031, 3, 2, 8, 30, tzinfo=dt.timezone(dt.timedelta(hours=2)))
    m = build_manifest(settings={"method": "boussinesq", "depths_m": np.array([2.0, 5.0]),
                                 "cell": np.float32(3.048), "n": np.int64(4)},
                       units=US, inputs=[site], site_file=site, grid=grid,
                       assumptions="linear elastic half-space", cautions="invented data",
                       created=when)
    assert m["program"] == "fillstress" and m["version"] == fillstress.__version__
    assert m["created"] == "2031-03-02T06:30:00+00:00"  # converted to UTC
    assert m["inputs"] == {str(site): hashlib.sha256(b"# invented\n").hexdigest()}
    assert m["settings"]["depths_m"] == [2.0, 5.0] and m["settings"]["n"] == 4
    assert m["units"] == {"system": "US", "length": "ft", "pressure": "psf",
                          "unit_weight": "pcf", "settlement": "in", "plan": "ftUS"}
    assert m["grid"]["x0"] == pytest.approx(1000.0) and m["grid"]["unit"] == "ftUS"
    assert m["grid"]["dx"] == pytest.approx(3.048 * 3937 / 1200)
    assert pyproj.CRS.from_wkt(m["crs"]).to_epsg() == 2263
    json.dumps(m, allow_nan=False)  # plain JSON throughout


@pytest.mark.parametrize("settings, key", [({"cell": float("nan")}, "cell"),
                                           ({"a": {"b": object()}}, "a.b"),
                                           ({"d": [1.0, float("inf")]}, "d[1]")])
def test_settings_that_json_cannot_hold(settings, key):
    with pytest.raises(InputError) as err:
        build_manifest(settings=settings)
    assert err.value.key == key


def test_naive_time_is_refused():
    with pytest.raises(InputError, match="time zone"):
        build_manifest(settings={}, created=dt.datetime(2031, 1, 1))


def _invented_run(out: ResultsWriter, units):
    """A small results folder: a building's points, a slice raster and the cube."""
    grid = GridSpec(640.0, 310.0, 2.0, 2.0, nx=6, ny=4, crs="EPSG:32633")
    pts = building_points("Ropewalk", box(642, 312, 650, 316), 1.0, profile_depths=[3.0])
    pts["dsz"] = np.linspace(5.0, 40.0, len(pts))
    write_table_csv(out.path("buildings_points.csv"), pts, units, crs=grid.crs)
    write_points_geojson(out.path("buildings_points.geojson"), pts, units, crs=grid.crs)
    write_table_csv(out.path("buildings_summary.csv"), summarise(pts, "dsz"), units,
                    crs=grid.crs)
    slab = 10.0 * np.arange(4)[:, None] + np.arange(6)[None, :]
    write_geotiff(out.path("fill_thickness.tif"), slab / 10.0, grid, quantity="length",
                  units=units)
    write_geotiff(out.path("slices/dsz_plan_z02.00m.tif"), slab, grid, quantity="pressure",
                  units=units)
    da = xr.DataArray(slab[None], dims=SLICE_DIMS,
                      coords={"depth": [2.0], "y": grid.y_centres, "x": grid.x_centres})
    write_stress_cube(out.path("stress_cube.nc"), {"plan": da}, grid=grid,
                      fill_thickness=slab / 10.0, units=units)
    write_manifest(out, settings={"method": "boussinesq"}, units=units, grid=grid)
    return pts, slab, grid


def test_manifest_lists_every_output_and_checksums_hold_after_commit(tmp_path):
    with ResultsWriter(tmp_path / "run") as out:
        _invented_run(out, SI)
    run = tmp_path / "run"
    manifest = json.loads((run / "manifest.json").read_text())
    on_disk = sorted(p.relative_to(run).as_posix() for p in run.rglob("*")
                     if p.is_file() and p.name != "manifest.json")
    assert sorted(manifest["outputs"]) == on_disk
    for rel, digest in manifest["outputs"].items():
        assert hashlib.sha256((run / rel).read_bytes()).hexdigest() == digest


def test_report_reader_understands_the_written_folder(tmp_path):
    """Contract check: the report's reader (fillstress.io.results) reads our files."""
    from fillstress.io.results import ResultsFolder as Reader

    with ResultsWriter(tmp_path / "run") as out:
        pts, slab, grid = _invented_run(out, SI)
    folder = Reader(tmp_path / "run")
    assert folder.units.pressure == "kPa"
    table = folder.point_tables()["buildings"]
    assert table[folder.column(table, "dsz", "pressure", name="buildings_points")].tolist() == \
        pytest.approx(pts["dsz"].tolist(), rel=5e-6)     # the CSV keeps 6 significant digits
    assert table[folder.column(table, "x", "length", name="buildings_points")].tolist() == \
        pytest.approx(pts["x"].tolist())
    slices = folder.plan_slices("dsz")
    assert [(s.grid, s.depth) for s in slices] == [("plan", 2.0)]
    np.testing.assert_allclose(slices[0].values, slab)
    np.testing.assert_allclose(slices[0].x, grid.x_centres)
    thick = folder.fill_thickness()
    np.testing.assert_allclose(thick.values, slab / 10.0, rtol=1e-6)  # float32 GeoTIFF
    np.testing.assert_allclose(thick.y, grid.y_centres)


def test_outputs_are_computed_not_passed(tmp_path):
    with pytest.raises(InputError):
        write_manifest(tmp_path, settings={}, outputs={})
    with pytest.raises(InputError, match="does not exist"):
        write_manifest(tmp_path / "none", settings={})


def test_unusable_crs_is_refused_alike_by_every_writer():
    """The manifest, the NetCDF cube and the GeoTIFF CRS all parse through fillstress.crs."""
    from fillstress.io.geotiff import rasterio_crs
    from fillstress.io.netcdf import stress_dataset

    da = xr.DataArray(np.zeros((1, 1, 1)), dims=SLICE_DIMS,
                      coords={"depth": [1.0], "y": [0.0], "x": [0.0]})
    for call in (lambda crs: build_manifest(settings={}, crs=crs),
                 lambda crs: stress_dataset({"plan": da}, crs=crs),
                 rasterio_crs):
        for bad in ("EPSG:0", object()):
            with pytest.raises(InputError, match="argument crs: is not a coordinate reference"):
                call(bad)


def test_second_manifest_reads_only_new_or_replaced_files(tmp_path, monkeypatch):
    """A ResultsWriter's second manifest reuses the digests of files unchanged since its
    first and reads again a file replaced meanwhile (same size, new content): its
    checksums equal reading every file afresh (the earlier way)."""
    from fillstress.io import manifest
    from fillstress.io.atomic import write_atomic
    from fillstress.io.manifest import output_checksums
    read = []
    plain = manifest.sha256_file
    monkeypatch.setattr(manifest, "sha256_file", lambda p: read.append(p.name) or plain(p))
    with ResultsWriter(tmp_path / "run") as out:
        _invented_run(out, SI)
        first = len(read)
        csv = out.path("buildings_summary.csv")
        text = csv.read_text()
        write_atomic(csv, lambda tmp: tmp.write_text(text.replace("Ropewalk", "Ropewalx")))
        write_atomic(out.path("report.html"), lambda tmp: tmp.write_text("<p>new</p>"))
        write_manifest(out, settings={"method": "boussinesq"}, units=SI)
        assert sorted(read[first:]) == ["buildings_summary.csv", "report.html"]
        written = json.loads(out.path("manifest.json").read_text())["outputs"]
        assert written == output_checksums(out.root)
