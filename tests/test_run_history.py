"""A run along a load history: a surcharge with a removal day over drained and undrained
soft clay (an invented site, Marrow Fen depot). The numbers come from the run's own tables
and are checked against the library functions and against each other."""
from __future__ import annotations

import math
import textwrap

import numpy as np
import pytest

from fillstress.drains import VerticalDrains, combined_degree
from fillstress.errors import InputError
from fillstress.run.compute import compute
from fillstress.site.build import load_site

SITE = """
[site]
name = "Marrow Fen depot"
units = "SI"
crs = "EPSG:32630"

[grid]
cell = 4.0
margin = 10.0

[bodies.platform]
kind = "footprint"
outline = [[0, 0], [40, 0], [40, 30], [0, 30]]
height = 2.0
unit_weight = 20.0
stage = 1

[bodies.surcharge]
kind = "footprint"
outline = [[0, 0], [40, 0], [40, 30], [0, 30]]
height = 1.5
unit_weight = 18.0
stage = 2
{removal}

[[boreholes]]
id = "in-drains"
x = 10.0
y = 15.0
bottom = 12.0
step = 2.0

[[boreholes]]
id = "no-drains"
x = 30.0
y = 15.0
bottom = 12.0
step = 2.0

[soil]
water_table = 0.5
rigid_base = 11.0

[[soil.layers]]
name = "crust"
top = 0.0
bottom = 1.0
unit_weight = 18.0
modulus = 8000.0

[[soil.layers]]
name = "peaty clay"
top = 1.0
bottom = 11.0
unit_weight = 15.5
cc = 0.8
cr = 0.08
e0 = 2.2
ocr = 1.1
cv = 1.2
ch = 2.0
c_alpha = 0.03
c_alpha_ratio_surcharged = 0.4

[settlement]
stage_days = [0, 60]
stage_durations = [20, 10]
target_degree = 0.9
target_day = 240

[[drains]]
id = "west half"
outline = [[-5, -5], [20, -5], [20, 35], [-5, 35]]
pattern = "square"
spacing = 1.6
width = 0.1
thickness = 0.005
depth = 11.0
smear_diameter = 0.25
k_ratio = 2.5
"""


def _run(tmp_path, removal="removal_day = 400"):
    path = tmp_path / "site.toml"
    path.write_text(textwrap.dedent(SITE.replace("{removal}", removal)))
    return compute(load_site(path))


@pytest.fixture(scope="module")
def res(tmp_path_factory):
    return _run(tmp_path_factory.mktemp("fen"))


def _surface(res, rid):
    p = res.points
    return float(p[(p.receptor_id == rid) & p.settlement.notna()].settlement.iloc[0])


def test_sublayer_table_sums_to_the_reported_settlement(res):
    sub = res.record["sublayers"]
    for rid in ("in-drains", "no-drains"):
        rows = sub[sub.receptor_id == rid]
        assert rows.settlement.sum() == pytest.approx(_surface(res, rid), rel=1e-12)
        assert set(rows.branch[rows.layer == "peaty clay"]) == {"unloaded on Cr after Cc"}
        assert rows.drains.any() == (rid == "in-drains")


def test_removal_gives_rebound_and_the_states_are_listed(res):
    states = res.record["load_states"]
    assert states.event.drop_duplicates().tolist() == ["stage 1", "stage 2", "removal of surcharge"]
    hole = states[states.receptor_id == "no-drains"].settlement.to_numpy()
    assert hole[1] > hole[2] > hole[0]          # surcharge, Cr rebound, still above platform-only
    p = res.points
    rebound = float(p[p.receptor_id == "no-drains"].settlement_rebound.dropna().iloc[0])
    assert rebound == pytest.approx(hole[1] - hole[2], rel=1e-12)


def test_drains_speed_consolidation_and_secondary_is_reduced_after_surcharge(res, tmp_path):
    times = res.record["consolidation_times"].set_index("receptor_id")
    assert times.loc["in-drains", "t90_days"] < 0.2 * times.loc["no-drains", "t90_days"]
    assert times.loc["in-drains", "t50_days"] < times.loc["in-drains", "t90_days"] < times.loc["in-drains", "t95_days"]
    kept = _run(tmp_path, removal="")
    sec_removed = times.loc["no-drains", "settlement_secondary"]
    sec_kept = kept.record["consolidation_times"].set_index("receptor_id").loc["no-drains", "settlement_secondary"]
    assert 0 < sec_removed < sec_kept          # Cα' = 0.4 Cα after the surcharge comes off
    assert "preload" not in kept.record


