"""[limits] max_heights = true: each body's factor on its height at the first limit, exact
for a stress limit (closed form of a uniform rectangle, Boussinesq 1885 as integrated by
Holl 1940 in tests/reference.py) and against a brute-force scan of full runs for a
settlement limit."""
from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest

import reference
from fillstress.run.compute import compute, run_site_file
from fillstress.site.build import load_site, scaled_body

# An invented yard: one rectangular pad (aligned with the cells, so the cells add up to the
# rectangle exactly), a borehole under it and a store beside it, on one clay layer.
SITE = '''\
[site]
name = "Osier Fen lay-down pad"
crs = "EPSG:32631"
units = "SI"

[grid]
cell = 1.0
margin = 6.0
convergence_check = false

[bodies.pad]
kind = "footprint"
outline = [[0.0, 0.0], [20.0, 0.0], [20.0, 12.0], [0.0, 12.0]]
height = 2.0
unit_weight = 20.0
{second}
[soil]
water_table = 1.0
[[soil.layers]]
name = "grey clay"
top = 0.0
bottom = 10.0
unit_weight = 18.0
saturated_unit_weight = 19.0
cc = 0.3
cr = 0.03
e0 = 1.0
ocr = 1.2

[[boreholes]]
id = "BH"
x = 7.0
y = 5.0
top = 1.0
bottom = 7.0
step = 2.0

[[buildings]]
id = "store"
outline = [[23.0, 2.0], [31.0, 2.0], [31.0, 10.0], [23.0, 10.0]]
foundation_depth = 0.5

[limits]
published = false
max_heights = true
{limits}
'''


def write(tmp_path, limits, second="", name="site.toml", text=SITE):
    path = tmp_path / name
    path.write_text(text.format(limits=limits, second=second), encoding="utf-8")
    return path


def test_stress_ratio_factor_is_the_closed_form_of_a_rectangle(tmp_path):
    site = load_site(write(tmp_path, "stress_ratio = 0.4"))
    (found,) = compute(site).max_heights
    z = np.array([1.0, 3.0, 5.0, 7.0])
    influence = reference.rectangle(0.0 - 7.0, 20.0 - 7.0, 0.0 - 5.0, 12.0 - 5.0, z)
    sigma = 18.0 * 1.0 + (19.0 - 9.81) * (z - 1.0)            # σ'v0 by hand, γw = 9.81
    per_point = 0.4 * sigma / (40.0 * influence)               # q = 2 m × 20 kN/m³
    assert found.scale == pytest.approx(per_point.min(), rel=1e-9)
    assert found.max_height_m == pytest.approx(2.0 * per_point.min(), rel=1e-9)
    assert (found.limit, found.receptor_id, found.tolerance) == ("stress_ratio", "BH", 0.0)


def _largest_utilisation(site, factor: float) -> float:
    """The governing utilisation of a full run with the pad's height scaled."""
    bodies = [scaled_body(b, 1.0, factor) if b.name == "pad" else b for b in site.bodies]
    res = compute(dataclasses.replace(site, bodies=bodies))
    return res.limits.governing.row.utilisation


def test_settlement_factor_against_a_brute_force_scan(tmp_path):
    """The store's settlement limit with a second body in place: full runs at scaled
    heights stay below the limit up to the factor found and pass it just above."""
    second = ('\n[bodies.bund]\nkind = "footprint"\n'
              'outline = [[22.0, 12.0], [32.0, 12.0], [32.0, 15.0], [22.0, 15.0]]\n'
              "height = 1.0\nunit_weight = 18.0\n")
    site = load_site(write(tmp_path, "settlement = 40.0", second))
    pad = {m.body: m for m in compute(site).max_heights}["pad"]
    assert (pad.limit, pad.receptor_id, pad.tolerance) == ("settlement", "store", 1e-4)
    scan = [_largest_utilisation(site, s) for s in np.linspace(0.25, 1.0, 4) * pad.scale]
    assert all(np.diff(scan) > 0) and scan[-1] == pytest.approx(1.0, rel=1e-3)
    assert _largest_utilisation(site, pad.scale * 0.995) < 1.0 < _largest_utilisation(
        site, pad.scale * 1.005)


def test_max_heights_csv_and_off_by_default(tmp_path):
    run_site_file(write(tmp_path, "stress_ratio = 0.4\nsettlement = 40.0"), tmp_path / "out",
                  report=False)
    table = pd.read_csv(tmp_path / "out" / "max_heights.csv", encoding="utf-8-sig")
    assert list(table.columns) == ["body", "scale", "max_height_m", "governing_limit",
                                   "receptor_kind", "receptor_id", "tolerance"]
    assert table["max_height_m"].iloc[0] == pytest.approx(2.0 * table["scale"].iloc[0],
                                                          rel=1e-5)
    plain = load_site(write(tmp_path, "stress_ratio = 0.4", name="plain.toml",
                            text=SITE.replace("max_heights = true\n", "")))
    assert not plain.settings.max_heights
    res = compute(plain)
    assert res.max_heights == [] and res.limits.governing is not None


def test_console_says_when_the_other_bodies_already_reach_a_limit():
    """Scale 0 is no height at all: the line says why instead of 'maximum height 0 ft'."""
    from types import SimpleNamespace

    from fillstress.console import _max_height_line
    from fillstress.units import US
    row = dict(body="widening", limit="stress_increase", receptor_kind="borehole",
               receptor_id="QB-1")
    blocked = _max_height_line(SimpleNamespace(**row, scale=0.0, max_height_m=0.0), US)
    assert "none, the other bodies alone already reach stress_increase at borehole QB-1" in blocked
    fine = _max_height_line(SimpleNamespace(**row, scale=1.5, max_height_m=3.048), US)
    assert "10 ft (× 1.5)" in fine
