"""Site CRS rules and foot conversions, checked against pyproj itself."""
import numpy as np
import pyproj
import pytest
import shapely

from fillstress.crs import (check_degrees, from_site, layer_and_site, metric_twin, site_crs,
                            to_site)
from fillstress.errors import InputError
from fillstress.units import FOOT, US_SURVEY_FOOT


@pytest.mark.parametrize("code, factor", [
    ("EPSG:32633", 1.0),
    ("EPSG:2229", US_SURVEY_FOOT),   # NAD83 / California zone 5 (ftUS)
    ("EPSG:2223", FOOT),             # NAD83 / Arizona Central (ft), international foot
])
def test_site_crs_factor_is_the_axis_unit(code, factor):
    crs, f = site_crs(code)
    assert f == pytest.approx(factor, rel=1e-15)  # exact definitions in fillstress.units
    assert f == pyproj.CRS(code).axis_info[0].unit_conversion_factor


def test_us_survey_and_international_foot_differ():
    assert site_crs("EPSG:2229")[1] != site_crs("EPSG:2223")[1]


def test_geographic_site_refused_with_utm_suggestion():
    with pytest.raises(InputError, match="geographic"):
        site_crs("EPSG:4326")
    with pytest.raises(InputError, match="EPSG:32617"):
        site_crs("EPSG:4269", near_lonlat=(-81.5, 28.4))
    with pytest.raises(InputError, match="not a coordinate reference system"):
        site_crs("no such crs")


def test_compound_crs_uses_its_horizontal_part():
    crs, f = site_crs("EPSG:7405")  # British National Grid + ODN height
    assert crs.to_epsg() == 27700 and f == 1.0


@pytest.mark.parametrize("site", ["EPSG:2229", "EPSG:32611"])
def test_to_site_matches_pyproj_times_factor(site):
    lon = np.array([-118.25, -118.20, -118.31])
    lat = np.array([34.05, 34.10, 33.99])
    tr = pyproj.Transformer.from_crs("EPSG:4326", site, always_xy=True)
    ex, ey = tr.transform(lon, lat)
    f = pyproj.CRS(site).axis_info[0].unit_conversion_factor
    x, y = to_site((lon, lat), "EPSG:4326", site)
    np.testing.assert_allclose(x, np.asarray(ex) * f, rtol=1e-12)
    np.testing.assert_allclose(y, np.asarray(ey) * f, rtol=1e-12)
    # geometry path keeps z (elevations are not plan coordinates)
    line = shapely.LineString(np.c_[lon, lat, [1.0, 2.0, 3.0]])
    out = shapely.get_coordinates(to_site(line, "EPSG:4326", site), include_z=True)
    np.testing.assert_allclose(out[:, 0], np.asarray(ex) * f, rtol=1e-12)
    np.testing.assert_allclose(out[:, 2], [1.0, 2.0, 3.0])
    # and back to site units for output
    bx, by = from_site((x, y), site)
    np.testing.assert_allclose(bx, ex, rtol=1e-12)
    np.testing.assert_allclose(by, ey, rtol=1e-12)


def test_metric_twin_coordinates_are_site_coordinates_times_factor():
    site = pyproj.CRS("EPSG:2263")
    twin = metric_twin(site)
    f = site.axis_info[0].unit_conversion_factor
    a = pyproj.Transformer.from_crs(4326, site, always_xy=True).transform(-73.95, 40.72)
    b = pyproj.Transformer.from_crs(4326, twin, always_xy=True).transform(-73.95, 40.72)
    np.testing.assert_allclose(np.array(a) * f, b, rtol=1e-12)
    assert metric_twin("EPSG:32618").equals(pyproj.CRS("EPSG:32618"))


def test_layer_without_crs():
    arr = np.array([[1000.0, 2000.0, 5.0]])
    np.testing.assert_allclose(to_site(arr, None, "EPSG:2223"), [[304.8, 609.6, 5.0]])
    with pytest.raises(InputError, match="no CRS and the site states none"):
        to_site(arr, None, None)
    with pytest.raises(InputError, match="site states no CRS"):
        to_site(arr, "EPSG:32633", None)
    with pytest.raises(InputError, match="pts.csv: .*no CRS"):
        layer_and_site(None, None, file="pts.csv")
    layer, (site, f) = layer_and_site("EPSG:2229", None)
    assert site.equals(layer) and f == pytest.approx(US_SURVEY_FOOT)


def test_projected_numbers_said_to_be_degrees_are_refused():
    """RFC 7946: GeoJSON without a "crs" member is WGS 84, so UTM metres arrive as "degrees";
    pyproj would turn them into infinities instead of refusing them."""
    utm = shapely.box(583900.0, 6641200.0, 583950.0, 6641260.0)   # invented pad, UTM 32N
    x, y = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:32632", always_xy=True).transform(
        583900.0, 6641200.0)
    assert not np.isfinite(x) or not np.isfinite(y)               # the silent failure
    with pytest.raises(InputError, match="pads.geojson: .*cannot be degrees"):
        to_site(utm, "EPSG:4326", "EPSG:32632", file="pads.geojson")
    with pytest.raises(InputError, match="argument crs: .*x = 583900"):
        check_degrees(np.array([[10.5, 59.9], [583900.0, 6641200.0]]), "EPSG:4326",
                      argument="crs")
    with pytest.raises(InputError, match="y = 91"):               # latitude beyond the pole
        check_degrees((10.0, 91.0), "EPSG:4326")
    with pytest.raises(InputError, match="cannot be degrees"):  # also before the site hint
        to_site(utm, "EPSG:4326", None)


def test_degrees_in_range_and_projected_layers_pass_the_check():
    check_degrees(np.array([[-179.9, -89.9], [359.0, 89.9]]), "EPSG:4326")  # 0…360 longitudes
    check_degrees(shapely.box(583900.0, 6641200.0, 583950.0, 6641260.0), "EPSG:32632")
    check_degrees((583900.0, 6641200.0), None)
    x, y = to_site((10.5, 59.9), "EPSG:4326", "EPSG:32632", file="pads.geojson")
    assert np.isfinite([x, y]).all()