def test_earliest_removal_day_reaches_the_permanent_settlement(res):
    pre = res.record["preload"].set_index("receptor_id")
    for rid in ("in-drains", "no-drains"):
        row = pre.loc[rid]
        assert row.settlement_target < row.settlement_peak_final
        assert (row.settlement_at_removal >= row.settlement_target) == (row.removal_day >= row.earliest_removal_day)
    assert pre.loc["in-drains", "earliest_removal_day"] < pre.loc["no-drains", "earliest_removal_day"]
    # the time curve of the permanent + surcharge load crosses the target on that day: the
    # curve with removal follows it until the removal day (400), after the earliest day here
    days, curve = res.time_curves["in-drains"]
    d = pre.loc["in-drains", "earliest_removal_day"]
    assert d < 400
    assert np.interp(d, days, curve) == pytest.approx(pre.loc["in-drains", "settlement_target"], rel=2e-3)


def test_drain_spacing_for_the_target_is_solved(res):
    row = res.record["drain_design"].iloc[0]
    d = VerticalDrains(row.spacing_required, "square", width_m=0.1, thickness_m=0.005,
                       depth_m=11.0, smear_diameter_m=0.25, k_ratio=2.5)
    uh = 1 - math.exp(-float(d.radial_rate(2.0)) * 240 / 365.25)
    assert combined_degree(row.vertical_degree, uh) == pytest.approx(0.9, abs=1e-6)


def test_removal_before_the_body_is_built_is_refused(tmp_path):
    with pytest.raises(InputError, match="removal_day"):
        _run(tmp_path, removal="removal_day = 65")


def test_check_lists_the_load_history_and_the_drains(tmp_path, capsys):
    from fillstress.cli import main
    path = tmp_path / "site.toml"
    path.write_text(textwrap.dedent(SITE.replace("{removal}", "removal_day = 400")))
    assert main(["check", str(path)]) == 0
    out = " ".join(capsys.readouterr().out.split())
    assert "removal of" in out and "on day 400" in out
    assert "drains: west half" in out and "square, 1.6 m spacing" in out
    path.write_text(textwrap.dedent(SITE.replace("{removal}", "removal_day = 65")))
    assert main(["check", str(path)]) == 2                   # refused by check, as by run
    assert "removal_day" in capsys.readouterr().err


def test_results_folder_and_report_carry_the_record(tmp_path):
    from fillstress.report import write_report
    from fillstress.run.compute import run_site_file
    site = SITE.replace("{removal}", "removal_day = 400") + textwrap.dedent("""
        [outputs]
        geotiff = false
        netcdf = false
        vtk = false
        scene = false
        """)
    path = tmp_path / "site.toml"
    path.write_text(textwrap.dedent(site))
    out = tmp_path / "res"
    run_site_file(path, out, report=False)
    import pandas as pd
    sub = pd.read_csv(out / "settlement_sublayers.csv", comment="#")
    holes = pd.read_csv(out / "boreholes_summary.csv", comment="#").set_index("receptor_id")
    sums = sub.groupby("receptor_id")["settlement_mm"].sum()
    for rid in ("in-drains", "no-drains"):
        # the CSVs hold 6 significant digits: the sum of ~40 rounded rows agrees to ~1e-5
        assert sums[rid] == pytest.approx(holes.loc[rid, "settlement_max_mm"], rel=2e-5)
    for name in ("load_states", "consolidation_times", "preload", "drain_design", "soil_profile",
                 "drains", "settlement_time"):
        assert (out / f"{name}.csv").is_file(), name
    curve = pd.read_csv(out / "settlement_time.csv", comment="#")
    assert curve.degree.between(0, 1.05).all()
    html = write_report(out).read_text(encoding="utf-8")
    record = html[html.index('id="record"'):]
    record = record[:record.index("</section>")]
    for words in ("Soil profile as used", "Load states", "earliest removal day",
                  "Sublayers of each borehole", "in-drains: total", "unloaded on Cr after Cc",
                  "t90 (days)", "spacing required"):
        assert words in record, words


def test_more_stage_durations_than_stages_is_warned(tmp_path):
    from fillstress.run.plan import site_warnings
    path = tmp_path / "site.toml"
    text = SITE.replace("{removal}", "removal_day = 400")
    path.write_text(textwrap.dedent(text.replace("stage_durations = [20, 10]",
                                                 "stage_durations = [20, 10, 5]")))
    site = load_site(path)
    assert site.stage_build_days() == [20.0, 10.0]
    assert any("[settlement.stage_durations] gives 3 durations for 2 stage(s)" in w
               for w in site_warnings(site))
