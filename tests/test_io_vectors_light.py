"""The light vector reader (io/vectors.read_layer: GeoJSON by json and shapely, without
pandas) against the reference it replaces, geopandas.read_file through GDAL: the same
geometries (WKB byte for byte), attributes (names, order, types, values), CRS and errors,
on the sample sites' files and on cases made to probe each rule. Files it declines go
through geopandas, so those must agree too."""
import json
from pathlib import Path

import geopandas as gpd
import numpy as np
import pytest
import shapely

from fillstress.errors import InputError
from fillstress.io import vectors
from fillstress.io.vectors import Layer, geojson_layer, read_layer, read_vector
from fillstress.site.build import load_site

ROOT = Path(__file__).resolve().parents[1]
SAMPLE_FILES = sorted((ROOT / "sample_sites").glob("*/*.geojson"))
YARD = ROOT / "sample_sites" / "stockpile_yard" / "site.toml"
SQUARE = [[[0.0, 0.0], [0.0, 2.0], [3.5, 2.0], [3.5, 0.0], [0.0, 0.0]]]   # clockwise
HOLED = [[[0, 0], [10, 0], [10, 10], [0, 10], [0, 0]], [[2, 2], [2, 4], [4, 4], [4, 2], [2, 2]]]


def reference(path) -> Layer:
    return Layer.of_frame(gpd.read_file(path))


def assert_same_layer(got: Layer, want: Layer):
    assert list(shapely.to_wkb(got.geometry)) == list(shapely.to_wkb(want.geometry))
    assert got.columns == want.columns
    for name in want.columns:
        assert got[name].dtype == want[name].dtype, name
        np.testing.assert_equal(got[name].tolist(), want[name].tolist(), err_msg=name)
    assert got.crs == want.crs


def write(tmp_path, features, filename="layer.geojson", **top) -> Path:
    path = tmp_path / filename
    path.write_text(json.dumps({"type": "FeatureCollection", **top, "features": [
        {"type": "Feature", "properties": props, "geometry": geom}
        for props, geom in features]}), encoding="utf-8")
    return path


def polygon(coords=SQUARE):
    return {"type": "Polygon", "coordinates": coords}


def test_the_sample_files_are_read_light_and_as_gdal_reads_them():
    assert SAMPLE_FILES
    for path in SAMPLE_FILES:
        light = geojson_layer(path)
        assert light is not None, path
        assert_same_layer(light, reference(path))


EPSG_URN = {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32633"}}
READ_LIGHT = {
    "no crs member (GDAL: EPSG:4326)": ([({"id": "a"}, polygon())], {}),
    "crs as an EPSG urn": ([({"id": "a"}, polygon())], {"crs": EPSG_URN}),
    "whole numbers and numbers": ([({"n": 1, "h": 2, "id": "x"}, polygon()),
                                   ({"n": -7, "h": 2.75, "id": "y"}, polygon(HOLED))],
                                  {"crs": EPSG_URN}),
    "multi-parts, lines and points": (
        [({"id": "m"}, {"type": "MultiPolygon", "coordinates": [SQUARE, HOLED]}),
         ({"id": "l"}, {"type": "LineString", "coordinates": [[0, 0], [1.1, 2.2], [3, 1]]}),
         ({"id": "ml"}, {"type": "MultiLineString", "coordinates": [[[0, 0], [1, 1]],
                                                                    [[2, 2], [3, 5]]]}),
         ({"id": "p"}, {"type": "Point", "coordinates": [512380.125, 5763470.5]}),
         ({"id": "mp"}, {"type": "MultiPoint", "coordinates": [[1, 2], [3, 4]]})], {}),
    "text that is no date": ([({"id": "BH-K1", "note": "1.5 m of fill"}, polygon())], {}),
    "whole-number ids": ([({"id": 12, "h": 1.5}, polygon()), ({"id": 7, "h": 2}, polygon())],
                         {"name": "pads"}),
}


@pytest.mark.parametrize("case", READ_LIGHT)
def test_made_files_read_light_match_gdal(tmp_path, case):
    features, top = READ_LIGHT[case]
    path = write(tmp_path, features, **top)
    light = geojson_layer(path)
    assert light is not None
    assert_same_layer(light, reference(path))


DECLINED = {   # GDAL types or reads these its own way: left to geopandas
    "a date": [({"id": "a", "built": "2024-03-01"}, polygon())],
    "a time": [({"id": "a", "at": "12:30"}, polygon())],
    "a null": [({"id": "a", "h": 1.0}, polygon()), ({"id": "b", "h": None}, polygon())],
    "a boolean": [({"id": "a", "ok": True}, polygon())],
    "text and numbers": [({"id": "a"}, polygon()), ({"id": 3}, polygon())],
    "a list": [({"id": "a", "tags": [1, 2]}, polygon())],
    "fields differing": [({"id": "a"}, polygon()), ({"id": "b", "h": 1}, polygon())],
    "beyond int32": [({"id": "a", "n": 2**40}, polygon())],
    "3-D vertices": [({"id": "a"}, polygon([[[0, 0, 1], [0, 2, 1], [3, 2, 2], [0, 0, 1]]]))],
    "a null geometry": [({"id": "a"}, None)],
    "a collection": [({"id": "a"}, {"type": "GeometryCollection", "geometries": []})],
    "a field named geometry": [({"id": "a", "geometry": "x"}, polygon())],
}


@pytest.mark.parametrize("case", DECLINED)
def test_files_declined_go_through_geopandas_with_the_same_result(tmp_path, case):
    path = write(tmp_path, DECLINED[case])
    assert geojson_layer(path) is None
    want = reference(path)
    if all(g is not None and g.geom_type == "Polygon" for g in want.geometry):
        assert_same_layer(read_layer(path, "Polygon"), want)


def test_a_link_crs_and_a_feature_id_are_declined(tmp_path):
    link = {"type": "link", "properties": {"href": "x.prj", "type": "esriwkt"}}
    assert geojson_layer(write(tmp_path, [({"id": "a"}, polygon())], crs=link)) is None
    path = tmp_path / "with_id.geojson"
    path.write_text(json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "id": 7, "properties": {"n": 1}, "geometry": polygon()}]}))
    assert geojson_layer(path) is None


