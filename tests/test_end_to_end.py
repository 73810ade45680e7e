"""End to end: each bundled sample site runs from the command line into a temporary
folder; every output opens with its reader and agrees with an in-process computation."""
import json
import shutil

import numpy as np
import pandas as pd
import pytest

from fillstress.cli import main
from fillstress.examples import example_site, list_examples
from fillstress.io.tables import geojson_decimals
from fillstress.site.build import load_site
from fillstress.solve import vertical_stress
from test_io_netcdf import checker_problems
from test_io_tables import rfc7946_problems

SITES = ["stockpile_yard", "bridge_approach", "preload_surcharge"]


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    root = tmp_path_factory.mktemp("runs")
    out = {}
    for name in SITES:
        folder = root / name
        code = main(["run", str(example_site(name)), "-o", str(folder), "--quiet"])
        assert code == 0
        out[name] = folder
    return out


def test_every_sample_site_is_listed_with_a_readme():
    names = [row[0] for row in list_examples()]
    assert names == sorted(SITES)
    for name in SITES:
        assert (example_site(name).parent / "README.md").read_text().strip()


@pytest.mark.parametrize("name", SITES)
def test_scene_page_is_small_named_and_has_every_quantity(runs, name):
    """scene.html stays under 5 MB, carries the site's name in its title, and the cube's
    σ'v0 profile gives σ'v0 and Δσz / σ'v0 slices (every sample site has a soil profile)."""
    import html as html_lib
    import re
    from fillstress.io.results import ResultsFolder
    folder = runs[name]
    page = (folder / "scene.html").read_text(encoding="utf-8")
    assert (folder / "scene.html").stat().st_size <= 5_000_000
    site = json.loads((folder / "summary.json").read_text())["site"]["name"]
    title = html_lib.unescape(re.search(r"<title>(.*?)</title>", page).group(1))
    assert title.startswith(site)
    results = ResultsFolder(folder)
    for quantity in ("sigma_v0", "stress_ratio"):
        assert len(results.plan_slices(quantity)) == len(results.plan_slices("dsz"))


@pytest.mark.parametrize("name", SITES)
def test_outputs_exist_and_open(runs, name):
    import geopandas as gpd
    import pyvista as pv
    import rasterio
    import xarray as xr

    folder = runs[name]
    manifest = json.loads((folder / "manifest.json").read_text())
    for rel in manifest["outputs"]:
        assert (folder / rel).is_file(), rel
    assert {"manifest.json", "summary.json", "bodies.csv", "report.html", "scene.html",
            "stress_cube.nc", "fill_thickness.tif"} <= {p.name for p in folder.iterdir()}
    tifs = sorted((folder / "slices").glob("*.tif"))
    assert tifs
    for tif in tifs:
        with rasterio.open(tif) as src:
            band = src.read(1)
            # a settlement plan leaves nodes below the stated cut-off as nodata (NaN)
            known = band[np.isfinite(band)] if tif.name.startswith("settlement_") else band
            assert src.crs is not None and np.isnan(src.nodata) and known.size > 0
            assert np.isfinite(known).all() and known.max() > 0
    with xr.open_dataset(folder / "stress_cube.nc") as cube:
        assert any(v.startswith("dsz_") for v in cube.data_vars)
    _rasters_share_one_round_lattice(folder)
    assert checker_problems(folder / "stress_cube.nc") == []      # CF-1.8 and ACDD-1.3
    _geopackage_holds_every_vector_layer(folder, name)
    for vtk_file in (folder / "vtk").rglob("*.vt[pr]"):
        assert pv.read(vtk_file).n_points > 0
    bundle = pv.read(folder / "vtk" / "run.vtm")          # the whole run in one file
    assert {"fill_surface", *(f"stress_{g}" for g in _plan_grids(folder))} <= set(bundle.keys())
    assert all(bundle[k].n_points > 0 for k in bundle.keys())
    with xr.open_dataset(folder / "stress_cube.nc") as cube:
        for g in _plan_grids(folder):                        # the cube's surface settlement
            if f"settlement_{g}" not in cube:
                continue
            surface = bundle[f"settlement_{g}"]
            column = next(c for c in surface.point_data.keys() if c.startswith("settlement_"))
            assert column == f"settlement_{cube[f'settlement_{g}'].attrs['units']}"
            np.testing.assert_allclose(np.nanmax(surface[column]),
                                       float(cube[f"settlement_{g}"].max()), rtol=1e-6)
    if (folder / "vtk" / "run.pvd").exists():               # stages as time steps
        assert pv.get_reader(folder / "vtk" / "run.pvd").time_values == \
            [float(k) for k in load_site(example_site(name)).stages]
    for geo in folder.glob("*_points.geojson"):
        frame = gpd.read_file(geo)
        assert len(frame) > 0 and frame.crs.to_epsg() == 4326
    assert manifest["settings"]["geojson_crs"] == "EPSG:4326"
    cell = manifest["settings"]["cell_m"]
    for geo in folder.glob("*.geojson"):                    # RFC 7946, rounded to the cell
        assert rfc7946_problems(json.loads(geo.read_text()), geojson_decimals(cell)) == [], geo
    # no half-written temporary files or partial folders left behind
    assert not list(folder.parent.glob(".*partial*"))
    assert not [p for p in folder.rglob("*") if ".tmp" in p.name]


