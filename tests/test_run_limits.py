"""The [limits] table through a run: the utilisation of each limit at each receptor
(limits.csv, the summary columns, the governing row), overrides, units and bad input."""
from __future__ import annotations

import math

import pandas as pd
import pytest

from fillstress.decide.limits import BUILDING_LIMITS
from fillstress.errors import InputError
from fillstress.run.compute import compute, run_site_file
from fillstress.site.build import load_site

# An invented depot: one heap, a hut beside it, a drain past it, a borehole in it.
SITE = '''\
[site]
name = "Larchmere sidings depot"
crs = "EPSG:32630"
units = "{units}"

[grid]
cell = {cell}
margin = {margin}
convergence_check = false

[bodies.heap]
kind = "footprint"
outline = [[0.0, 0.0], [{w}, 0.0], [{w}, {d}], [0.0, {d}]]
height = {height}
unit_weight = {gamma}

[soil]
water_table = {water}
[[soil.layers]]
name = "silty clay"
top = 0.0
bottom = {bottom}
unit_weight = {gamma}
cc = 0.32
cr = 0.04
e0 = 1.05
ocr = 1.4

[[buildings]]
id = "hut"
outline = [[{hx0}, {hy0}], [{hx1}, {hy0}], [{hx1}, {hy1}], [{hx0}, {hy1}]]
foundation_depth = {fd}

[[buildings]]
id = "shed"
outline = [[{sx0}, {hy0}], [{sx1}, {hy0}], [{sx1}, {hy1}], [{sx0}, {hy1}]]
foundation_depth = {fd}

[[pipes]]
id = "drain"
line = [[{px0}, {py}], [{px1}, {py}]]
crown_depth = {fd}
differential_length = {plen}

[[boreholes]]
id = "BH1"
x = {bx}
y = {by}
top = {fd}
bottom = {bb}
step = {bs}
'''
SI_SIZES = dict(units="SI", cell=2.0, margin=10.0, w=30.0, d=18.0, height=4.0, gamma=18.5,
                water=1.5, bottom=9.0, hx0=34.0, hx1=44.0, hy0=4.0, hy1=12.0, sx0=-14.0,
                sx1=-6.0, fd=1.0, px0=-10.0, px1=45.0, py=22.0, plen=10.0, bx=15.0, by=9.0,
                bb=7.0, bs=2.0)
FT = 0.3048
# lengths in the unit system; plan coordinates stay in the CRS's metres
LENGTH_KEYS = ("cell", "margin", "height", "water", "bottom", "fd", "plen", "bb", "bs")
LIMITS = '''
[limits]
stress_increase = 60.0
stress_ratio = 1.5
settlement = 50.0
pipe_differential = 15.0
pipe_differential_length = 10.0
pipe_radius_min = 2000.0

[[limits.overrides]]
receptor = "hut"
settlement = 25.0
'''


def site_text(units="SI", limits=LIMITS):
    sizes = dict(SI_SIZES)
    if units == "US":          # the same site in feet, psf and pcf
        sizes.update({k: round(v / FT, 6) for k, v in sizes.items() if k in LENGTH_KEYS},
                     units="US", gamma=round(18.5 / 0.15708746, 4))
    return SITE.format(**sizes) + limits


