"""Buildings and pipes: tilt, relative rotation, deflection ratio, differentials, curvature.

Definitions: Burland & Wroth (1974). Limits: Bjerrum (1963) (1/500, 1/300, 1/150) and
Skempton & MacDonald (1956) (1/300, 1/150), as reproduced in standard foundation texts,
recalled from memory. Geometry checks are derived by hand. Data are invented.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from fillstress.errors import InputError
from fillstress.structures import (BJERRUM_1963_LIMITS, adjacent_pairs, building_settlement,
                                   largest_differential_within, pipe_settlement, wall_lines)


def _grid(nx=5, ny=4, spacing=3.0, origin=(100.0, 200.0)):
    xs, ys = np.meshgrid(origin[0] + spacing * np.arange(nx), origin[1] + spacing * np.arange(ny))
    return np.column_stack([xs.ravel(), ys.ravel()])


# --- rigid tilt (Burland & Wroth 1974: tilt is reported apart; β excludes it) ----------
def test_tilted_rigid_line_gives_tilt_and_no_distortion():
    # 8 points along a 35 m wall at an angle; settlement rises 1 mm per 0.4 m along it:
    # a rigid tilt of 1/400 and no relative rotation (derived).
    direction = np.array([math.cos(0.6), math.sin(0.6)])
    along = np.array([0.0, 5.0, 10.0, 15.0, 20.0, 25.0, 30.0, 35.0])
    xy = np.array([50.0, 80.0]) + along[:, None] * direction
    s = 0.012 + along / 400.0
    r = building_settlement("east wall", xy[::-1], s[::-1])
    assert r.angular_distortion == pytest.approx(0.0, abs=1e-13)
    assert r.tilt == pytest.approx(1 / 400, rel=1e-9)
    assert r.differential_m == pytest.approx(35 / 400) and r.worst_limit == ""


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), theta=st.floats(0, 2 * math.pi), g=st.floats(1e-4, 0.05))
def test_planar_settlement_field_gives_zero_beta_and_its_tilt(seed, theta, g):
    # s = c + g·(x cos θ + y sin θ): the best-fit plane is the field, so β = 0 on every pair
    # and on every wall, and the tilt is g (Burland & Wroth 1974 definitions).
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 40, (12, 2))
    s = 0.02 + g * (xy[:, 0] * math.cos(theta) + xy[:, 1] * math.sin(theta))
    r = building_settlement("b", xy, s)
    assert r.angular_distortion == pytest.approx(0.0, abs=1e-12)
    assert r.tilt == pytest.approx(g, rel=1e-8)
    outline = [[0, 0], [40, 0], [40, 40], [0, 40]]
    box = np.vstack([outline, [[20, 0], [40, 20], [20, 40], [0, 20]], xy])
    sb = 0.02 + g * (box[:, 0] * math.cos(theta) + box[:, 1] * math.sin(theta))
    rb = building_settlement("b", box, sb, outline=outline)
    assert rb.angular_distortion == pytest.approx(0.0, abs=1e-12) and len(rb.walls) == 4
    assert max(abs(w.deflection_ratio) for w in rb.walls) < 1e-12
    np.testing.assert_allclose(sorted(abs(w.tilt_along) for w in rb.walls),
                               sorted([abs(g * math.cos(theta))] * 2 + [abs(g * math.sin(theta))] * 2),
                               atol=1e-12)


def _rectangle_points(spacing, length=30.0, width=12.0):
    """Corners, wall points every `spacing` and an interior lattice: symmetric about the
    rectangle's centre lines."""
    xs = np.arange(0.0, length + 1e-9, spacing)
    ys = np.arange(0.0, width + 1e-9, spacing)
    gx, gy = np.meshgrid(xs, ys)
    return np.column_stack([gx.ravel(), gy.ravel()])


def test_beta_converges_as_the_spacing_shrinks():
    # s = 0.04 + 0.001x + 0.0001y + 0.0004(x − 15)² on a 30 × 12 m building. The sample set is
    # symmetric about x = 15 and y = 6, so the best-fit plane has ω = (0.001, 0.0001) exactly;
    # along the long walls ds/dx − ω_x = 0.0008(x − 15), and the end segment [0, h] gives
    # β(h) = 0.0008·(15 − h/2) = 0.012 − 0.0004·h (derived): β converges to 0.012 with h.
    outline = [[0, 0], [30, 0], [30, 12], [0, 12]]
    got = []
    for h in (6.0, 3.0, 1.5, 0.75, 0.375):
        xy = _rectangle_points(h)
        s = 0.04 + 0.001 * xy[:, 0] + 0.0001 * xy[:, 1] + 0.0004 * (xy[:, 0] - 15.0) ** 2
        r = building_settlement("hall", xy, s, outline=outline)
        assert r.angular_distortion == pytest.approx(0.012 - 0.0004 * h, rel=1e-9)
        assert r.tilt == pytest.approx(math.hypot(0.001, 0.0001), rel=1e-9)
        got.append(r.angular_distortion)
    steps = np.abs(np.diff(got))
    assert np.all(steps[1:] < steps[:-1])                 # each halving changes β less
    # hogging wall (the ends settle more): the middle is 0.0004·15² = 0.09 m above the chord,
    # Δ = −0.09 m, Δ/L = −0.003
    long_wall = max(r.walls, key=lambda w: w.length_m)
    assert long_wall.relative_deflection_m == pytest.approx(-0.09, rel=1e-9)
    assert long_wall.deflection_ratio == pytest.approx(-0.003, rel=1e-9)