@pytest.mark.parametrize("name", SITES)
def test_point_tables_agree_with_in_process_solution(runs, name):
    site = load_site(example_site(name))
    u = site.units
    p_col, l_col = f"dsz_{u.pressure}", f"depth_{u.length}"
    for csv in runs[name].glob("*_points.csv"):
        table = pd.read_csv(csv)
        xyz = np.column_stack([table[f"x_{u.length}"] * site.metres_per_unit,
                               table[f"y_{u.length}"] * site.metres_per_unit,
                               table[l_col] * u.length_to_m])
        expected = vertical_stress(site.load_grid(), xyz, method=site.method,
                                   poisson=site.poisson)
        # The CSV keeps 6 significant digits of Δσz and 6 decimals of x, y, depth.
        np.testing.assert_allclose(table[p_col] * u.pressure_to_kpa, expected,
                                   rtol=1e-5, atol=1e-5 * max(1.0, expected.max()))


def test_geotiff_slice_matches_points_in_crs_units(runs):
    """The US-survey-foot site: raster georeferencing in CRS units, values in psf."""
    import rasterio
    site = load_site(example_site("bridge_approach"))
    tif = sorted((runs["bridge_approach"] / "slices").glob("*z05.00ft.tif"))[0]
    with rasterio.open(tif) as src:
        band = src.read(1)
        row, col = np.unravel_index(np.argmax(band), band.shape)
        x, y = src.xy(row, col)            # site-CRS units (US survey feet)
    xyz = [[x * site.metres_per_unit, y * site.metres_per_unit, 5.0 * 0.3048]]
    expected = vertical_stress(site.load_grid(), xyz)[0] / site.units.pressure_to_kpa
    assert band[row, col] == pytest.approx(expected, rel=1e-5)


