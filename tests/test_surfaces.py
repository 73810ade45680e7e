"""Surfaces: TIN and raster sampling against references, fill from surfaces, readers."""
import numpy as np
import pyproj
import pytest
import rasterio
from affine import Affine
from scipy.interpolate import RegularGridInterpolator

from fillstress.errors import InputError
from fillstress.grid import GridSpec
from fillstress.io.landxml import read_landxml_surface
from fillstress.io.rasters import read_raster_surface
from fillstress.io.survey import read_survey_points
from fillstress.shapes.surfaces import (RasterSurface, TinSurface, fill_from_surfaces,
                                        resample_to_grid)
from fillstress.io.surfaces import read_surface

SITE = "EPSG:32632"


def _barycentric_reference(points, tris, x, y):
    """Loop over triangles: z by barycentric weights, NaN when in none."""
    out = np.full(len(x), np.nan)
    for k, (px, py) in enumerate(zip(x, y)):
        for t in tris:
            a, b, c = points[t]
            m = np.array([[b[0] - a[0], c[0] - a[0]], [b[1] - a[1], c[1] - a[1]]])
            u, v = np.linalg.solve(m, [px - a[0], py - a[1]])
            if u >= -1e-12 and v >= -1e-12 and u + v <= 1 + 1e-12:
                out[k] = a[2] + u * (b[2] - a[2]) + v * (c[2] - a[2])
                break
    return out


def test_tin_sampling_matches_barycentric_loop():
    rng = np.random.default_rng(3)
    pts = np.c_[rng.uniform(0, 50, 30), rng.uniform(0, 40, 30), rng.uniform(10, 14, 30)]
    s = TinSurface.from_points(pts)
    x, y = rng.uniform(-5, 55, 200), rng.uniform(-5, 45, 200)
    np.testing.assert_allclose(s.sample(x, y), _barycentric_reference(pts, s.triangles, x, y),
                               atol=1e-9, equal_nan=True)


def test_raster_sampling_matches_scipy_bilinear():
    rng = np.random.default_rng(5)
    z = rng.uniform(0, 10, (6, 9))
    r = RasterSurface(z, 100.0, 260.0, 5.0, 4.0)
    xc = 100.0 + 5.0 * (np.arange(9) + 0.5)
    yc = 260.0 - 4.0 * (np.arange(6) + 0.5)  # row 0 north
    ref = RegularGridInterpolator((yc[::-1], xc), z[::-1])
    x, y = rng.uniform(xc[0], xc[-1], 300), rng.uniform(yc[-1], yc[0], 300)
    np.testing.assert_allclose(r.sample(x, y), ref(np.c_[y, x]), rtol=1e-12)
    # half a pixel beyond the centres: edge value; further: NaN
    assert r.sample(100.5, 258.5) == pytest.approx(z[0, 0])
    assert np.isnan(r.sample(99.0, 250.0))


def _plane_tin(a, bx, by, extent=(0, 0, 40, 30)):
    x0, y0, x1, y1 = extent
    xy = np.array([(x0, y0), (x1, y0), (x0, y1), (x1, y1)], dtype=float)
    return TinSurface(np.c_[xy, a + bx * xy[:, 0] + by * xy[:, 1]])


@pytest.mark.parametrize("cell", [2.0, 5.0])
def test_fill_between_planes(cell):
    # design − ground = 0.1·x − 1: cut for x < 10, fill beyond. Over 40 × 30:
    # fill = 30·∫10^40 (0.1x − 1) dx = 30·45 = 1350; cut = 30·∫0^10 (1 − 0.1x) dx = 150.
    ground = _plane_tin(20.0, 0.0, 0.02)
    design = _plane_tin(19.0, 0.1, 0.02)
    spec = GridSpec(0.0, 0.0, cell, cell, int(40 / cell), int(30 / cell))
    t, rep = fill_from_surfaces(design, ground, spec)
    assert rep.volume_fill == pytest.approx(1350.0, rel=1e-9)
    assert rep.volume_cut == pytest.approx(150.0, rel=1e-9)
    assert rep.area_cut == pytest.approx(300.0) and rep.area_compared == pytest.approx(1200.0)
    assert t.min() == 0.0 and t.sum() * spec.cell_area == pytest.approx(1350.0, rel=1e-9)
    tu, _ = fill_from_surfaces(design, ground, spec, cut="unload")
    assert tu.sum() * spec.cell_area == pytest.approx(1200.0, rel=1e-9)
    assert tu.min() < 0