def write(tmp_path, text, name="site.toml"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    d = tmp_path_factory.mktemp("limits")
    run_site_file(write(d, site_text()), d / "out", report=False)
    return d / "out"


def _summary_value(summaries, row):
    """The value of one limits.csv row, taken again from the summary CSVs."""
    s = summaries[row.receptor_kind].set_index("receptor_id").loc[row.receptor_id]
    column = {"stress_increase": "dsz_max_kPa", "stress_ratio": "stress_ratio_max",
              "settlement": "settlement_max_mm", "angular_distortion": "angular_distortion",
              "tilt": "tilt", "differential_settlement": "differential_settlement_mm"}
    if row.quantity == "pipe_curvature":
        return 1.0 / s["curvature_radius_min_m"]
    return s[column[row.quantity]]


def test_utilisation_is_value_over_limit_from_the_summaries(folder):
    limits = pd.read_csv(folder / "limits.csv", encoding="utf-8-sig")
    summaries = {k: pd.read_csv(folder / f"{k}s_summary.csv", encoding="utf-8-sig")
                 for k in ("building", "pipe", "borehole")}
    assert set(limits["receptor_kind"]) == {"building", "pipe", "borehole"}
    for row in limits.itertuples():
        value = _summary_value(summaries, row)
        assert row.value == pytest.approx(value, rel=2e-5, abs=1e-9), row
        assert row.utilisation == pytest.approx(value / row.limit_value, rel=2e-5), row
    top = limits["utilisation"].idxmax()
    assert limits["governing"].tolist() == [k == top for k in range(len(limits))]
    for kind, s in summaries.items():       # each summary carries its receptor's largest
        mine = limits[limits["receptor_kind"] == kind]
        best = mine.loc[mine.groupby("receptor_id")["utilisation"].idxmax()].set_index(
            "receptor_id")
        got = s.set_index("receptor_id")
        assert got["utilisation_max"].to_dict() == pytest.approx(
            best["utilisation"].to_dict(), rel=1e-5)
        assert got["governing_limit"].to_dict() == best["limit"].to_dict()


def test_units_and_sources_per_row(folder):
    limits = pd.read_csv(folder / "limits.csv", encoding="utf-8-sig", keep_default_na=False)
    units = dict(zip(limits["limit"], limits["unit"]))
    assert units["settlement"] == "mm" and units["stress_increase"] == "kPa"
    assert units["pipe_radius_min"] == "1/m" and units["stress_ratio"] == "1"
    radius = limits[limits["limit"] == "pipe_radius_min"]["limit_value"]
    assert radius.tolist() == pytest.approx([1 / 2000.0])
    published = limits[limits["source"].str.contains("Bjerrum|Skempton")]
    assert set(published["receptor_kind"]) == {"building"}


def test_an_override_replaces_the_general_limit_only_at_its_receptor(folder):
    limits = pd.read_csv(folder / "limits.csv", encoding="utf-8-sig")
    settle = limits[limits["quantity"] == "settlement"].set_index("receptor_id")
    assert settle.loc["hut", "limit_value"] == pytest.approx(25.0)
    assert "overrides" in settle.loc["hut", "source"]
    assert settle.loc["shed", "limit_value"] == pytest.approx(50.0)
    assert settle.loc["drain", "limit_value"] == pytest.approx(50.0)
    # the site's settlement limit replaces the published 65 mm at buildings
    assert (limits["limit"] != "settlement_max").all()
    assert len(settle) == 3                        # one settlement limit per receptor


PSF = 0.0478802589803          # kPa per psf
US_LIMITS = f'''
[limits]
stress_increase = {60 / PSF}
stress_ratio = 1.5
settlement = {50 / 25.4}
pipe_differential = {15 / 25.4}
pipe_differential_length = {10 / FT}
pipe_radius_min = {2000 / FT}

[[limits.overrides]]
receptor = "hut"
settlement = {25 / 25.4}
'''


def test_us_units_convert(tmp_path):
    """The same site and limits in US units give the same utilisations, with each value
    in in, psf or 1/ft."""
    site = load_site(write(tmp_path, site_text("US", US_LIMITS)))
    given = {lim.name: lim for lim in site.settings.limits}
    assert given["settlement"].value == pytest.approx(0.050)
    assert given["stress_increase"].value == pytest.approx(60.0)
    assert given["pipe_radius_min"].value == pytest.approx(1 / 2000)
    assert given["pipe_differential"].length_m == pytest.approx(10.0)
    table = compute(site).limits.table(site.units)
    units = dict(zip(table["limit"], table["unit"]))
    assert (units["settlement"], units["stress_increase"], units["pipe_radius_min"]) == (
        "in", "psf", "1/ft")
    metric_site = load_site(write(tmp_path, site_text(), "si.toml"))
    si = compute(metric_site).limits.table(metric_site.units)
    per_unit = {"in": 25.4, "psf": PSF, "1/ft": 1 / FT, "1": 1.0}   # SI output per US unit
    assert len(table) == len(si)
    for us, metric in zip(table.itertuples(), si.itertuples()):
        assert (us.receptor_id, us.limit) == (metric.receptor_id, metric.limit)
        for col in ("value", "limit_value"):
            assert getattr(us, col) * per_unit[us.unit] == pytest.approx(
                getattr(metric, col), rel=1e-3, abs=1e-9)
        assert us.utilisation == pytest.approx(metric.utilisation, rel=1e-3, abs=1e-9)


def test_published_building_limits_without_and_with_a_limits_table(tmp_path):
    none = load_site(write(tmp_path, site_text(limits=""), "a.toml"))
    assert none.settings.building_limits == BUILDING_LIMITS and none.settings.limits == ()
    rows = compute(none).limits.rows
    assert {r.kind for r in rows} == {"building"}
    run_site_file(tmp_path / "a.toml", tmp_path / "out", report=False)   # no borehole limit
    holes = pd.read_csv(tmp_path / "out" / "boreholes_summary.csv", encoding="utf-8-sig")
    assert "utilisation_max" not in holes and len(holes) == 1
    assert {r.row.limit.name for r in rows} == {lim.name for lim in BUILDING_LIMITS}
    off = load_site(write(tmp_path, site_text(limits="[limits]\npublished = false\n"
                                              "tilt = 0.01\n"), "b.toml"))
    assert [r.row.limit.name for r in compute(off).limits.rows] == ["tilt", "tilt"]


@pytest.mark.parametrize("limits, key", [
    ('[limits]\n[[limits.overrides]]\nreceptor = "nope"\ntilt = 0.01\n',
     "limits.overrides[0].receptor"),
    ("[limits]\ntilts = 0.01\n", "limits.tilts"),
    ("[limits]\npipe_differential_length = 5.0\n", "limits.pipe_differential_length"),
    ("[limits]\nsettlement = -5.0\n", "limits.settlement"),
])
def test_bad_limits_name_the_key(tmp_path, limits, key):
    with pytest.raises(InputError) as err:
        load_site(write(tmp_path, site_text(limits=limits)))
    assert key in str(err.value) and "\n" not in str(err.value)


def test_governing_line_and_check_rows(folder):
    from fillstress.console import closing_lines
    from fillstress.run.compute import RunSummary, check_site_file
    site_file = folder.parent / "site.toml"
    res = compute(load_site(site_file))
    line = [x for x in closing_lines(RunSummary(res, folder)) if x.startswith("governing")]
    g = res.limits.governing.row
    assert len(line) == 1 and g.limit.label in line[0] and g.receptor_id in line[0]
    assert math.isclose(g.utilisation, max(r.row.utilisation for r in res.limits.rows))
    plan = dict((a, b) for a, b in check_site_file(site_file).plan if a == "limits: at hut")
    assert "25 mm" in plan["limits: at hut"]