@pytest.mark.parametrize("name", SITES)
def test_every_file_uses_the_same_site_crs_coordinates(runs, name):
    """CSV, NetCDF and GeoTIFF agree on plan coordinates (site-CRS units), the RFC 7946
    GeoJSON comes back to them with pyproj within its rounding, and the site file's own
    vertices come back unchanged."""
    import geopandas as gpd
    import rasterio
    import xarray as xr
    folder = runs[name]
    site = load_site(example_site(name))
    u = site.units.length
    # half a unit of the last decimal in lon and lat, 111.7 km a degree at most
    tolerance = 0.5 * 10.0 ** -geojson_decimals(site.spec.dx) * 111_700 * np.sqrt(2) \
        / site.metres_per_unit
    for csv in folder.glob("*_points.csv"):
        table = pd.read_csv(csv)
        geo = gpd.read_file(csv.with_suffix(".geojson")).to_crs(site.crs)
        np.testing.assert_allclose(geo.geometry.x, table[f"x_{u}"], rtol=0, atol=tolerance)
        np.testing.assert_allclose(geo.geometry.y, table[f"y_{u}"], rtol=0, atol=tolerance)
    with rasterio.open(folder / "fill_thickness.tif") as src, \
            xr.open_dataset(folder / "stress_cube.nc") as cube:
        x_first = src.xy(0, 0)[0]
        assert float(cube["x"][0]) == pytest.approx(x_first, abs=1e-6)
    if name == "bridge_approach":          # sewer start vertex as typed in site.toml
        pipe = pd.read_csv(folder / "pipes_points.csv").iloc[0]
        assert (pipe["x_ft"], pipe["y_ft"]) == pytest.approx((3115473.5, 10071841.2), abs=1e-6)
        house = gpd.read_file(folder / "layers.gpkg", layer="buildings").geometry[0]
        assert house.exterior.coords[0] == pytest.approx((3115579.7, 10072298.8), abs=1e-6)
        house = gpd.read_file(folder / "buildings.geojson").to_crs(site.crs).geometry[0]
        assert np.linalg.norm(np.array(house.exterior.coords) - (3115579.7, 10072298.8),
                              axis=1).min() < tolerance


def _plan_grids(folder):
    import xarray as xr
    with xr.open_dataset(folder / "stress_cube.nc") as cube:
        return [v[len("dsz_"):] for v in cube.data_vars if v.startswith("dsz_")]


def _geopackage_holds_every_vector_layer(folder, name):
    """layers.gpkg: one layer per GeoJSON file, in the site CRS, receptors with results,
    no text column without a value."""
    import geopandas as gpd

    site_crs = load_site(example_site(name)).crs
    layers = set(gpd.list_layers(folder / "layers.gpkg")["name"])
    assert layers == {p.stem for p in folder.glob("*.geojson")}
    for layer in layers:
        frame = gpd.read_file(folder / "layers.gpkg", layer=layer)
        assert frame.crs == gpd.GeoSeries([], crs=site_crs).crs, layer
        for col in frame.columns.drop("geometry"):
            assert not frame[col].isna().all() or frame[col].dtype.kind == "f", (layer, col)
    if "buildings" in layers:
        buildings = gpd.read_file(folder / "layers.gpkg", layer="buildings")
        assert any(c.startswith("dsz_max") for c in buildings.columns)
        assert buildings.geometry.geom_type.eq("Polygon").all()
        # the GeoJSON of the same layer carries the same results
        geojson = gpd.read_file(folder / "buildings.geojson")
        assert list(geojson.columns) == list(buildings.columns)
        for col in buildings.columns.drop("geometry"):
            if buildings[col].dtype.kind == "f":      # GeoJSON reads an all-null column as None
                np.testing.assert_allclose(geojson[col].astype(float), buildings[col])
            else:
                assert geojson[col].tolist() == buildings[col].tolist(), col


def _rasters_share_one_round_lattice(folder):
    """Every GeoTIFF: a valid COG with a band unit, square pixels, and its origin a whole
    number of pixels from the fill raster's (one lattice for the run)."""
    import rasterio

    from fillstress.io.geotiff import cog_problems

    with rasterio.open(folder / "fill_thickness.tif") as ref:
        base = ref.transform
    assert base.a == -base.e
    for tif in [folder / "fill_thickness.tif", *sorted((folder / "slices").glob("*.tif"))]:
        assert cog_problems(tif) == [], tif.name
        with rasterio.open(tif) as src:
            t = src.transform
            assert src.units[0], tif.name
            assert t.a == -t.e and (t.a / base.a) == round(t.a / base.a), tif.name
            for shift in ((t.c - base.c) / base.a, (base.f - t.f) / base.a):
                assert shift == round(shift), (tif.name, shift)