# --- limits: Bjerrum (1963) and Skempton & MacDonald (1956) ----------------------------
def _bent_wall(ratio, span=12.0):
    # three points on a line, the middle one settling d more: the best-fit line leaves
    # residuals (−d/3, 2d/3, −d/3), so β = d/span (derived); d chosen to give `ratio`
    return [[0.0, 0.0], [span, 0.0], [2 * span, 0.0]], [0.0, span * ratio, 0.0]


@pytest.mark.parametrize("ratio, worst, exceeded", [
    (1 / 600, "", ()),
    (1 / 400, "no_cracking", ("no_cracking",)),
    (1 / 200, "panel_wall_cracking", ("panel_wall_cracking", "sm_cracking", "no_cracking")),
    (1 / 100, "structural_damage", ("structural_damage", "sm_structural_damage",
                                    "panel_wall_cracking", "sm_cracking", "no_cracking")),
])
def test_limit_flags(ratio, worst, exceeded):
    xy, s = _bent_wall(ratio)
    r = building_settlement("store", xy, s)
    assert r.angular_distortion == pytest.approx(ratio, rel=1e-12)
    assert r.worst_limit == worst and r.exceeded == exceeded
    row = r.as_row()
    assert row["worst_limit"] == worst
    assert row["exceeds_no_cracking"] == ("no_cracking" in exceeded)
    assert set(BJERRUM_1963_LIMITS) == {"no_cracking", "panel_wall_cracking", "structural_damage"}


def test_limit_reached_exactly_is_flagged_and_custom_limits_apply():
    for span in (7.0, 15.0, 29.0):
        xy, s = _bent_wall(1 / 300, span)
        r = building_settlement("kiln", xy, s)
        assert "panel_wall_cracking" in r.exceeded and "sm_cracking" in r.exceeded
    xy, s = _bent_wall(1 / 500)
    own = building_settlement("kiln", xy, s, limits={"machinery": 1 / 750})
    assert own.exceeded == ("machinery",) and own.as_row()["exceeds_machinery"]


# --- adjacency and the vectorised distortion ------------------------------------------
def test_adjacent_pairs_of_a_square_and_a_line():
    pairs = adjacent_pairs([[0, 0], [10, 0], [10, 10], [0, 10]])
    assert len(pairs) == 5                                   # four sides and one diagonal
    sides = {(0, 1), (1, 2), (2, 3), (0, 3)}
    assert sides <= {tuple(p) for p in pairs.tolist()}
    assert adjacent_pairs([[3, 3]]).shape == (0, 2)
    assert adjacent_pairs([[0, 0], [4, 0], [2, 0], [1, 0]]).tolist() == [[0, 3], [1, 2], [2, 3]]


def _plane_residuals(xy, s):
    design = np.column_stack([np.ones(len(s)), xy])
    return s - design @ np.linalg.lstsq(design, s, rcond=None)[0]


def test_vectorised_distortion_matches_plain_loop():
    rng = np.random.default_rng(11)
    xy = rng.uniform(0, 60, (30, 2))
    s = rng.uniform(0.01, 0.08, 30)
    r = building_settlement("yard office", xy, s)
    res = _plane_residuals(xy, s)
    best = 0.0
    for i, j in adjacent_pairs(xy):
        best = max(best, abs(res[i] - res[j]) / math.dist(xy[i], xy[j]))
    assert r.angular_distortion == pytest.approx(best, rel=1e-12)
    assert r.settlement_max_m == s.max() and r.settlement_min_m == s.min()