@pytest.mark.parametrize("driver, suffix", [("ESRI Shapefile", ".shp"), ("GPKG", ".gpkg")])
def test_shapefile_and_geopackage_read_as_the_geojson(tmp_path, driver, suffix):
    """Other formats go through geopandas: the same layer as the GeoJSON they came from
    (a shapefile's rings turned clockwise: the same polygons, other vertex order)."""
    source = ROOT / "sample_sites" / "stockpile_yard" / "pile_toes.geojson"
    path = tmp_path / f"toes{suffix}"
    gpd.read_file(source).to_file(path, driver=driver)
    assert geojson_layer(path) is None
    got, light = read_layer(path, "Polygon"), geojson_layer(source)
    assert_same_layer(got, reference(path))
    assert shapely.equals(got.geometry, light.geometry).all()
    assert got["id"].tolist() == light["id"].tolist() and got.crs == light.crs


WRONG = {
    "not json": ("pads.geojson", "{ this is not GeoJSON"),
    "json, no GeoJSON": ("pads.geojson", "[1, 2, 3]"),
    "empty": ("pads.json", ""),
    "an open ring": ("pads.geojson", json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"id": "a"},
         "geometry": {"type": "Polygon", "coordinates": [[[0, 0], [0, 2], [3, 2], [3, 0]]]}}]})),
}


@pytest.mark.parametrize("case", WRONG)
def test_a_wrong_file_gives_the_same_one_line_error(tmp_path, case):
    name, text = WRONG[case]
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    with pytest.raises(InputError) as light:
        read_layer(path, "Polygon")
    with pytest.raises(InputError) as full:
        read_vector(path, "Polygon")
    assert str(light.value) == str(full.value)
    assert str(path) in str(light.value) and "\n" not in str(light.value)


def test_the_feature_checks_are_those_of_read_vector(tmp_path):
    bow_tie = polygon([[[0, 0], [2, 2], [2, 0], [0, 2], [0, 0]]])
    for geometry, features in (("LineString", [({"id": "a"}, polygon())]),
                               ("Polygon", [({"id": "a"}, bow_tie)])):
        path = write(tmp_path, features)
        assert geojson_layer(path) is not None
        with pytest.raises(InputError) as light:
            read_layer(path, geometry, what="pipes")
        with pytest.raises(InputError) as full:
            read_vector(path, geometry, what="pipes")
        assert str(light.value) == str(full.value)
    with pytest.raises(InputError, match="file not found"):
        read_layer(tmp_path / "missing.geojson", "Polygon")


def test_the_yard_built_light_is_the_yard_built_through_geopandas(monkeypatch):
    light = load_site(YARD)
    monkeypatch.setattr(vectors, "geojson_layer", lambda path: None)
    full = load_site(YARD)
    assert light.spec == full.spec
    for a, b in zip(light.bodies, full.bodies, strict=True):
        assert a.name == b.name
        np.testing.assert_array_equal(a.thickness, b.thickness)
    for table in ("buildings", "pipes", "boreholes"):
        got, want = getattr(light.receptors, table), getattr(full.receptors, table)
        assert [r.id for r in got] == [r.id for r in want]
        assert all(a == b for a, b in zip(got, want, strict=True))
    assert light.points.equals(full.points)