def test_fill_where_data_is_missing_is_zero_and_callable_ground():
    design = _plane_tin(12.0, 0.0, 0.0, extent=(0, 0, 20, 30))  # covers half the grid
    spec = GridSpec(0.0, 0.0, 2.0, 2.0, 20, 15)
    t, rep = fill_from_surfaces(design, lambda x, y: 0 * x + 10.0, spec)
    assert t[:, :10].min() == pytest.approx(2.0) and t[:, 10:].max() == 0.0
    assert rep.area_compared == pytest.approx(600.0)
    r = resample_to_grid(design, spec)
    assert np.isnan(r[:, 10:]).all() and np.allclose(r[:, :10], 12.0)


def test_fill_errors():
    spec = GridSpec(0.0, 0.0, 2.0, 2.0, 20, 15)
    a = _plane_tin(12.0, 0.0, 0.0)
    far = _plane_tin(10.0, 0.0, 0.0, extent=(100, 100, 140, 130))
    with pytest.raises(InputError, match="do not overlap"):
        fill_from_surfaces(a, far, spec)
    with pytest.raises(InputError, match="grid"):
        fill_from_surfaces(far, far, spec)
    with pytest.raises(InputError, match="cut"):
        fill_from_surfaces(a, a, spec, cut="shave")
    b = _plane_tin(10.0, 0.0, 0.0)
    b.crs = pyproj.CRS("EPSG:32633")
    a.crs = pyproj.CRS(SITE)
    with pytest.raises(InputError, match="read both into the site CRS"):
        fill_from_surfaces(a, b, spec)
    with pytest.raises(InputError, match="must be a surface"):
        fill_from_surfaces(a, 3.0, spec)


# --- readers -------------------------------------------------------------------------
def _write_tif(path, z, transform, crs=SITE, nodata=-9999.0):
    with rasterio.open(path, "w", driver="GTiff", width=z.shape[1], height=z.shape[0],
                       count=1, dtype="float64", crs=crs, nodata=nodata,
                       transform=transform) as ds:
        ds.write(z, 1)


def test_geotiff_round_trip_and_reprojection(tmp_path):
    z = np.arange(20.0).reshape(4, 5) + 100.0
    z[0, 0] = -9999.0
    t = Affine(10.0, 0, 500000.0, 0, -10.0, 6000040.0)
    _write_tif(tmp_path / "dem.tif", z, t)
    s = read_raster_surface(tmp_path / "dem.tif", SITE)
    assert s.bounds == (500000.0, 6000000.0, 500050.0, 6000040.0)
    assert s.sample(500025.0, 6000015.0) == pytest.approx(z[2, 2])  # a pixel centre
    assert np.isnan(s.sample(500005.0, 6000035.0))  # nodata pixel
    # the same raster read into another site CRS samples through pyproj
    other = "EPSG:32633"
    s2 = read_raster_surface(tmp_path / "dem.tif", other)
    x, y = pyproj.Transformer.from_crs(SITE, other, always_xy=True).transform(500025.0, 6000015.0)
    assert s2.sample(x, y) == pytest.approx(z[2, 2], abs=1e-6)


def test_geotiff_errors(tmp_path):
    t = Affine(1.0, 0, 0.0, 0, -1.0, 3.0)
    _write_tif(tmp_path / "empty.tif", np.full((3, 3), -9999.0), t)
    with pytest.raises(InputError, match="only nodata") as err:
        read_raster_surface(tmp_path / "empty.tif", SITE)
    assert "empty.tif" in str(err.value)
    (tmp_path / "junk.tif").write_bytes(b"not a tiff")
    with pytest.raises(InputError, match="cannot be read"):
        read_raster_surface(tmp_path / "junk.tif", SITE)
    _write_tif(tmp_path / "nocrs.tif", np.ones((3, 3)), t, crs=None)
    with pytest.raises(InputError, match="no CRS"):
        read_raster_surface(tmp_path / "nocrs.tif")
    assert read_raster_surface(tmp_path / "nocrs.tif", SITE).sample(1.5, 1.5) == 1.0



def test_surfaces_said_to_be_in_degrees_with_projected_numbers_are_refused(tmp_path):
    t = Affine(10.0, 0, 500000.0, 0, -10.0, 6000040.0)          # UTM metres…
    _write_tif(tmp_path / "dem.tif", np.ones((4, 5)), t, crs="EPSG:4326")   # …tagged degrees
    with pytest.raises(InputError, match="dem.tif: .*cannot be degrees"):
        read_raster_surface(tmp_path / "dem.tif", SITE)
    path = tmp_path / "pts.csv"
    path.write_text("x,y,z\n500000,6000000,1\n500030,6000000,1\n500000,6000020,1\n")
    with pytest.raises(InputError, match="pts.csv: .*cannot be degrees"):
        read_survey_points(path, SITE, crs="EPSG:4326")