def test_failed_run_leaves_previous_results_intact(tmp_path, monkeypatch):
    site = example_site("preload_surcharge")
    out = tmp_path / "res"
    assert main(["run", str(site), "-o", str(out), "--quiet", "--no-report"]) == 0
    before = {p.relative_to(out): p.read_bytes() for p in out.rglob("*") if p.is_file()}

    from fillstress.run import files as writers

    def boom(*args, **kwargs):
        raise RuntimeError("disk pulled out mid-run")
    monkeypatch.setattr(writers, "_write_vtk", boom)
    code = main(["run", str(site), "-o", str(out), "--quiet", "--no-report", "--overwrite"])
    assert code == 1
    after = {p.relative_to(out): p.read_bytes() for p in out.rglob("*") if p.is_file()}
    assert after == before
    assert not list(tmp_path.glob(".*partial*"))


def test_existing_results_are_not_overwritten_without_asking(tmp_path, capsys):
    out = tmp_path / "res"
    out.mkdir()
    (out / "keep.txt").write_text("earlier run")
    code = main(["run", str(example_site("preload_surcharge")), "-o", str(out), "--quiet"])
    assert code == 2
    assert "--overwrite" in capsys.readouterr().err
    assert (out / "keep.txt").read_text() == "earlier run"


def _copy_site(tmp_path, name="stockpile_yard"):
    dst = tmp_path / name
    shutil.copytree(example_site(name).parent, dst)
    return dst / "site.toml"


@pytest.mark.parametrize("edit, words", [
    (lambda t: t.replace('file = "buildings.geojson"', 'file = "missing.geojson"'),
     "file not found"),
    (lambda t: t.replace("repose_angle = 37.0", "repose_angel = 37.0"),
     "did you mean 'repose_angle'"),
    (lambda t: t + '\n[ground]\nelevation = 10.0\n[[buildings]]\nid = "kiosk"\n'
                   'outline = [[512300, 5763500], [512305, 5763500], [512305, 5763505]]\n'
                   'foundation_elevation = 12.0\n', "above"),
])
def test_bad_input_exits_2_with_one_line(tmp_path, capsys, edit, words):
    site = _copy_site(tmp_path)
    site.write_text(edit(site.read_text()))
    code = main(["check", str(site)])
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert words in err and len(err.splitlines()) == 1 and "Traceback" not in err


def test_empty_receptor_layer_is_refused(tmp_path, capsys):
    site = _copy_site(tmp_path)
    (site.parent / "buildings.geojson").write_text(
        '{"type": "FeatureCollection", "features": []}')
    assert main(["check", str(site)]) == 2
    err = capsys.readouterr().err
    assert "no features" in err and "buildings.geojson" in err


def test_missing_site_file(tmp_path, capsys):
    assert main(["run", str(tmp_path / "nope.toml")]) == 2
    assert "site file not found" in capsys.readouterr().err


def test_point_command_matches_library(capsys):
    site = load_site(example_site("preload_surcharge"))
    assert main(["point", str(example_site("preload_surcharge")), "452100", "218300", "5"]) == 0
    printed = capsys.readouterr().out
    expected = vertical_stress(site.load_grid(), [[452100.0, 218300.0, 5.0]])[0]
    assert f"{expected:.2f}" in printed


def test_run_on_a_local_dask_cluster_equals_the_serial_run(runs, tmp_path):
    out = tmp_path / "dask"
    site = example_site("preload_surcharge")
    assert main(["run", str(site), "-o", str(out), "--quiet", "--no-report",
                 "--workers", "1"]) == 0
    for csv in runs["preload_surcharge"].glob("*_points.csv"):
        pd.testing.assert_frame_equal(pd.read_csv(out / csv.name), pd.read_csv(csv),
                                      check_exact=False, rtol=1e-12)


