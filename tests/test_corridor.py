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
    cell_ft = site.spec.dx / FOOT
    assert cell_ft in (1.0, 2.0, 2.5, 5.0, 10.0)
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