@pytest.mark.parametrize("text", [
    "Point,Easting,Northing,Elevation\n1,0,0,5\n2,30,0,8\n3,0,20,5\n4,30,20,8\n",
    "# Fenwick levee survey\n0 0 5\n30 0 8\n0 20 5\n30 20 8\n0 0 5\n",
])
def test_survey_points_round_trip(tmp_path, text):
    path = tmp_path / "ground.txt"
    path.write_text(text)
    s = read_survey_points(path, SITE)
    assert s.sample(15.0, 10.0) == pytest.approx(6.5)  # 5 + 3·x/30
    assert np.isnan(s.sample(31.0, 10.0))
    assert read_surface(path, SITE).bounds == (0.0, 0.0, 30.0, 20.0)


def test_survey_points_in_feet(tmp_path):
    path = tmp_path / "ft.csv"
    path.write_text("x,y,z\n0,0,10\n100,0,10\n0,100,20\n")
    s = read_survey_points(path, "EPSG:2223", z_to_m=0.3048)
    assert s.bounds[2] == pytest.approx(30.48)
    assert s.sample(0.0, 15.24) == pytest.approx(15 * 0.3048)


@pytest.mark.parametrize("text, message", [
    ("", "no points"),
    ("x,y\n1,2\n", "exactly one z column"),
    ("1 2 3 4\n", "'x y z'"),
    ("0 0 1\n1 0 one\n", "line 2"),
    ("0 0 1\n0 0 2\n1 1 1\n", "different elevations"),
    ("0 0 1\n1 1 1\n2 2 1\n", "one line"),
    ("0 0 1\n1 1 1\n", "at least 3"),
    ("0 0 nan\n1 0 1\n0 1 1\n", "NaN"),
])
def test_survey_points_errors(tmp_path, text, message):
    path = tmp_path / "bad.csv"
    path.write_text(text)
    with pytest.raises(InputError, match=message) as err:
        read_survey_points(path, SITE)
    assert "bad.csv" in str(err.value)


LANDXML = """<?xml version="1.0"?>
<LandXML xmlns="{ns}" version="1.2">
  <Units><{system} linearUnit="{unit}"/></Units>
  <Surfaces>
    <Surface name="borrow pit"><Definition surfType="TIN"><Pnts>
      <P id="a">0 0 1</P></Pnts><Faces><F>a a a</F></Faces></Definition></Surface>
    <Surface name="finished grade"><Definition surfType="TIN">
      <Pnts><P id="1">0 0 10</P><P id="2">0 40 14</P><P id="3">20 0 10</P>
            <P id="4">20 40 14</P><P id="9">99 99 99</P></Pnts>
      <Faces><F>1 2 4</F><F>1 4 3</F><F i="1">2 9 4</F></Faces>
    </Definition></Surface>
  </Surfaces>
</LandXML>
"""


@pytest.mark.parametrize("ns", ["http://www.landxml.org/schema/LandXML-1.2",
                                "http://www.landxml.org/schema/LandXML-1.1"])
def test_landxml_round_trip(tmp_path, ns):
    path = tmp_path / "grade.xml"
    path.write_text(LANDXML.format(ns=ns, system="Metric", unit="meter"))
    s = read_landxml_surface(path, SITE, surface_name="finished grade")
    # P is "northing easting elevation": easting runs 0…40 with z 10…14
    assert s.bounds == (0.0, 0.0, 40.0, 20.0)
    assert s.sample(20.0, 5.0) == pytest.approx(12.0)
    assert np.isnan(s.sample(60.0, 60.0))  # the invisible face is not part of the surface


def test_landxml_units_and_errors(tmp_path):
    path = tmp_path / "ft.xml"
    path.write_text(LANDXML.format(ns="http://www.landxml.org/schema/LandXML-1.2",
                                   system="Imperial", unit="USSurveyFoot"))
    s = read_landxml_surface(path, SITE, surface_name="finished grade")
    assert s.sample(20.0, 5.0) == pytest.approx(12.0 * 1200 / 3937)
    with pytest.raises(InputError, match="no surface named 'top'"):
        read_landxml_surface(path, SITE, surface_name="top")
    with pytest.raises(InputError, match="at least 3 points"):
        read_landxml_surface(path, SITE)  # the first surface has one point
    bad = tmp_path / "bad.xml"
    bad.write_text("<LandXML><Surfaces>")
    with pytest.raises(InputError, match="not well-formed"):
        read_landxml_surface(bad, SITE)
    bad.write_text('<LandXML xmlns="http://www.landxml.org/schema/LandXML-1.2"><Surfaces>'
                   '<Surface name="s"><Definition><Pnts><P id="1">0 0 1</P></Pnts>'
                   '<Faces><F>1 2 3</F></Faces></Definition></Surface></Surfaces></LandXML>')
    with pytest.raises(InputError, match="unknown point") as err:
        read_landxml_surface(bad, SITE)
    assert "bad.xml" in str(err.value)


