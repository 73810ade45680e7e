"""Buildings and pipes: differential settlement and angular distortion.

Limits: Bjerrum (1963) limiting angular distortions, as reproduced in standard foundation
texts (1/500, 1/300, 1/150). Geometry checks are derived by hand. Data are invented.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from fillstress.errors import InputError
from fillstress.structures import (BJERRUM_1963_LIMITS, adjacent_pairs, building_settlement,
                                   largest_differential_within, pipe_settlement)


def _grid(nx=5, ny=4, spacing=3.0, origin=(100.0, 200.0)):
    xs, ys = np.meshgrid(origin[0] + spacing * np.arange(nx), origin[1] + spacing * np.arange(ny))
    return np.column_stack([xs.ravel(), ys.ravel()])


# --- rigid tilt -----------------------------------------------------------------------
def test_tilted_rigid_line_distortion_equals_slope():
    # 8 points along a 35 m wall at an angle; settlement rises 1 mm per 0.4 m along it:
    # a rigid tilt of 1/400 (derived: |Δs|/L is the same for every pair).
    direction = np.array([math.cos(0.6), math.sin(0.6)])
    along = np.array([0.0, 5.0, 10.0, 15.0, 20.0, 25.0, 30.0, 35.0])
    xy = np.array([50.0, 80.0]) + along[:, None] * direction
    s = 0.012 + along / 400.0
    r = building_settlement("east wall", xy[::-1], s[::-1])
    assert r.angular_distortion == pytest.approx(1 / 400, rel=1e-12)
    assert r.tilt == pytest.approx(1 / 400, rel=1e-9)
    assert r.distortion_span_m == pytest.approx(5.0)
    assert r.differential_m == pytest.approx(35 / 400)


def test_tilted_rigid_plane_distortion_equals_slope():
    # Plane s = a + g·x on a regular grid: edges along x give exactly g, diagonals
    # g·cos θ, edges along y zero, so the largest is g (derived).
    xy = _grid()
    g = 1 / 250
    s = 0.03 + g * (xy[:, 0] - 100.0)
    r = building_settlement("depot", xy, s)
    assert r.angular_distortion == pytest.approx(g, rel=1e-12)
    assert r.tilt == pytest.approx(g, rel=1e-9)
    # removing the rigid tilt leaves nothing to distort
    flat = building_settlement("depot", xy, s, remove_tilt=True)
    assert flat.angular_distortion == pytest.approx(0.0, abs=1e-12)
    assert flat.tilt_removed and flat.worst_limit == ""


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), theta=st.floats(0, 2 * math.pi), g=st.floats(1e-4, 0.05))
def test_plane_distortion_never_exceeds_its_slope(seed, theta, g):
    # For s = g·(x cos θ + y sin θ), |Δs|/L = g·|cos(angle between edge and gradient)| <= g
    # (Cauchy–Schwarz), and the fitted tilt recovers g.
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 40, (12, 2))
    s = g * (xy[:, 0] * math.cos(theta) + xy[:, 1] * math.sin(theta))
    r = building_settlement("b", xy, s)
    assert r.angular_distortion <= g * (1 + 1e-9)
    assert r.tilt == pytest.approx(g, rel=1e-8)


# --- Bjerrum flags --------------------------------------------------------------------
@pytest.mark.parametrize("ratio, worst, exceeded", [
    (1 / 600, "", ()),
    (1 / 400, "no_cracking", ("no_cracking",)),
    (1 / 200, "panel_wall_cracking", ("panel_wall_cracking", "no_cracking")),
    (1 / 100, "structural_damage", ("structural_damage", "panel_wall_cracking", "no_cracking")),
])
def test_bjerrum_flags(ratio, worst, exceeded):
    xy = [[0.0, 0.0], [12.0, 0.0]]
    r = building_settlement("store", xy, [0.0, 12.0 * ratio])
    assert r.worst_limit == worst and r.exceeded == exceeded
    row = r.as_row()
    assert row["worst_limit"] == worst
    assert row["exceeds_no_cracking"] == ("no_cracking" in exceeded)
    assert set(BJERRUM_1963_LIMITS) == {"no_cracking", "panel_wall_cracking", "structural_damage"}


def test_limit_reached_exactly_is_flagged_and_custom_limits_apply():
    for span in (7.0, 15.0, 29.0):
        r = building_settlement("kiln", [[0, 0], [span, 0]], [0.0, span / 300])
        assert "panel_wall_cracking" in r.exceeded
    own = building_settlement("kiln", [[0, 0], [15, 0]], [0.0, 0.03], limits={"machinery": 1 / 750})
    assert own.exceeded == ("machinery",) and own.as_row()["exceeds_machinery"]


# --- adjacency and the vectorised distortion ------------------------------------------
def test_adjacent_pairs_of_a_square_and_a_line():
    pairs = adjacent_pairs([[0, 0], [10, 0], [10, 10], [0, 10]])
    assert len(pairs) == 5                                   # four sides and one diagonal
    sides = {(0, 1), (1, 2), (2, 3), (0, 3)}
    assert sides <= {tuple(p) for p in pairs.tolist()}
    assert adjacent_pairs([[3, 3]]).shape == (0, 2)
    assert adjacent_pairs([[0, 0], [4, 0], [2, 0], [1, 0]]).tolist() == [[0, 3], [1, 2], [2, 3]]


def test_vectorised_distortion_matches_plain_loop():
    rng = np.random.default_rng(11)
    xy = rng.uniform(0, 60, (30, 2))
    s = rng.uniform(0.01, 0.08, 30)
    r = building_settlement("yard office", xy, s)
    best = 0.0
    for i, j in adjacent_pairs(xy):
        length = math.dist(xy[i], xy[j])
        best = max(best, abs(s[i] - s[j]) / length)
    assert r.angular_distortion == pytest.approx(best, rel=1e-12)
    assert r.settlement_max_m == s.max() and r.settlement_min_m == s.min()


def test_explicit_pairs_and_point_ids():
    xy = [[0, 0], [6, 0], [12, 0], [6, 8]]
    s = [0.010, 0.020, 0.050, 0.011]
    r = building_settlement("mill", xy, s, point_ids=["NW", "N", "NE", "C"], pairs=[[0, 1], [1, 3]])
    # only the given pairs: |0.02 − 0.01| / 6 = 1/600 and |0.011 − 0.02| / 8 = 1/888.9
    assert r.angular_distortion == pytest.approx(0.01 / 6)
    assert r.distortion_points == ("NW", "N")
    assert r.as_row()["distortion_point_b"] == "N"


def test_single_point_building():
    r = building_settlement("kiosk", [[5.0, 5.0]], [0.02])
    assert r.angular_distortion == 0.0 and r.differential_m == 0.0 and r.distortion_points is None


@pytest.mark.parametrize("kwargs, arg", [
    (dict(xy=[[0, 0], [0, 0], [1, 1]], settlement=[0.0, 0.1, 0.0]), "xy"),
    (dict(xy=[[0, 0, 0]], settlement=[0.0]), "xy"),
    (dict(xy=[[0, 0], [1, 0]], settlement=[0.0]), "settlement"),
    (dict(xy=[[0, 0], [1, 0]], settlement=[0.0, np.nan]), "settlement"),
    (dict(xy=[[0, 0], [1, 0]], settlement=[0.0, 0.0], pairs=[[0, 2]]), "pairs"),
    (dict(xy=[[0, 0], [1, 0]], settlement=[0.0, 0.0], pairs=[[1, 1]]), "pairs"),
    (dict(xy=[[0, 0], [1, 0]], settlement=[0.0, 0.0], point_ids=["a"]), "point_ids"),
    (dict(xy=[[0, 0], [1, 0]], settlement=[0.0, 0.0], limits={"x": -1}), "limits"),
])
def test_building_bad_input(kwargs, arg):
    with pytest.raises(InputError, match=arg):
        building_settlement("b", **kwargs)


# --- pipes ----------------------------------------------------------------------------
def _reference_differential(ch, s, length):
    best = 0.0
    for i in range(len(ch)):
        for j in range(len(ch)):
            if abs(ch[i] - ch[j]) <= length * (1 + 1e-12) + 1e-12:
                best = max(best, abs(s[i] - s[j]))
    return best


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), length=st.floats(0.5, 80.0))
def test_largest_differential_matches_all_pairs(seed, length):
    rng = np.random.default_rng(seed)
    ch = np.sort(rng.choice(np.arange(0.0, 200.0, 0.5), size=40, replace=False))
    s = rng.uniform(0.0, 0.1, 40)
    got, pair = largest_differential_within(ch, s, length)
    assert got == pytest.approx(_reference_differential(ch, s, length), abs=1e-15)
    if pair is not None:
        i, j = pair
        assert abs(ch[j] - ch[i]) <= length * (1 + 1e-9) and abs(s[i] - s[j]) == pytest.approx(got)


def test_pipe_summary_by_hand():
    # A sewer under the toe of a fill: settlement is a bowl, crown stress peaks mid-way.
    ch = np.array([40.0, 0.0, 10.0, 20.0, 30.0, 50.0])
    s = np.array([0.030, 0.002, 0.010, 0.035, 0.045, 0.015])
    q = np.array([35.0, 2.0, 12.0, 41.0, 48.0, 14.0])
    r = pipe_settlement("sewer S2", ch, s, q, length_m=10.0)
    assert r.chainage_m.tolist() == [0, 10, 20, 30, 40, 50]
    assert r.settlement_m.tolist() == [0.002, 0.010, 0.035, 0.045, 0.030, 0.015]
    # within 10 m: |0.035 − 0.010| = 0.025 between 10 and 20 m is the largest (hand)
    assert r.differential_max_m == pytest.approx(0.025)
    assert r.differential_between_m == (10.0, 20.0)
    assert r.gradient_max == pytest.approx(0.0025)
    assert (r.settlement_max_m, r.chainage_at_max_m) == (0.045, 30.0)
    assert (r.dsz_crown_max_kpa, r.chainage_at_dsz_max_m) == (48.0, 30.0)
    # over 20 m the pair 10 → 30 m gives 0.035 (hand)
    assert pipe_settlement("sewer S2", ch, s, q, 20.0).differential_max_m == pytest.approx(0.035)
    row = r.as_row()
    assert row["dsz_crown_max_kPa"] == 48.0 and row["differential_from_chainage_m"] == 10.0
    assert r.profile_rows()[3] == {"receptor_id": "sewer S2", "chainage_m": 30.0, "settlement_m": 0.045}


@pytest.mark.parametrize("args, arg", [
    (([0, 5, 5], [0, 0, 0], [0, 0, 0], 5.0), "chainage"),
    (([0, 5], [0], [0, 0], 5.0), "settlement"),
    (([0, 5], [0, 0], [0], 5.0), "dsz_crown"),
    (([0, 5], [0, 0], [0, 0], 0.0), "length_m"),
    (([], [], [], 5.0), "chainage"),
])
def test_pipe_bad_input(args, arg):
    with pytest.raises(InputError, match=arg):
        pipe_settlement("p", *args)
