"""Settlement on the plan grids' surface: the FFT-slice path against the receptor path.

Invented site "Harrowby Lane trial pad": a 40 m × 30 m pad, 3 m high, over a normally
consolidated clay. A borehole stands on a plan-grid node, so the plan grid's surface
settlement there must equal the borehole's surface settlement, which the receptor path
computes from Δσz by direct summation (the slow, independent way) through the same layers.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import xarray as xr

from fillstress import viewer
from fillstress.cli import main
from fillstress.site.build import load_site

SITE = """\
[site]
name = "Harrowby Lane trial pad"
crs = "EPSG:25832"
units = "SI"

[grid]
cell = 2.0
margin = 12.0
convergence_check = false

[bodies.pad]
kind = "footprint"
outline = [[500000.0, 6000000.0], [500040.0, 6000000.0], [500040.0, 6000030.0], [500000.0, 6000030.0]]
height = 3.0
unit_weight = 20.0

[[boreholes]]
id = "HL-1"
x = {x}
y = {y}
top = 0.5
bottom = 10.0
step = 0.5

[[plan_grids]]
name = "pad"
depths = [2.0, 6.0]

[soil]
water_table = 1.0

[[soil.layers]]
name = "sandy crust"
top = 0.0
bottom = 2.0
unit_weight = 18.0
saturated_unit_weight = 19.0
modulus = 12000.0

[[soil.layers]]
name = "grey clay"
top = 2.0
bottom = 12.0
unit_weight = 17.0
saturated_unit_weight = 17.0
cc = 0.35
cr = 0.05
e0 = 1.1
ocr = 1.0
"""


# A surcharge over half the pad, taken away on day 200: the plan grid must follow the same
# load history (rebound on Cr) as the borehole, not the peak load.
SURCHARGE = """
[bodies.surcharge]
kind = "footprint"
outline = [[500000.0, 6000000.0], [500020.0, 6000000.0], [500020.0, 6000030.0], [500000.0, 6000030.0]]
height = 2.0
unit_weight = 19.0
stage = 2
removal_day = 200

[settlement]
stage_days = [0, 30]
"""


@pytest.fixture(scope="module", params=["pad", "pad and removed surcharge"])
def run(tmp_path_factory, request):
    root = tmp_path_factory.mktemp("plan_settlement")
    site_file = root / "site.toml"
    text = SITE + (SURCHARGE if "surcharge" in request.param else "")
    site_file.write_text(text.format(x=500013.0, y=6000011.0))
    spec = load_site(site_file).spec
    # Move the borehole onto the nearest cell centre (a plan-grid node); the pad and the
    # margin fix the grid, so the move does not shift it.
    x = spec.x0 + (np.floor((500013.0 - spec.x0) / spec.dx) + 0.5) * spec.dx
    y = spec.y0 + (np.floor((6000011.0 - spec.y0) / spec.dy) + 0.5) * spec.dy
    site_file.write_text(text.format(x=x, y=y))
    assert load_site(site_file).spec.x0 == spec.x0
    folder = root / "results"
    assert main(["run", str(site_file), "-o", str(folder), "--no-report", "--quiet"]) == 0
    return folder, x, y


def test_surface_settlement_matches_the_borehole(run):
    folder, x, y = run
    with xr.open_dataset(folder / "stress_cube.nc") as cube:
        plan = cube["settlement_pad"].load()
    assert plan.attrs["units"] == "mm"
    at_node = float(plan.sel(x_pad=x, y_pad=y, method="nearest"))
    assert float(plan["x_pad"].sel(x_pad=x, method="nearest")) == pytest.approx(x, abs=1e-6)
    hole = pd.read_csv(folder / "boreholes_points.csv")
    surface = hole["settlement_mm"].dropna()
    assert len(surface) == 1 and surface.iloc[0] > 50.0      # a soft clay under 60 kPa
    assert at_node == pytest.approx(surface.iloc[0], rel=1e-6)
    # Largest under the middle of the pad, small far outside it.
    values = plan.values
    assert np.nanmax(values) > 2 * np.nanmax(values[:, 0])


def test_viewer_shows_settlement_on_the_surface(run, tmp_path):
    folder, _, _ = run
    plotter = viewer.build_scene(folder, quantity="settlement", layers=("slices",))
    try:
        depths = plotter.fillstress_slice_depths
        lo, hi = plotter.fillstress_clim
    finally:
        plotter.close()
    with xr.open_dataset(folder / "stress_cube.nc") as cube:
        values = cube["settlement_pad"].values
    assert depths == [0.0]
    assert lo == 0.0 and hi == pytest.approx(np.nanpercentile(values, viewer.ROBUST_PERCENTILE))


def test_settlement_plan_geotiff_and_report_map(run):
    import rasterio

    from fillstress.report import write_report
    folder, _, _ = run
    with rasterio.open(folder / "slices" / "settlement_pad.tif") as src:
        tif = src.read(1)[::-1]                               # north-up → south first
        assert src.units == ("mm",)
    with xr.open_dataset(folder / "stress_cube.nc") as cube:
        plan = cube["settlement_pad"].sortby("y_pad").values
    assert tif.shape == plan.shape
    assert np.allclose(tif, plan, rtol=1e-5, equal_nan=True)          # float32 in both files
    page = write_report(folder).read_text()
    assert "Final settlement (mm) at the ground surface along the load history" in page