def test_plan_grid_spacing_takes_every_kth_cell_centre(tmp_path):
    import rasterio
    toml = _copy_site(tmp_path, "preload_surcharge")
    toml.write_text(toml.read_text().replace('name = "pad"', 'name = "pad"\nspacing = 6.0'))
    coarse = load_site(toml)
    fine = load_site(example_site("preload_surcharge"))
    from fillstress.run.compute import compute
    a = compute(fine).slices["pad"]
    b = compute(coarse).slices["pad"]
    np.testing.assert_array_equal(b.values, a.values[:, ::3, ::3])
    out = tmp_path / "out"
    assert main(["run", str(toml), "-o", str(out), "--quiet", "--no-report"]) == 0
    with rasterio.open(next((out / "slices").glob("*.tif"))) as src:
        assert src.res == (6.0, 6.0)
        x, y = src.xy(0, 0)
        assert x == pytest.approx(float(b.x[0])) and y == pytest.approx(float(b.y[-1]))
    bad = toml.read_text().replace("spacing = 6.0", "spacing = 5.0")
    toml.write_text(bad)
    with pytest.raises(Exception, match="whole multiple of the cell size 2 m"):
        load_site(toml)


def test_vector_layer_without_any_crs_is_refused(tmp_path, capsys):
    """A shapefile without .prj on a site that states no CRS: nothing says where it is."""
    import geopandas as gpd
    site = _copy_site(tmp_path)
    toes = gpd.read_file(site.parent / "pile_toes.geojson").set_crs(None, allow_override=True)
    with pytest.warns(UserWarning, match="crs"):     # pyogrio: no projection written
        toes.to_file(site.parent / "pile_toes.shp")
    assert not (site.parent / "pile_toes.prj").exists()
    text = site.read_text().replace('crs = "EPSG:32632"\n', "").replace(
        "pile_toes.geojson", "pile_toes.shp")
    site.write_text(text)
    assert main(["check", str(site)]) == 2
    err = capsys.readouterr().err
    assert "states no CRS" in err and "pile_toes.shp" in err


def test_excavation_beside_the_fill_gives_heave_warning_not_a_crash(tmp_path, capsys):
    """A basement dig next to the preload: points where unloading exceeds σ'v0 get no
    settlement and a warning; everything else is computed."""
    site = _copy_site(tmp_path, "preload_surcharge")
    site.write_text(site.read_text() + """
[bodies.basement_dig]
kind = "footprint"
outline = [[452160.0, 218290.0], [452180.0, 218290.0], [452180.0, 218310.0], [452160.0, 218310.0]]
height = 3.0
unit_weight = 19.0
excavation = true

[[boreholes]]
id = "BH-04"
x = 452170.0
y = 218300.0
""")
    out = tmp_path / "out"
    assert main(["run", str(site), "-o", str(out), "--no-report"]) == 0
    printed = capsys.readouterr().out
    assert "warning:" in printed and "heave" in printed
    pts = pd.read_csv(out / "boreholes_points.csv")
    first = pts.groupby("receptor_id").head(1).set_index("receptor_id")
    assert np.isnan(first.loc["BH-04", "settlement_mm"])
    assert first.loc["BH-01", "settlement_mm"] > 100
    assert (pts.loc[pts["receptor_id"] == "BH-04", "dsz_kPa"] < 0).any()
    summary = json.loads((out / "summary.json").read_text())
    assert any("heave" in w for w in summary["warnings"])
    from fillstress.report import write_report
    html = write_report(out).read_text()
    assert "Warnings of this run" in html and "heave" in html


def test_projected_geojson_without_crs_member_is_not_taken_as_degrees(tmp_path, capsys):
    site = _copy_site(tmp_path)
    geo = site.parent / "buildings.geojson"
    data = json.loads(geo.read_text())
    data.pop("crs")                      # RFC 7946: then the coordinates are WGS 84
    geo.write_text(json.dumps(data))
    assert main(["check", str(site)]) == 2
    err = capsys.readouterr().err
    assert "cannot be degrees" in err and "buildings.geojson" in err


