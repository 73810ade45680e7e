"""A site whose fill is a design GeoTIFF minus an existing-ground LandXML TIN, through the
site file, the command line and the results folder."""
import numpy as np
import pandas as pd
import pytest
import rasterio
from affine import Affine

from fillstress.cli import main
from fillstress.site.build import load_site

CRS = "EPSG:32633"
X0, Y0 = 400_000.0, 5_500_000.0


def ground(x, y):
    """Existing ground: a plane rising 1 in 100 to the east (invented)."""
    return 20.0 + 0.01 * (x - X0)


def pad_height(x, y, top=3.0, half=(20.0, 12.0), slope=2.0):
    """A flat-topped pad, 3 m high, 40 × 24 m crest, 2H:1V sides (invented)."""
    out = np.maximum(np.abs(x - X0 - 50) - half[0], np.abs(y - Y0 - 40) - half[1]).clip(min=0)
    return np.clip(top - out / slope, 0, None)


def pad_volume(top=3.0, a=40.0, b=24.0, n=2.0):
    # frustum of a rectangular pyramid with side slopes n: exact prismoid volume
    A, B = a + 2 * n * top, b + 2 * n * top
    return top / 6 * (a * b + A * B + (a + A) * (b + B))


def write_design(path):
    res = 0.5
    xs = X0 + (np.arange(220) + 0.5) * res
    ys = Y0 + 80 - (np.arange(160) + 0.5) * res       # north-up rows
    gx, gy = np.meshgrid(xs, ys)
    z = ground(gx, gy) + pad_height(gx, gy)
    profile = dict(driver="GTiff", width=220, height=160, count=1, dtype="float64", crs=CRS,
                   transform=Affine(res, 0, X0, 0, -res, Y0 + 80), nodata=-9999.0)
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(z, 1)


def write_landxml(path):
    # a 2 × 2 point TIN of the ground plane, well beyond the design raster
    pts = [(X0 - 50, Y0 - 50), (X0 + 200, Y0 - 50), (X0 + 200, Y0 + 150), (X0 - 50, Y0 + 150)]
    p = "\n".join(f'<P id="{i + 1}">{y} {x} {ground(x, y)}</P>' for i, (x, y) in enumerate(pts))
    path.write_text(f"""<?xml version="1.0"?>
<LandXML xmlns="http://www.landxml.org/schema/LandXML-1.2" version="1.2">
 <Units><Metric linearUnit="meter" areaUnit="squareMeter" volumeUnit="cubicMeter"/></Units>
 <Surfaces><Surface name="existing"><Definition surfType="TIN">
  <Pnts>{p}</Pnts>
  <Faces><F>1 2 3</F><F>1 3 4</F></Faces>
 </Definition></Surface></Surfaces>
</LandXML>""")


SITE = f"""
[site]
name = "Orrin Flats test pad"
crs = "{CRS}"
[grid]
cell = 1.0
margin = 10.0
[ground]
landxml = "ground.xml"
[bodies.pad]
kind = "surfaces"
design = "design.tif"
unit_weight = 20.0
[[buildings]]
id = "hut"
outline = [[{X0 + 85}, {Y0 + 35}], [{X0 + 95}, {Y0 + 35}], [{X0 + 95}, {Y0 + 45}], [{X0 + 85}, {Y0 + 45}]]
foundation_elevation = {ground(X0 + 90, Y0 + 40) - 1.5}
"""


@pytest.fixture()
def site_file(tmp_path):
    write_design(tmp_path / "design.tif")
    write_landxml(tmp_path / "ground.xml")
    (tmp_path / "site.toml").write_text(SITE)
    return tmp_path / "site.toml"


def test_fill_volume_from_raster_minus_tin_matches_the_prismoid(site_file):
    site = load_site(site_file)
    body = site.bodies[0]
    assert body.volume == pytest.approx(pad_volume(), rel=0.01)
    assert body.max_height == pytest.approx(3.0, abs=0.01)


def test_foundation_elevation_becomes_depth_through_the_tin(site_file):
    site = load_site(site_file)
    hut = site.points[site.points["receptor_id"] == "hut"]
    assert np.allclose(hut.loc[hut["role"] != "profile", "depth"], 1.5, atol=0.05)


def test_runs_from_the_command_line(site_file, tmp_path):
    out = tmp_path / "out"
    assert main(["run", str(site_file), "-o", str(out), "--quiet", "--no-report"]) == 0
    bodies = pd.read_csv(out / "bodies.csv")
    assert bodies.loc[0, "volume_m3"] == pytest.approx(pad_volume(), rel=0.01)
    with rasterio.open(out / "ground_elevation.tif") as src:
        row, col = src.index(X0 + 100.5, Y0 + 40.5)
        assert src.read(1)[row, col] == pytest.approx(ground(X0 + 100.5, Y0 + 40.5), abs=0.01)
