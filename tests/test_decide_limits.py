"""Limits and their utilisation (decide/limits.py).

Limit values: Bjerrum (1963) 1/500 and Skempton & MacDonald (1956) 1/300 angular
distortion, as reproduced in standard foundation texts (recalled from memory). The receptor
results are invented; expected utilisations are derived by hand (value ÷ limit).
"""
from __future__ import annotations

import numpy as np
import pytest

from fillstress.decide.limits import (BUILDING_LIMITS, Limit, check_limits, limits_for,
                                      measure, utilisation)
from fillstress.errors import InputError
from fillstress.structures import building_settlement, pipe_settlement


def _shed():
    # 20 m × 10 m building, one long wall sagging: β = 0.012/10 on each half of the wall
    xy = [[0, 0], [10, 0], [20, 0], [0, 10], [10, 10], [20, 10]]
    s = [0.010, 0.022, 0.010, 0.010, 0.010, 0.010]
    return building_settlement("shed", xy, s, outline=[[0, 0], [20, 0], [20, 10], [0, 10]])


def test_building_quantities_are_read_under_the_names_structures_uses():
    shed = _shed()
    assert measure(shed, Limit("angular_distortion", 1 / 500)) == shed.angular_distortion
    assert measure(shed, Limit("settlement", 0.05)) == pytest.approx(0.022)
    assert measure(shed, Limit("differential_settlement", 0.04)) == pytest.approx(0.012)
    assert measure(shed, Limit("tilt", 1 / 250)) == shed.tilt
    assert measure(shed, Limit("pipe_curvature", 1e-4)) is None
    assert measure(shed, Limit("differential_settlement", 0.04, length_m=5.0)) is None


def test_pipe_differential_is_taken_over_the_limits_own_length():
    # profile 0, 10, 25, 30 mm at 0, 4, 8, 12 m: within 4 m the largest step is 15 mm,
    # within 8 m it is 25 − 0 = 25 mm, over the whole pipe 30 mm (derived)
    p = pipe_settlement("main", [0, 4, 8, 12], [0.0, 0.010, 0.025, 0.030], [1, 2, 3, 2], 12.0)
    got = [measure(p, Limit("differential_settlement", 0.02, length_m=L)) for L in (4, 8, 12)]
    assert got == pytest.approx([0.015, 0.025, 0.030])
    assert measure(p, Limit("differential_settlement", 0.02)) == pytest.approx(0.030)
    assert measure(p, Limit("stress_increase", 10.0)) == 3.0
    assert measure(p, Limit("angular_distortion", 1 / 500)) is None


def test_check_limits_finds_the_governing_receptor_and_limit():
    shed = _shed()          # β = 0.0012: 0.6 of 1/500, 0.36 of 1/300
    results = {"shed": shed, "BH1": {"stress_ratio": 0.15, "settlement": 0.07}}
    limits = [BUILDING_LIMITS[0], BUILDING_LIMITS[1], Limit("settlement", 0.065, "S&M 1956"),
              Limit("stress_ratio", 0.2, "common practice")]
    check = check_limits(results, limits)
    table = {(r.receptor_id, r.limit.label): r.utilisation for r in check.rows}
    assert table[("shed", "beta_no_cracking")] == pytest.approx(0.0012 * 500)
    assert table[("shed", "beta_cracking")] == pytest.approx(0.0012 * 300)
    assert table[("shed", "settlement")] == pytest.approx(0.022 / 0.065)
    assert table[("BH1", "stress_ratio")] == pytest.approx(0.75)
    assert ("BH1", "beta_no_cracking") not in table
    assert check.governing.receptor_id == "BH1" and check.governing.limit.quantity == "settlement"
    assert check.governing.utilisation == pytest.approx(0.07 / 0.065)
    rows = check.as_rows()
    assert sum(r["governing"] for r in rows) == 1 and rows[0]["unit"] == "1"


def test_an_override_replaces_only_its_quantity_at_its_receptor():
    base = [Limit("settlement", 0.05), Limit("stress_ratio", 0.2)]
    over = {"BH2": [Limit("settlement", 0.10, "tolerant shed")]}
    results = {"BH1": {"settlement": 0.06}, "BH2": {"settlement": 0.06, "stress_ratio": 0.1}}
    check = check_limits(results, base, over)
    got = {(r.receptor_id, r.limit.quantity): r.utilisation for r in check.rows}
    assert got == pytest.approx({("BH1", "settlement"): 1.2, ("BH2", "settlement"): 0.6,
                                 ("BH2", "stress_ratio"): 0.5})
    assert [lim.source for lim in limits_for("BH2", base, over)] == ["", "tolerant shed"]


def test_utilisation_is_signed_and_refuses_a_bad_limit():
    np.testing.assert_allclose(utilisation([-0.01, 0.0, 0.03], 0.02), [-0.5, 0.0, 1.5])
    with pytest.raises(InputError, match="limit"):
        utilisation(1.0, [1.0, 0.0])
    with pytest.raises(InputError, match="quantity"):
        Limit("heave", 0.01)
    with pytest.raises(InputError, match="length_m"):
        Limit("settlement", 0.05, length_m=3.0)


def test_no_applicable_limit_gives_no_governing_row():
    check = check_limits({"BH1": {"settlement": 0.01}}, [Limit("tilt", 0.004)])
    assert check.rows == () and check.governing is None
    with pytest.raises(InputError, match="result"):
        check_limits({"x": 3.0}, [Limit("tilt", 0.004)])


def test_published_defaults_name_their_source():
    assert BUILDING_LIMITS[0].value == pytest.approx(1 / 500)      # Bjerrum (1963)
    assert all(lim.source for lim in BUILDING_LIMITS)
