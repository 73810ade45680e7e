"""The Python API as a GeoPandas and xarray user meets it: point results as a GeoDataFrame
and plan grids in the site's units with the site CRS, on an invented US-customary site."""
import numpy as np
import pyproj
import pytest

from fillstress import InputError, compute, load_site, point_stresses, vertical_stress

FT_US = 1200 / 3937                 # metres per US survey foot (exact by definition)
PSF_IN_KPA = 0.45359237 * 9.80665 / 0.3048**2 / 1000.0  # NIST SP 811 definitions

SITE = """
# Invented: a square stockpile pad beside "Wenlow Mill", NAD83 / Massachusetts Mainland.
[site]
name = "Wenlow Mill pad"
crs = "EPSG:2249"
units = "US"

[grid]
cell = 5.0
margin = 40.0
convergence_check = false

[bodies.pad]
kind = "footprint"
outline = [[710000.0, 2960000.0], [710060.0, 2960000.0], [710060.0, 2960060.0],
           [710000.0, 2960060.0]]
height = 6.0
unit_weight = 120.0

[[boreholes]]
id = "WM-1"
x = 710030.0
y = 2960030.0
top = 0.0
bottom = 30.0
step = 15.0

[[plan_grids]]
name = "yard"
depths = [15.0]

[soil]
water_table = 5.0

[[soil.layers]]
name = "clay"
top = 0.0
bottom = 40.0
unit_weight = 110.0
saturated_unit_weight = 115.0
cc = 0.3
cr = 0.05
e0 = 1.0
ocr = 1.5
cv = 20.0
"""


@pytest.fixture(scope="module")
def site_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("wenlow") / "site.toml"
    path.write_text(SITE)
    return path


@pytest.fixture(scope="module")
def run(site_file):
    return compute(load_site(site_file))


def test_point_results_as_a_geodataframe_in_site_crs_and_units(site_file):
    res = point_stresses(site_file, [[710030.0, 2960030.0, 15.0], [710000.0, 2960000.0, 15.0]])
    gdf = res.to_geodataframe()
    assert list(gdf.columns) == ["stage", "depth_ft", "dsz_psf", "geometry"]
    assert gdf.crs == pyproj.CRS("EPSG:2249")
    assert gdf.geometry.x.tolist() == [710030.0, 710000.0]
    assert gdf["depth_ft"].tolist() == pytest.approx([15.0, 15.0])
    # Boussinesq under the centre of a 60 ft square at 15 ft: four corner rectangles with
    # m = n = 2, influence factor 0.2325 each (Newmark 1935, as tabulated in standard
    # foundation texts; value recalled from memory); q = 6 ft x 120 pcf = 720 psf.
    assert gdf["dsz_psf"][0] == pytest.approx(4 * 0.2325 * 720.0, rel=2e-3)
    # the corner: one rectangle of m = n = 4, influence factor 0.2473 (same table)
    assert gdf["dsz_psf"][1] == pytest.approx(0.2473 * 720.0, rel=2e-3)
    np.testing.assert_allclose(gdf["dsz_psf"] * PSF_IN_KPA, res.dsz, rtol=1e-12)
    # longitude and latitude through geopandas are pyproj's answer for the point
    lon, lat = pyproj.Transformer.from_crs(2249, 4326, always_xy=True).transform(
        710030.0, 2960030.0)
    ll = gdf.to_crs(4326).geometry[0]
    assert (ll.x, ll.y) == (pytest.approx(lon, abs=1e-9), pytest.approx(lat, abs=1e-9))