def test_explicit_pairs_point_ids_and_wall_lines():
    xy = np.array([[0, 0], [6, 0], [12, 0], [6, 8]], dtype=float)
    s = np.array([0.010, 0.020, 0.050, 0.011])
    r = building_settlement("mill", xy, s, point_ids=["NW", "N", "NE", "C"], pairs=[[0, 1], [1, 3]])
    res = _plane_residuals(xy, s)
    expected = max(abs(res[1] - res[0]) / 6, abs(res[3] - res[1]) / 8)
    assert r.angular_distortion == pytest.approx(expected, rel=1e-12)
    assert set(r.distortion_points) <= {"NW", "N", "C"}
    walls = wall_lines([[0, 0], [12, 0], [6, 8]], xy)
    assert [w.tolist() for w in walls] == [[0, 1, 2], [2, 3], [3, 0]]


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


def test_pipe_angular_change_and_curvature_of_a_parabola():
    # s = 0.01 + c·(x − 20)²: the second difference on any chainages is exact for a parabola,
    # curvature 2c; the slope change at a point is 2c·(half the two neighbouring spans).
    c = 2e-5
    ch = np.array([0.0, 3.0, 5.0, 10.0, 18.0, 20.0, 26.0, 40.0])
    s = 0.01 + c * (ch - 20.0) ** 2
    r = pipe_settlement("rising main", ch, s, np.zeros_like(ch), 10.0)
    assert r.curvature_max_per_m == pytest.approx(2 * c, rel=1e-9)
    half_spans = 0.5 * (ch[2:] - ch[:-2])
    assert r.angular_change_max == pytest.approx(2 * c * half_spans.max(), rel=1e-9)
    assert math.isnan(pipe_settlement("p", [0, 1], [0, 0.01], [0, 0], 1.0).curvature_max_per_m)


@pytest.mark.parametrize("layout", ["walls", "delaunay", "collinear"])
def test_the_distortion_operator_gives_the_angular_distortion_of_the_check(layout):
    """max |R s| of structures.distortion_operator is building_settlement's β for any
    settlements (the check itself is the slow reference: lstsq plane, edges, ratios)."""
    from fillstress.structures import distortion_operator
    rng = np.random.default_rng(7)
    outline = np.array([[0.0, 0.0], [24.0, 0.0], [24.0, 12.0], [0.0, 12.0]])
    if layout == "walls":
        xy = np.array([[x, 0.0] for x in range(0, 25, 6)] + [[24.0, y] for y in (4.0, 8.0, 12.0)]
                      + [[x, 12.0] for x in (18.0, 12.0, 6.0, 0.0)] + [[0.0, 6.0], [12.0, 6.0]])
    elif layout == "delaunay":
        xy, outline = rng.uniform(0, 30, (9, 2)), None
    else:
        xy, outline = np.column_stack([np.linspace(0, 20, 6), np.linspace(5, 15, 6)]), None
    R, _ = distortion_operator(xy, outline=outline)
    for _ in range(5):
        s = rng.uniform(0.0, 0.08, len(xy))
        expected = building_settlement("b", xy, s, outline=outline).angular_distortion
        assert float(np.abs(R @ s).max()) == pytest.approx(expected, rel=1e-10, abs=1e-15)


@pytest.mark.parametrize("collinear", [False, True])
def test_the_tilt_operator_gives_the_tilt_of_the_check(collinear):
    """|G s| of structures.tilt_operator is building_settlement's tilt (its lstsq plane)."""
    from fillstress.structures import tilt_operator
    rng = np.random.default_rng(12)
    xy = (np.column_stack([np.linspace(0, 20, 5), np.linspace(3, 9, 5)]) if collinear
          else rng.uniform(0, 25, (8, 2)))
    G = tilt_operator(xy)
    for _ in range(5):
        s = rng.uniform(0.0, 0.06, len(xy))
        expected = building_settlement("b", xy, s).tilt
        assert float(np.hypot(*(G @ s))) == pytest.approx(expected, rel=1e-10, abs=1e-15)


def test_the_curvature_operator_and_pairs_within_give_the_pipe_check():
    """max |C s| is pipe_settlement's curvature and the largest |s_i − s_j| over
    pairs_within its differential, for any settlements on uneven chainages."""
    from fillstress.structures import curvature_operator, pairs_within
    rng = np.random.default_rng(4)
    ch = np.cumsum(rng.uniform(0.5, 4.0, 12))
    C, pairs = curvature_operator(ch), pairs_within(ch, 5.0)
    for _ in range(5):
        s = rng.uniform(0.0, 0.05, ch.size)
        r = pipe_settlement("main", ch, s, np.zeros_like(ch), 5.0)
        assert float(np.abs(C @ s).max()) == pytest.approx(r.curvature_max_per_m, rel=1e-10)
        diff = float(np.abs(s[pairs[:, 0]] - s[pairs[:, 1]]).max())
        assert diff == pytest.approx(r.differential_max_m, rel=1e-12)
