"""Site-file validation: strict keys, units, paths, one clear message per mistake."""
import pytest

from fillstress.errors import InputError
from fillstress.site.config import read_site_file
from fillstress.units import FOOT, PCF_KN_M3

BASE = """
[site]
name = "Test yard"
crs = "EPSG:32632"
{units}
[grid]
cell = 1.0
[bodies.pad]
kind = "footprint"
unit_weight = {gamma}
outline = [[0, 0], [30, 0], [30, 20], [0, 20]]
height = 3.0
"""


def write(tmp_path, text, name="site.toml"):
    p = tmp_path / name
    p.write_text(text)
    return p


def test_si_values_pass_through(tmp_path):
    cfg = read_site_file(write(tmp_path, BASE.format(units="", gamma=19.0)))
    body = cfg["bodies"]["pad"]
    assert body["height"] == 3.0 and body["unit_weight"] == 19.0 and body["stage"] == 1
    assert cfg["grid"]["method"] == "boussinesq"  # default


def test_us_units_converted_exactly(tmp_path):
    cfg = read_site_file(write(tmp_path, BASE.format(units='units = "US"', gamma=120.0)))
    body = cfg["bodies"]["pad"]
    # 1 ft = 0.3048 m exactly (international foot, 1959); 1 pcf = 0.157087 kN/m³
    assert body["height"] == pytest.approx(3.0 * FOOT)
    assert body["unit_weight"] == pytest.approx(120.0 * PCF_KN_M3)
    assert body["unit_weight"] == pytest.approx(18.850, abs=1e-3)  # 120 pcf ≈ 18.85 kN/m³
    # plan coordinates stay in CRS units here; site/build.py scales them by the CRS axis factor
    assert cfg["bodies"]["pad"]["outline"][1][0] == 30.0


@pytest.mark.parametrize("mutation, key, words", [
    (("cell = 1.0", "cel = 1.0"), "grid.cel", "did you mean 'cell'"),
    (("height = 3.0", "heigth = 3.0"), "bodies.pad.heigth", "did you mean 'height'"),
    (("height = 3.0", "height = -3.0"), "bodies.pad.height", "must be ≥ 0"),
    (('kind = "footprint"', 'kind = "heap"'), "bodies.pad.kind", "must be one of"),
    (("unit_weight = 19.0", 'unit_weight = "heavy"'), "bodies.pad.unit_weight", "must be a number"),
    (("unit_weight = 19.0", ""), "bodies.pad.unit_weight", "required key is missing"),
    (('name = "Test yard"', 'name = "Test yard"\nunits = "metric"'), "site.units", "SI"),
    (("outline = [[0, 0], [30, 0]", "outline = [[0, 'a'], [30, 0]"), "bodies.pad.outline", "item 0"),
])
def test_each_mistake_gives_one_clear_message(tmp_path, mutation, key, words):
    text = BASE.format(units="", gamma=19.0).replace(*mutation)
    p = write(tmp_path, text)
    with pytest.raises(InputError) as err:
        read_site_file(p)
    msg = str(err.value)
    assert str(p) in msg and f"[{key}]" in msg and words in msg
    assert "\n" not in msg


def test_missing_file_and_bad_toml(tmp_path):
    with pytest.raises(InputError, match="site file not found"):
        read_site_file(tmp_path / "nope.toml")
    with pytest.raises(InputError, match="not valid TOML"):
        read_site_file(write(tmp_path, "[site\nname="))


def test_paths_are_relative_to_the_site_file(tmp_path):
    sub = tmp_path / "job"
    sub.mkdir()
    (sub / "pads.geojson").write_text("{}")
    text = BASE.format(units="", gamma=19.0).replace(
        "outline = [[0, 0], [30, 0], [30, 20], [0, 20]]", 'file = "pads.geojson"')
    cfg = read_site_file(write(sub, text))
    assert cfg["bodies"]["pad"]["file"] == (sub / "pads.geojson").resolve()
    assert (sub / "pads.geojson").resolve() in cfg.input_files()
    with pytest.raises(InputError, match="file not found"):
        read_site_file(write(sub, text.replace("pads.geojson", "missing.geojson")))


def test_soil_layers_are_validated(tmp_path):
    text = BASE.format(units="", gamma=19.0) + """
[soil]
water_table = 1.0
[[soil.layers]]
name = "clay"
top = 0.0
bottom = 8.0
unit_weight = 17.0
cc = 0.4
cr = 0.05
e0 = 1.1
ocr = 1.0
"""
    cfg = read_site_file(write(tmp_path, text))
    assert cfg["soil"]["layers"][0]["cc"] == 0.4
    with pytest.raises(InputError, match=r"\[soil.layers\[0\].ee\] unknown key; did you mean 'e0'"):
        read_site_file(write(tmp_path, text.replace("e0 = 1.1", "ee = 1.1")))


def test_embankment_with_a_bend_and_no_margin_fits_its_own_grid(tmp_path):
    """With [grid] margin = 0 the grid still holds the whole embankment: the toe's corners
    at a sloped end and the outside of a bend (once refused as 'reaches outside the
    analysis grid'); its volume equals the one on a grid with room around it."""
    import numpy as np
    from fillstress.site.build import load_site
    text = """[site]
name = "toe test"
units = "SI"
[grid]
cell = 1.0
margin = {margin}
[bodies.bank]
kind = "embankment"
centreline = [[0, 0], [100, 0], [160, 40]]
crest_width = 10.0
side_slope = 2.0
heights = [[0, 4.0], [180, 4.0]]
unit_weight = 20.0
"""
    volumes = []
    for margin in (0.0, 20.0):
        path = tmp_path / f"m{margin:g}.toml"
        path.write_text(text.format(margin=margin))
        site = load_site(path)
        volumes.append(float(np.sum(site.bodies[0].thickness)) * site.spec.dx * site.spec.dy)
    assert volumes[0] == pytest.approx(volumes[1], rel=1e-6)