@pytest.mark.parametrize("z_to_m", ["feet", float("inf"), 0.0, -0.3048])
def test_landxml_bad_z_to_m_is_refused_even_when_the_file_declares_units(tmp_path, z_to_m):
    path = tmp_path / "grade.xml"
    path.write_text(LANDXML.format(ns="http://www.landxml.org/schema/LandXML-1.2",
                                   system="Metric", unit="meter"))
    with pytest.raises(InputError, match="argument z_to_m: must be"):
        read_landxml_surface(path, SITE, z_to_m=z_to_m)


def _strip_survey(cx, cy):
    """A surveyed strip 300 ft wide along a 40° arc of radius 5,000 ft about (cx, cy): cross
    sections every 50 ft of arc, points every 25 ft across, jittered as a field crew's
    would be; z a plane so the TIN reproduces it exactly."""
    rng = np.random.default_rng(20)
    theta = np.arange(0, np.radians(40), 50 / 5000)
    radius = 5000 + np.arange(-150, 151, 25.0)
    t, r = np.meshgrid(theta, radius)
    r = r + rng.uniform(-3, 3, r.shape)
    x, y = cx + r * np.cos(t), cy + r * np.sin(t)
    return np.c_[x.ravel(), y.ravel(), 500 + 0.01 * (x - cx).ravel() - 0.004 * (y - cy).ravel()]


@pytest.mark.parametrize("centre", [(3_000_000.0, 10_000_000.0), (20_000.0, 30_000.0)])
def test_strip_survey_at_state_plane_coordinates(tmp_path, centre):
    """A curved strip survey in EPSG:2277 (Texas Central, US survey feet) at state-plane
    magnitudes triangulates like the same points shifted near the origin: the plane is
    reproduced over the strip, and the land inside the curve (never surveyed) is NaN."""
    points = _strip_survey(*centre)
    path = tmp_path / "strip.csv"
    np.savetxt(path, points, delimiter=",", header="x,y,z", comments="", fmt="%.4f")
    surface = read_survey_points(path, "EPSG:2277", z_to_m=0.3048)
    foot = 1200 / 3937
    t = np.radians(np.linspace(2, 38, 50))
    for r, covered in ((5000.0, True), (5120.0, True), (4700.0, False), (4000.0, False)):
        x, y = centre[0] + r * np.cos(t), centre[1] + r * np.sin(t)
        z = surface.sample(x * foot, y * foot) / 0.3048
        if covered:
            plane = 500 + 0.01 * (x - centre[0]) - 0.004 * (y - centre[1])
            np.testing.assert_allclose(z, plane, atol=1e-6)
        else:
            assert np.isnan(z).all(), f"r = {r} ft is outside the strip"


@pytest.mark.parametrize("centre, foot", [((0.0, 0.0), 0.3048),
                                          ((20_000.0, 30_000.0), 1200 / 3937),
                                          ((3_000_000.0, 10_000_000.0), 1200 / 3937)])
def test_regular_cross_sections_on_a_curve_triangulate(centre, foot):
    """Cross sections of 13 points on exact radii of a 5,000 ft curve: the convex hull's
    thin triangles along the inside of the curve once made the TIN invalid for some
    offsets and foot definitions; the surveyed area alone is now triangulated."""
    t, w = np.meshgrid(np.linspace(0, 0.9, 600), np.linspace(-150, 150, 13))
    x, y = centre[0] + (5000 + w) * np.cos(t), centre[1] + (5000 + w) * np.sin(t)
    surface = TinSurface(np.c_[x.ravel() * foot, y.ravel() * foot, np.full(x.size, 150.0)])
    mid = np.linspace(0.01, 0.89, 40)
    inside = surface.sample((centre[0] + 5000 * np.cos(mid)) * foot,
                            (centre[1] + 5000 * np.sin(mid)) * foot)
    np.testing.assert_allclose(inside, 150.0, rtol=1e-12)
    chord = surface.sample((centre[0] + 4700 * np.cos(mid)) * foot,
                           (centre[1] + 4700 * np.sin(mid)) * foot)
    assert np.isnan(chord).all()   # inside the curve, between the chord and the strip
