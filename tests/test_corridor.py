"""Long corridors: the default cell, ground used only where needed, unit and datum slips,
on a short version of the corridor test site (tools/make_corridor_site.py)."""
from __future__ import annotations

import importlib.util
import os
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from fillstress.errors import InputError
from fillstress.run.compute import check_site_file
from fillstress.site.build import load_site

ROOT = Path(__file__).resolve().parents[1]
FOOT = 0.3048


def _tool():
    spec = importlib.util.spec_from_file_location(
        "_tool_corridor", ROOT / "tools" / "make_corridor_site.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def corridor(tmp_path_factory):
    """A 0.2-mile corridor with 10 ft cells (quick), written once; tests copy what they
    change."""
    return _tool().write_corridor_site(tmp_path_factory.mktemp("corridor"), miles=0.2,
                                       cell_ft=10.0)


@pytest.fixture(scope="module")
def corridor_defaults(tmp_path_factory):
    """The same corridor with the default cell."""
    return _tool().write_corridor_site(tmp_path_factory.mktemp("defaults"), miles=0.2)


def _variant(corridor, tmp_path, edit_site=None, keep_shot=None) -> Path:
    """A copy of the corridor with the site file edited and/or survey shots dropped."""
    for f in corridor.parent.iterdir():
        (tmp_path / f.name).write_bytes(f.read_bytes())
    site = tmp_path / "site.toml"
    if edit_site:
        site.write_text(edit_site(site.read_text()))
    if keep_shot:
        survey = tmp_path / "existing_survey.csv"
        shots = np.loadtxt(survey, delimiter=",", skiprows=1)
        np.savetxt(survey, shots[keep_shot(shots)], delimiter=",", fmt="%.2f",
                   header="easting,northing,elevation", comments="")
    return site


def _building(text: str, hid: str) -> tuple[np.ndarray, int]:
    """Outline (ftUS) of building `hid` and its index among the [[buildings]]."""
    blocks = text.split("[[buildings]]")[1:]
    k = next(i for i, b in enumerate(blocks) if f'id = "{hid}"' in b)
    ring = re.search(r"outline = (\[\[.*?\]\])", blocks[k]).group(1)
    return np.array(eval(ring)), k


def test_check_names_the_rule_behind_a_round_default_cell_in_feet(corridor_defaults):
    """The corridor's 1 ft borehole top and 2 ft foundations would ask for 0.5 ft cells;
    the grid's area holds the default to at most MAX_DEFAULT_CELLS, in whole feet."""
    from fillstress.shapes.bodies import MAX_DEFAULT_CELLS
    report = check_site_file(corridor_defaults)
    rows = dict((r[0], r[1]) for r in report.plan)
    site = report.site
    cell_ft = site.spec.dx / site.metres_per_unit   # whole feet of the CRS (US survey)
    assert round(cell_ft, 9) in (1.0, 2.0, 2.5, 5.0, 10.0)
    assert site.spec.nx * site.spec.ny <= MAX_DEFAULT_CELLS
    assert rows["cell size rule"].startswith("work bound")
    assert "0.5 ft" in rows["cell size rule"]


def test_survey_that_misses_the_rectangle_around_the_curve_is_enough(corridor):
    """The strip survey leaves most of the grid's rectangle without ground: nothing
    that uses the ground is there, so the site builds without complaint."""
    site = load_site(corridor)
    ground = site.ground_elevation_grid()
    assert np.isnan(ground).mean() > 0.03         # part of the grid has no ground
    assert np.isfinite(site.ground_elevation_grid(filled=True)).all()   # drawn, not used
    assert site.warnings == []


def test_home_founded_by_elevation_off_the_survey_is_refused_naming_file_and_place(
        corridor, tmp_path):
    ring, k = _building(corridor.read_text(), "home_3")
    centre = ring.mean(axis=0)
    road, _, _ = _tool().alignment(0.2 * 5280, 5.0)

    def keep(shots):
        # a gap from the fill's edge out past the home to the edge of the strip (a hole
        # inside a survey is interpolated across; one open to the outside is not ground)
        off_road = np.hypot(shots[:, None, 0] - road[:, 0],
                            shots[:, None, 1] - road[:, 1]).min(axis=1) > 70.0
        this_side = np.hypot(shots[:, 0] - centre[0], shots[:, 1] - centre[1]) < 450.0
        return ~(off_road & this_side & ((shots[:, :2] - road.mean(axis=0)) @ (
            centre - road.mean(axis=0)) > 0))
    site = _variant(corridor, tmp_path, keep_shot=keep)
    with pytest.raises(InputError) as err:
        load_site(site)
    text = str(err.value)
    assert "existing_survey.csv" in text and f"buildings[{k}].foundation_elevation" in text
    x, y = (float(v.replace(",", "")) for v in re.search(
        r"x = ([\d,.]+), y = ([\d,.]+)", text).groups())
    assert np.hypot(x - centre[0], y - centre[1]) < 1.0     # the foundation's centroid


def test_design_surface_beyond_the_survey_is_refused_naming_the_body(corridor, tmp_path):
    text = corridor.read_text()
    ring, _ = _building(text, "home_1")            # next to the fill, near the west end
    centre = ring.mean(axis=0)
    site = _variant(corridor, tmp_path, keep_shot=lambda s: np.hypot(
        s[:, 0] - centre[0], s[:, 1] - centre[1]) > 300.0)
    with pytest.raises(InputError, match=r"bodies\.lift_1.*does not cover \d+ %") as err:
        load_site(site)
    assert "existing_survey.csv" in str(err.value)


def test_invert_typed_as_a_depth_in_the_elevation_key_is_warned(corridor, tmp_path):
    """invert_elevation = 7 ft where the ground is near 590 ft is a depth typed in the
    elevation key: the site builds (the number is possible) and says so."""
    site = _variant(corridor, tmp_path, edit_site=lambda t: re.sub(
        r"invert_elevation = \[.*?\]", "invert_elevation = [7.0, 7.0]", t))
    built = load_site(site)
    assert any("invert_elevation" in w and "below the ground" in w and "depth key" in w
               for w in built.warnings)
    printed = subprocess.run([sys.executable, "-m", "fillstress.cli", "check", str(site)],
                             capture_output=True, text=True, env={**os.environ,
                             "PYTHONPATH": str(ROOT / "src"), "COLUMNS": "200"})
    assert printed.returncode == 0
    assert "warning: pipes[0].invert_elevation = 7 ft" in printed.stdout


EMBANKMENT = """[site]
name = "Hollin Lane levee"
crs = "EPSG:2277"
units = "US"
[bodies.levee]
kind = "embankment"
{line}
crest_width = 12.0
side_slope = 3.0
heights = [[0, 6.0], [400, 6.0]]
unit_weight = 120.0
"""


def test_us_spelling_centerline_is_the_same_key_and_both_at_once_are_refused(tmp_path):
    from fillstress.site.config import read_site_file
    line = "[[3050000, 10070000], [3050400, 10070000]]"
    spelled = {}
    for key in ("centreline", "centerline"):
        path = tmp_path / f"{key}.toml"
        path.write_text(EMBANKMENT.format(line=f"{key} = {line}"))
        spelled[key] = read_site_file(path)["bodies"]["levee"]["centreline"]
    np.testing.assert_array_equal(spelled["centreline"], spelled["centerline"])
    path = tmp_path / "both.toml"
    path.write_text(EMBANKMENT.format(line=f"centreline = {line}\ncenterline = {line}"))
    with pytest.raises(InputError, match=r"bodies\.levee\.centerline.*not both"):
        read_site_file(path)


# --- alignment: stations, profile, sections -------------------------------------------
LEVEE = """[site]
name = "Hollin Lane levee"
crs = "EPSG:2277"
units = "US"
[grid]
cell = 5.0
margin = 60.0
[bodies.levee]
kind = "embankment"
centerline = [[3050000, 10070000], [3050600, 10070000]]
crest_width = 12.0
side_slope = 3.0
heights = [[0, 8.0], [600, 8.0]]
unit_weight = 120.0
[alignment]
body = "levee"
start_station = 1000.0
stations = [1300.0]
profile_depths = [10.0]
profile_step = 50.0
section_width = 162.0   # ft: the 81 offsets miss the 5 ft cell edges
[[boreholes]]
id = "B-mid"
x = 3050300.0
y = 10070000.0
top = 1.0
bottom = 40.0
step = 1.0
[soil]
water_table = 4.0
[[soil.layers]]
name = "soft clay"
top = 0.0
bottom = 40.0
unit_weight = 105.0
cc = 0.35
cr = 0.05
e0 = 1.1
ocr = 1.2
cv = 20.0
[settlement]
stage_days = [0]
"""


@pytest.fixture(scope="module")
def levee(tmp_path_factory):
    """A straight 600 ft levee stationed from 10+00, run once (no report, no check)."""
    from fillstress.run.compute import compute
    path = tmp_path_factory.mktemp("levee") / "site.toml"
    path.write_text(LEVEE.replace("[grid]", "[grid]\nconvergence_check = false"))
    return compute(load_site(path))


def test_stations_read_the_us_spellings_and_start_where_stationing_starts(levee):
    a = levee.site.alignment
    assert a.start == pytest.approx(1000 * FOOT) and a.chainages == pytest.approx(
        (1300 * FOOT,))
    profile = levee.corridor["alignment_profile"]
    assert profile["station"].iloc[0] == pytest.approx(1000 * FOOT)
    assert profile["station"].iloc[-1] == pytest.approx(1600 * FOOT)


def test_profile_stress_matches_the_slow_reference_over_the_load_grid(levee):
    from reference import grid_stress
    profile = levee.corridor["alignment_profile"]
    g = levee.grid
    xyz = np.column_stack([profile["x"], profile["y"], np.full(len(profile), 10 * FOOT)])
    expected = grid_stress(g.pressure, g.x0, g.y0, g.dx, g.dy, xyz)
    np.testing.assert_allclose(profile["dsz_z3.048"], expected, rtol=1e-6)
    # mid-levee: 8 ft of fill under the crest
    mid = profile.iloc[len(profile) // 2]
    assert mid["fill_height"] == pytest.approx(8 * FOOT, rel=1e-6)


def test_profile_settlement_equals_the_borehole_at_the_same_place(levee):
    """Station 13+00 is the borehole B-mid: two paths (alignment, receptor) agree."""
    profile = levee.corridor["alignment_profile"]
    row = profile.iloc[int(np.argmin(np.abs(profile["station"] - 1300 * FOOT)))]
    hole = levee.points[(levee.points["receptor_id"] == "B-mid")
                        & levee.points["settlement"].notna()]
    assert row["settlement"] == pytest.approx(float(hole["settlement"].iloc[0]), rel=1e-9)
    years = [c for c in profile.columns if c.endswith("yr")]
    values = row[years].to_numpy(float)
    assert np.all(np.diff(values) >= 0) and values[-1] <= row["settlement"] * (1 + 1e-9)


def test_alignment_asks_grid_by_grid_with_the_values_of_separate_calls(corridor):
    """The alignment asks for Δσz one stage grid after another (so the run's evaluator
    prepares each grid once), with the tables a plain call per request gives."""
    from fillstress.run.corridor import corridor_results
    from fillstress.run.point import RunStress, stress
    site = load_site(corridor)
    asked = []

    def plain(grid, xyz):
        if not asked or asked[-1] is not grid:
            asked.append(grid)
        return stress(site, grid, xyz)

    separate = corridor_results(site, plain)
    assert len(asked) == len(site.stages) == 2              # one run of calls per grid
    kept = corridor_results(site, RunStress(site))
    for name, table in separate.items():
        assert len(table) and list(kept[name].columns) == list(table.columns)
        np.testing.assert_allclose(kept[name].to_numpy(float), table.to_numpy(float),
                                   rtol=1e-12, atol=1e-12)


def test_cross_section_of_a_straight_levee_is_symmetric(levee):
    surface = levee.corridor["alignment_section_surface"]
    panel = levee.corridor["alignment_section_dsz"]
    assert surface["offset"].min() == pytest.approx(-81 * FOOT)
    # The 5 ft cells sit 0.028 cell off the centreline (90 ftUS of margin and toe are not
    # 18 international-foot cells), so symmetry holds to the raster's resolution: a
    # cell's run on the 3:1 slope for the fill, a small fraction for the smooth results.
    fill = surface["fill_height"].to_numpy()
    np.testing.assert_allclose(fill, fill[::-1], atol=5 * FOOT / 3)
    settle = surface["settlement"].to_numpy()
    np.testing.assert_allclose(settle, settle[::-1], rtol=0.02, atol=1e-2 * settle.max())
    for _, level in panel.groupby("depth"):
        dsz = level["dsz"].to_numpy()
        np.testing.assert_allclose(dsz, dsz[::-1], rtol=0.02, atol=1e-2 * dsz.max())
    assert fill[40] == pytest.approx(8 * FOOT) and settle[40] == settle.max()


def test_alignment_refusals(tmp_path):
    cases = {"stations = [1300.0]": ("stations = [2000.0]", r"station 20\+00 is off the "
                                     r"centreline \(10\+00 to 16\+00\)"),
             'body = "levee"': ('body = "road"', "not an embankment body")}
    for old, (new, message) in cases.items():
        path = tmp_path / "site.toml"
        path.write_text(LEVEE.replace(old, new))
        with pytest.raises(InputError, match=message):
            load_site(path)


def test_report_shows_the_profile_and_sections_with_us_stations(tmp_path):
    from fillstress.run.compute import run_site_file
    path = tmp_path / "site.toml"
    path.write_text(LEVEE.replace("[grid]", "[grid]\nconvergence_check = false")
                    + "[outputs]\nscene = false\nvtk = false\nnetcdf = false\n")
    run_site_file(path, tmp_path / "out")
    html = (tmp_path / "out" / "report.html").read_text()
    section = html[html.index('<section id="alignment"'):]
    section = section[:section.index("</section>")]
    sheets = section.count('<img alt="Plan sheet')          # 600 ft of a 60 ft wide levee
    assert "Cross-section at station 13+00" in section and sheets == 3
    assert section.count("<img") == 2 + sheets               # profile, section and sheets
    raw = (tmp_path / "out" / "alignment_profile.csv").read_bytes()
    assert raw.startswith(b"\xef\xbb\xbf")          # UTF-8 BOM, as every CSV of a run
    head = raw.decode("utf-8-sig").splitlines()[:2]
    assert head[0].startswith("station_ft,station_label,") and "dsz_at_10ft_psf" in head[0]
    assert head[1].split(",")[1] == "10+00"
    # rounded as the other tables: 6 decimals of lengths, 6 significant digits otherwise
    names, values = head[0].split(","), head[1].split(",")
    for name, text in zip(names, values):
        if text and name != "station_label":
            digits = text.lstrip("-").split(".")
            if name.endswith("_ft") and len(digits) == 2:
                assert len(digits[1]) <= 6, (name, text)
            elif not name.endswith("_ft"):
                assert len(text.lstrip("-").replace(".", "").lstrip("0")) <= 6, (name, text)


# EPSG:2277's projection in international feet (the definition with +units=ft).
TEXAS_CENTRAL_FT = ("+proj=lcc +lat_0=29.6666666666667 +lon_0=-100.333333333333 "
                    "+lat_1=31.8833333333333 +lat_2=30.1166666666667 +x_0=700000 "
                    "+y_0=3000000 +datum=NAD83 +units=ft")


def test_site_crs_in_international_feet_over_us_survey_foot_files_is_warned(corridor,
                                                                             tmp_path):
    """The lifts' LandXML state EPSG:2277 (US survey feet); with the site CRS in
    international feet they move about 21 ft at these coordinates (2 ppm of 1e7 ft)
    while the survey, which states no CRS, stays put: each moved file is named."""
    site = _variant(corridor, tmp_path, edit_site=lambda t: t.replace(
        'crs = "EPSG:2277"', f'crs = "{TEXAS_CENTRAL_FT}"'))
    warnings = load_site(site).warnings
    moved = [w for w in warnings if "states a CRS close to the site's" in w]
    assert len(moved) == 2 and {w.split()[0] for w in moved} == {"lift_1.xml", "lift_2.xml"}
    shift = float(re.search(r"moved it ([\d.]+) ft", moved[0]).group(1))
    assert 19.0 < shift < 23.0
    assert load_site(corridor).warnings == []       # the same files in their own CRS


def test_profile_depths_default_to_the_pipe_crowns_and_building_foundations(tmp_path):
    text = LEVEE.replace("profile_depths = [10.0]\n", "") + """
[[pipes]]
id = "W1"
line = [[3050100, 10069900], [3050100, 10070100]]
crown_depth = 6.0
[[buildings]]
id = "H1"
outline = [[3050400, 10070100], [3050440, 10070100], [3050440, 10070130], [3050400, 10070130]]
foundation_depth = 3.0
"""
    path = tmp_path / "site.toml"
    path.write_text(text)
    assert load_site(path).alignment.profile_depths == pytest.approx((3 * FOOT, 6 * FOOT))
    path.write_text(LEVEE.replace("profile_depths = [10.0]\n", ""))
    assert load_site(path).alignment.profile_depths == ()      # nothing to take them from


def test_plan_sheets_follow_the_levee_from_its_first_station_to_its_last(tmp_path):
    """A long thin fill is drawn in sheets along the alignment: contiguous station ranges
    from 10+00 to 16+00, each a picture; the report carries them."""
    from fillstress.io.results import ResultsFolder
    from fillstress.report import write_report
    from fillstress.report.sheets import plan_sheets
    from fillstress.run.compute import run_site_file
    path = tmp_path / "site.toml"
    path.write_text(LEVEE.replace("[grid]", "[grid]\nconvergence_check = false"))
    out = tmp_path / "res"
    run_site_file(path, out, report=False)
    folder = ResultsFolder(out)
    sheets = plan_sheets(folder, folder.table("alignment_profile"))
    assert len(sheets) >= 2
    assert all(png[:4] == b"\x89PNG" for png, _ in sheets)
    ranges = [caption.split("stations ")[1].split(":")[0].split(" to ") for _, caption in sheets]
    assert ranges[0][0] == "10+00" and ranges[-1][1] == "16+00"
    assert all(a[1] == b[0] for a, b in zip(ranges, ranges[1:]))      # contiguous
    page = write_report(out).read_text()
    assert f"Plan sheet {len(sheets)} of {len(sheets)} along the alignment" in page