def test_plan_grid_in_site_units_with_the_site_crs(run):
    import rioxarray  # noqa: F401  (registers .rio)
    site = run.site
    da = run.plan_grid()
    assert da.dims == ("depth", "y", "x")
    assert da["depth"].values.tolist() == pytest.approx([15.0])
    assert da.attrs["units"] == "lbf ft-2" and da["x"].attrs["units"] == "US_survey_foot"
    assert da.rio.crs == pyproj.CRS("EPSG:2249")
    assert da.rio.resolution() == pytest.approx((5.0, -5.0))
    internal = run.slices["yard"]                       # SI, on the metre twin
    np.testing.assert_allclose(da["x"], internal["x"] / FT_US, rtol=0, atol=1e-6)
    # a node checked against direct summation over the load grid (metres, kPa)
    j, i = 7, 9
    x, y = float(da["x"][i]), float(da["y"][j])
    expected = vertical_stress(site.load_grid(), [[x * FT_US, y * FT_US, 15.0 * 0.3048]])[0]
    assert float(da.sel(depth=15.0).isel(y=j, x=i)) * PSF_IN_KPA == pytest.approx(
        expected, rel=1e-5)
    settlement = run.plan_grid(quantity="settlement")
    assert settlement.dims == ("y", "x") and settlement.attrs["units"] == "in"
    np.testing.assert_allclose(settlement.values * 0.0254,
                               np.flipud(run.plan_settlement["yard"].values), rtol=1e-5)
    # the internal SI grid says what it holds: metres of settlement, not the slice's kPa
    assert run.plan_settlement["yard"].attrs["units"] == "m"
    assert "settlement" in run.plan_settlement["yard"].attrs["long_name"]


def test_plan_grids_are_the_cube_and_wrong_names_are_refused(run):
    ds = run.plan_grids()
    assert ds.attrs["Conventions"] == "CF-1.8, ACDD-1.3"
    assert {"dsz_yard", "settlement_yard", "sigma_v0_yard", "fill_thickness"} <= set(ds)
    with pytest.raises(InputError, match="no plan grid 'reach'; the run has yard"):
        run.plan_grid("reach")
    with pytest.raises(InputError, match="no 'volume' on plan grid 'yard'"):
        run.plan_grid(quantity="volume")


@pytest.mark.parametrize("choice", ["wgs84", "site"])
def test_outputs_geojson_crs_chooses_the_geojson_coordinates(tmp_path, choice):
    import json

    from fillstress import run_site_file
    from fillstress.io.results import ResultsFolder
    site = tmp_path / "site.toml"
    site.write_text(SITE + f'\n[outputs]\ngeojson_crs = "{choice}"\nvtk = false\n'
                    'netcdf = false\ngeotiff = false\n')
    run_site_file(site, tmp_path / "out", report=False)
    doc = json.loads((tmp_path / "out" / "boreholes.geojson").read_text())
    manifest = json.loads((tmp_path / "out" / "manifest.json").read_text())
    x, y = doc["features"][0]["geometry"]["coordinates"][:2]
    if choice == "site":
        assert doc["crs"]["properties"]["name"].endswith("EPSG::2249")
        assert (x, y) == pytest.approx((710030.0, 2960030.0), abs=1e-6)
        assert manifest["settings"]["geojson_crs"] == "site"
    else:
        assert "crs" not in doc
        lon, lat = pyproj.Transformer.from_crs(2249, 4326, always_xy=True).transform(
            710030.0, 2960030.0)
        assert (x, y) == pytest.approx((lon, lat), abs=0.6e-7)     # 7 decimals
        assert manifest["settings"]["geojson_crs"] == "EPSG:4326"
    # either way the package's own reader gives site-CRS coordinates back
    point = ResultsFolder(tmp_path / "out").features("boreholes")[0].geometry
    assert (point.x, point.y) == pytest.approx((710030.0, 2960030.0), abs=0.03)


def test_a_misspelt_geojson_crs_is_refused_naming_the_key(tmp_path):
    site = tmp_path / "site.toml"
    site.write_text(SITE + '\n[outputs]\ngeojson_crs = "utm"\n')
    with pytest.raises(InputError, match=r"outputs.geojson_crs.*one of wgs84, site"):
        load_site(site)