def test_stockpile_yard_gives_each_piles_maximum_height(runs):
    """The yard states limits and asks for maximum heights: the ore pile's is a height a
    pile can have (its governing limit named), and a pile that reaches no limit below the
    highest earth fill (300 m) says so instead of a height of kilometres."""
    import pandas as pd
    table = pd.read_csv(runs["stockpile_yard"] / "max_heights.csv", encoding="utf-8-sig")
    rows = table.set_index("body")
    ore = rows.loc["ore_east"]
    assert 7.0 < ore["max_height_m"] < 300.0 and ore["governing_limit"] == "pipe_differential"
    assert ore["max_height_m"] == pytest.approx(ore["scale"] * 9.0, rel=1e-3)   # crest 9 m
    assert (table["max_height_m"].dropna() <= 300.0).all()
    assert set(table.loc[table["max_height_m"].isna(), "governing_limit"]) <= {"none reached"}


def test_stockpile_yard_gives_the_odds_that_the_warehouse_exceeds_its_distortion_limit(runs):
    """The yard samples its clay, the ore's unit weight and the water table: odds.csv gives
    the warehouse's angular distortion percentiles and, for each distortion limit in force
    there, the probability of exceeding it with its sampling error, and the report draws
    its convergence."""
    import pandas as pd
    odds = pd.read_csv(runs["stockpile_yard"] / "odds.csv", encoding="utf-8-sig")
    beta = odds[(odds["receptor_id"] == "warehouse") & (odds["quantity"] == "angular_distortion")]
    assert set(beta["limit"]) == {"beta_no_cracking", "beta_cracking"}
    assert (beta["samples"] == 400).all()
    assert ((beta["p10"] < beta["nominal"]) & (beta["nominal"] < beta["p90"])).all()
    assert ((0 <= beta["wilson_low"]) & (beta["wilson_low"] <= beta["p_exceed"])
            & (beta["p_exceed"] < beta["wilson_high"])).all()
    html = (runs["stockpile_yard"] / "report.html").read_text(encoding="utf-8")
    section = html[html.index('<section id="odds"'):]
    assert "beta_no_cracking" in section[:section.index("</section>")]


def test_stockpile_yard_maps_the_headroom_for_another_ore_pile(runs):
    """The yard's [headroom] takes the ore pile as the template: headroom.tif (the
    multiple), headroom_height.tif (that multiple of the ore pile's 9 m crest), the
    governing limits and re-checks, summary.json's least cell, and the report section."""
    import rasterio
    folder = runs["stockpile_yard"]
    with rasterio.open(folder / "headroom.tif") as src:
        multiple = src.read(1, masked=True)
        assert src.crs.to_epsg() == 32632 and src.res == (4.0, 4.0)
    with rasterio.open(folder / "headroom_height.tif") as src:
        height = src.read(1, masked=True)
    np.testing.assert_allclose(height.compressed(), 9.0 * multiple.compressed(), rtol=1e-5)
    about = json.loads((folder / "summary.json").read_text())["headroom"]
    assert about["template"] == "body ore_east" and about["rechecked_cells"] == 12
    assert float(multiple.min()) == pytest.approx(about["least"]["multiple"], rel=1e-6)
    # the main's 20 mm within 12 m governs the least cell, beside the pile (issue 16)
    assert (about["least"]["receptor_id"], about["least"]["limit"]) == ("water_main_DN600",
                                                                        "pipe_differential")
    assert about["governing_limit_type"] == "differential_settlement"
    checks = pd.read_csv(folder / "headroom_checks.csv", encoding="utf-8-sig")
    governing = pd.read_csv(folder / "headroom_governing.csv", encoding="utf-8-sig")
    assert len(checks) == 12 and set(governing["limit"]) <= {
        "settlement", "beta_no_cracking", "pipe_differential", "differential_max", "tilt_visible"}
    beta = governing[governing["limit"] == "beta_no_cracking"]      # Bjerrum (1963), 1/500
    assert set(beta["receptor_id"]) == {"warehouse"} and beta["cells"].sum() > 0
    assert (checks["full_multiple"] >= multiple.min() * (1 - 1e-6)).all()
    html = (folder / "report.html").read_text(encoding="utf-8")
    section = html[html.index('<section id="headroom"'):]
    section = section[:section.index("</section>")]
    assert "Least headroom" in section and section.count("<img") == 1
    assert "Cells re-checked on the full settlement model" in section
