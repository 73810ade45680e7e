"""Consolidation settlement, sublayering, time rate and the depth of influence.

Sources: Terzaghi's 1-D consolidation theory and the e–log σ' settlement formulas as given
in standard soil mechanics texts (hand calculations in the comments); Terzaghi (1943) U–Tv
table; Boussinesq strip-load closed form as tabulated in Poulos & Davis (1974), "Elastic
Solutions for Soil and Rock Mechanics". Sites and numbers are invented. The hand-calculated
and tabulated check values are in the registry tests/validation_cases.py.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy.linalg import solve_banded

from fillstress.errors import InputError
from fillstress.settlement import (consolidation_settlement, converged_settlement,
                                   degree_of_consolidation, drainage_path, influence_depth,
                                   settlement_by_layer, settlement_time_curve, stage_increments,
                                   sublayer_settlement, sublayers, time_factor, time_parameters,
                                   time_to_degree)
from fillstress.soil import SoilLayer, SoilProfile
from reference import terzaghi_average_degree

from validation_cases import (GAMMA_W, SETTLEMENT, TIME_RATE, case_id, cases, check,
                              harrow_flat, one_sublayer)


# --- Terzaghi 1-D settlement, hand calculations ---------------------------------------
# NC, OC below and crossing σ'p, OCR, swelling and linear layers on the invented site
# 'Harrow Flat': the hand calculations, values and tolerances are in
# tests/validation_cases.py (docs/validation.md is generated from them).
@pytest.mark.parametrize("case", cases(SETTLEMENT), ids=case_id)
def test_settlement_hand_calculations(case):
    check(case)


def test_unloading_beyond_effective_stress_is_refused():
    with pytest.raises(InputError, match="exceeds the effective stress"):
        one_sublayer(harrow_flat(), -60.0)


def test_sigma_p_below_overburden_at_depth_is_treated_as_normally_consolidated():
    # A constant σ'p can fall below σ'0 in the lower part of a layer; there the clay is
    # normally consolidated: the same settlement as OCR = 1. σ'p = 55 kPa passes the
    # mid-depth check (σ'0 = 50.38 kPa at 4 m) but at 5.5 m σ'0 = 36 + 3.5·7.19 = 61.165 kPa.
    p = SoilProfile([SoilLayer("sand", 0.0, 2.0, 18.0, 19.0, modulus_kpa=30000),
                     SoilLayer("clay", 2.0, 6.0, 16.0, 17.0, cc=0.36, cr=0.05, e0=1.05,
                               sigma_p_kpa=55.0)], water_table_m=2.0, gamma_w=GAMMA_W)
    nc = harrow_flat()
    assert float(consolidation_settlement(p, [5.5], [1.0], [[70.0]])[0]) == pytest.approx(
        float(consolidation_settlement(nc, [5.5], [1.0], [[70.0]])[0]), rel=1e-12)


# --- vectorised path against a plain loop ---------------------------------------------
def _reference_settlement(profile, z_mid, h, dsz):
    """One point, one sublayer at a time, with the textbook case split."""
    out = np.zeros(len(dsz))
    for n, row in enumerate(dsz):
        for zk, hk, d in zip(z_mid, h, row):
            layer = profile.layers[int(profile.layer_index(zk)[0])]
            s0 = float(profile.sigma_v0_eff(zk)[0])
            if layer.kind == "mv":
                out[n] += layer.mv_per_kpa * hk * d
            elif layer.kind == "modulus":
                out[n] += hk * d / layer.modulus_kpa
            elif layer.kind == "index":
                sp = layer.sigma_p_kpa if layer.sigma_p_kpa is not None else layer.ocr * s0
                sp = max(sp, s0)
                s1 = s0 + d
                f = hk / (1 + layer.e0)
                if s1 <= sp:                       # recompression or swelling only
                    out[n] += f * layer.cr * math.log10(s1 / s0)
                elif s0 >= sp:                     # normally consolidated
                    out[n] += f * layer.cc * math.log10(s1 / s0)
                else:                              # crossing σ'p
                    out[n] += f * (layer.cr * math.log10(sp / s0) + layer.cc * math.log10(s1 / sp))
    return out


def _mixed_profile():
    return SoilProfile([
        SoilLayer("crust", 0.0, 1.5, 18.0, 19.0, modulus_kpa=15000),
        SoilLayer("upper clay", 1.5, 9.0, 16.0, 16.8, cc=0.6, cr=0.08, e0=1.6, sigma_p_kpa=70.0),
        SoilLayer("sand", 9.0, 14.0, 19.0, 20.0, modulus_kpa=40000),
        SoilLayer("rock", 14.0, 15.0, 23.0, 24.0, incompressible=True),
        SoilLayer("deep clay", 15.0, 22.0, 17.0, 18.0, cc=0.3, cr=0.05, e0=0.9, ocr=1.5),
        SoilLayer("varved silt", 22.0, 26.0, 18.0, 19.0, mv_per_kpa=1.5e-4),
    ], water_table_m=0.8, rigid_base_m=25.0)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), cap=st.floats(0.3, 3.0))
def test_vectorised_settlement_matches_plain_loop(seed, cap):
    rng = np.random.default_rng(seed)
    p = _mixed_profile()
    z, h = sublayers(p, top_depth=float(rng.uniform(0, 3)), max_thickness=cap)
    s0 = p.sigma_v0_eff(z)
    dsz = rng.uniform(-0.9, 4.0, size=(4, z.size)) * s0       # unloading and loading
    np.testing.assert_allclose(consolidation_settlement(p, z, h, dsz),
                               _reference_settlement(p, z, h, dsz), rtol=1e-10, atol=1e-12)


def test_by_layer_breakdown_sums_and_lands_in_the_right_layer():
    p = _mixed_profile()
    z, h = sublayers(p)
    dsz = np.vstack([np.full(z.size, 50.0), np.linspace(80.0, 10.0, z.size)])
    by_layer = settlement_by_layer(p, z, h, dsz)
    assert by_layer.shape == (2, len(p.layers))
    np.testing.assert_allclose(by_layer.sum(axis=1), consolidation_settlement(p, z, h, dsz), rtol=1e-12)
    assert np.all(by_layer[:, p.names.index("rock")] == 0.0)
    # sand alone, a linear layer: Σ h·Δσ/M over its sublayers = 5 m · 50 kPa / 40 MPa
    assert by_layer[0, p.names.index("sand")] == pytest.approx(5.0 * 50.0 / 40000.0, rel=1e-12)
    per_sub = sublayer_settlement(p, z, h, dsz)
    assert per_sub.shape == (2, z.size)


# --- sublayers ------------------------------------------------------------------------
def test_sublayers_cover_the_compressible_range_and_respect_boundaries():
    p = _mixed_profile()
    z, h = sublayers(p, top_depth=0.6)
    edges_top, edges_bottom = z - h / 2, z + h / 2
    # 0.6 … 14 m and 15 … 25 m (rigid base inside the varved silt; rock skipped)
    assert h.sum() == pytest.approx((14.0 - 0.6) + (25.0 - 15.0), rel=1e-12)
    assert edges_top.min() == pytest.approx(0.6) and edges_bottom.max() == pytest.approx(25.0)
    assert not np.any((z > 14.0) & (z < 15.0))
    for boundary in (1.5, 9.0, 14.0, 15.0, 22.0):           # no sublayer straddles a boundary
        assert not np.any((edges_top < boundary - 1e-9) & (edges_bottom > boundary + 1e-9))
    assert np.all(h <= 1.25 * 1.0 + 1e-12) and np.all(h > 0)
    assert np.all(np.diff(z) > 0)


def test_default_rule_is_thin_near_the_ground():
    p = SoilProfile([SoilLayer("clay", 0, 10, 17, 18, cc=0.3, cr=0.04, e0=1.0, ocr=1.0)], 0.0)
    z, h = sublayers(p)
    assert h[0] == pytest.approx(0.1) and np.all(h[z < 0.5] == pytest.approx(0.1))
    assert np.all(h[z > 5.0] <= 1.25) and h.max() == pytest.approx(1.0)
    z2, h2 = sublayers(p, max_thickness=0.5)
    assert h2[0] == pytest.approx(0.05) and z2.size > z.size


def test_sublayers_below_rigid_base_are_empty():
    p = SoilProfile([SoilLayer("clay", 0, 10, 17, 18, mv_per_kpa=1e-4)], 0.0, rigid_base_m=6.0)
    z, h = sublayers(p, top_depth=7.0)
    assert z.size == 0 and h.size == 0
    assert consolidation_settlement(p, z, h, np.zeros((3, 0))).tolist() == [0.0, 0.0, 0.0]


@pytest.mark.parametrize("kwargs, arg", [(dict(top_depth=-1.0), "top_depth"),
                                         (dict(max_thickness=0.0), "max_thickness")])
def test_sublayers_bad_arguments(kwargs, arg):
    with pytest.raises(InputError, match=arg):
        sublayers(_mixed_profile(), **kwargs)


def _strip_load(q, half_width):
    """Δσz below the centre and below an edge of a uniform strip load q of width 2b.

    Boussinesq strip closed form (Poulos & Davis 1974): σz = q/π·[α + sin α·cos(α + 2δ)];
    centre: α = 2·atan(b/z), δ = −α/2; edge: α = atan(2b/z), δ = 0.
    """
    def dsz_at(z):
        z = np.asarray(z, dtype=float)
        a_c = 2 * np.arctan(half_width / z)
        a_e = np.arctan(2 * half_width / z)
        return np.vstack([q / np.pi * (a_c + np.sin(a_c)),
                          q / np.pi * (a_e + np.sin(a_e) * np.cos(a_e))])
    return dsz_at


_TYPICAL_FILLS = [
    # 4 m embankment (80 kPa), 24 m wide, on 12 m NC clay from the ground, water at 1 m
    (SoilProfile([SoilLayer("clay", 0, 12, 16.5, 17.0, cc=0.45, cr=0.06, e0=1.3, ocr=1.0)], 1.0),
     _strip_load(80.0, 12.0)),
    # 3 m preload (60 kPa), 16 m wide, on the layered profile
    (_mixed_profile(), _strip_load(60.0, 8.0)),
    # 10 m stockpile (180 kPa), 40 m wide, 20 m NC clay, water at the ground
    (SoilProfile([SoilLayer("clay", 0, 20, 17.0, 17.5, cc=0.3, cr=0.04, e0=0.95, ocr=1.0)], 0.0),
     _strip_load(180.0, 20.0)),
]


@pytest.mark.parametrize("profile, dsz_at", _TYPICAL_FILLS)
def test_halving_default_sublayers_changes_settlement_by_less_than_one_percent(profile, dsz_at):
    z, h = sublayers(profile)
    s_default = consolidation_settlement(profile, z, h, dsz_at(z))
    z2, h2 = sublayers(profile, max_thickness=0.5)
    s_half = consolidation_settlement(profile, z2, h2, dsz_at(z2))
    assert np.max(np.abs(s_half - s_default) / s_half) < 0.01
    # and the default is within 1 % of a 16× finer cut
    z16, h16 = sublayers(profile, max_thickness=1 / 16)
    s_fine = consolidation_settlement(profile, z16, h16, dsz_at(z16))
    assert np.max(np.abs(s_fine - s_default) / s_fine) < 0.01


@pytest.mark.parametrize("profile, dsz_at", _TYPICAL_FILLS)
def test_converged_settlement_stops_below_tolerance(profile, dsz_at):
    r = converged_settlement(profile, dsz_at)
    assert r.converged and r.relative_change < 0.01
    z16, h16 = sublayers(profile, max_thickness=1 / 32)
    s_fine = consolidation_settlement(profile, z16, h16, dsz_at(z16))
    np.testing.assert_allclose(r.settlement, s_fine, rtol=0.01)
    coarse = converged_settlement(profile, dsz_at, max_thickness=4.0, tolerance=1e-4, max_halvings=1)
    assert not coarse.converged and coarse.halvings == 1


# --- time rate ------------------------------------------------------------------------
# Terzaghi (1943) U–Tv table values both ways, and t90 by hand: in tests/validation_cases.py.
@pytest.mark.parametrize("case", cases(TIME_RATE), ids=case_id)
def test_degree_of_consolidation_matches_terzaghi_table(case):
    check(case)


def test_short_time_closed_form_and_series_agree_where_both_hold():
    # For Tv ≲ 0.01 the layer behaves as semi-infinite: U = 2·sqrt(Tv/π) up to terms of
    # order exp(−1/Tv) (derived from the error-function solution); the series must agree.
    from fillstress import settlement as st_mod
    tv = np.geomspace(1e-4, 1e-2, 9)
    np.testing.assert_allclose(st_mod._series_average_degree(tv), 2 * np.sqrt(tv / np.pi),
                               rtol=1e-12)
    # and the public function is continuous across its switch at Tv = 1/40
    below, above = degree_of_consolidation([0.025 * (1 - 1e-5), 0.025 * (1 + 1e-5)])
    assert above - below == pytest.approx(2 * np.sqrt(0.025 / np.pi) * 1e-5, rel=1e-4)
    # both sides of the switch against the series written out with 200 terms
    tv = np.geomspace(1e-3, 2.0, 40)
    np.testing.assert_allclose(degree_of_consolidation(tv), terzaghi_average_degree(tv),
                               rtol=1e-13, atol=1e-15)


def test_long_time_one_term_limit():
    # For large Tv only the first term is left: U = 1 − 8/π²·exp(−π²Tv/4) (derived).
    for tv in (3.0, 4.0, 6.0):          # the next term, 2/M²·exp(−9π²Tv/4), is < 1e-29
        assert degree_of_consolidation(tv) == pytest.approx(
            1 - 8 / np.pi**2 * np.exp(-np.pi**2 * tv / 4), rel=1e-12)


def _finite_volume_degree(tv_targets, n=200, dt=1e-4):
    """Crank–Nicolson finite volumes for ∂u/∂T = ∂²u/∂Z² on 0 <= Z <= 1: n equal cells,
    u = 1 at T = 0, drained face at Z = 0 (ghost cell −u), impermeable base at Z = 1 (ghost
    cell +u); U = 1 − mean(u), exact at T = 0. Two backward-Euler steps first damp the
    start-up oscillation from the jump at the drained face (Rannacher)."""
    dz = 1.0 / n
    u = np.ones(n)
    lap = np.zeros((3, n))            # banded second difference, solve_banded layout
    lap[0, 1:] = 1.0
    lap[1, :] = -2.0
    lap[2, :-1] = 1.0
    lap[1, 0] = -3.0
    lap[1, -1] = -1.0

    def matvec(band, x):
        y = band[1] * x
        y[:-1] += band[0, 1:] * x[1:]
        y[1:] += band[2, :-1] * x[:-1]
        return y

    out, t, steps = [], 0.0, 0
    for target in tv_targets:
        while t < target - 1e-12:
            step = min(dt, target - t)
            r = step / dz**2
            theta = 1.0 if steps < 2 else 0.5
            lhs = -theta * r * lap
            lhs[1] += 1.0
            rhs = (1 - theta) * r * lap
            rhs[1] += 1.0
            u = solve_banded((1, 1), lhs, matvec(rhs, u))
            t += step
            steps += 1
        out.append(1.0 - u.mean())
    return np.array(out)


def test_series_against_finite_volume_solution():
    # an independent numerical solution of Terzaghi's equation; its error at n = 200 is
    # about 1e-5 (it falls 4× when the cells are halved)
    tv = [0.05, 0.197, 0.5]
    np.testing.assert_allclose(degree_of_consolidation(tv), _finite_volume_degree(tv), atol=5e-5)


@settings(max_examples=40, deadline=None)
@given(u=st.floats(1e-6, 0.999999))
def test_time_factor_inverts_degree(u):
    assert degree_of_consolidation(time_factor(u)) == pytest.approx(u, rel=1e-10, abs=1e-12)


def test_degree_is_monotone_and_bounded():
    tv = np.concatenate([[0.0], np.geomspace(1e-8, 10, 300)])
    u = degree_of_consolidation(tv)
    assert u[0] == 0.0 and np.all(np.diff(u) > 0) and np.all(u < 1.0)


@pytest.mark.parametrize("call, arg", [(lambda: degree_of_consolidation(-0.1), "tv"),
                                       (lambda: time_factor(1.0), "u"),
                                       (lambda: time_factor(-0.01), "u"),
                                       (lambda: time_to_degree(0.5, 0.0, 2.0), "cv"),
                                       (lambda: time_to_degree(0.5, 1.0, -2.0), "drainage_path_m")])
def test_time_rate_bad_input(call, arg):
    with pytest.raises(InputError, match=arg):
        call()


def test_time_to_degree_and_drainage_path():
    double = SoilLayer("clay", 3, 11, 16, 17, cc=0.4, cr=0.05, e0=1.2, ocr=1.0, cv_m2_per_yr=2.0)
    single = SoilLayer("clay", 3, 11, 16, 17, cc=0.4, cr=0.05, e0=1.2, ocr=1.0, drainage="single")
    assert drainage_path(double) == 4.0 and drainage_path(single) == 8.0
    # t90 = Tv(90 %)·H²/cv (the value 6.785 years is a registry case, terzaghi-t90)
    assert time_to_degree(0.9, 2.0, drainage_path(double)) == pytest.approx(time_factor(0.9) * 8.0)


def test_time_parameters_need_cv_unless_told_otherwise():
    p = SoilProfile([SoilLayer("sand", 0, 2, 18, 19, modulus_kpa=3e4),
                     SoilLayer("clay", 2, 10, 16, 17, mv_per_kpa=4e-4, cv_m2_per_yr=1.2),
                     SoilLayer("rock", 10, 12, 24, 25, incompressible=True)], 1.0)
    with pytest.raises(InputError, match=r"\[layers.sand.cv_m2_per_yr\]"):
        time_parameters(p)
    cv, h = time_parameters(p, no_cv="immediate")
    assert cv.tolist() == [math.inf, 1.2, math.inf] and h.tolist() == [1.0, 4.0, 1.0]


def _reference_curve(increments, stage_times, times, cv, h_dr):
    out = np.zeros(len(times))
    for i, t in enumerate(times):
        for s, t0 in enumerate(stage_times):
            for layer in range(len(cv)):
                if t > t0:
                    u = 1.0 if math.isinf(cv[layer]) else degree_of_consolidation(
                        cv[layer] * (t - t0) / h_dr[layer] ** 2)
                    out[i] += increments[s][layer] * u
    return out


def test_staged_settlement_curve_against_plain_loop():
    inc = np.array([[0.20, 0.01], [0.08, 0.004], [0.05, 0.002]])       # 3 stages × 2 layers
    stage_times = [0.0, 0.5, 2.0]
    times = np.linspace(0.0, 12.0, 49)
    cv, h = [1.5, math.inf], [3.0, 1.0]
    got = settlement_time_curve(inc, stage_times, times, cv, h)
    np.testing.assert_allclose(got, _reference_curve(inc, stage_times, times, cv, h), rtol=1e-12)
    # before stage 2 only stage 1 acts; at very long time everything has settled
    early = settlement_time_curve(inc, stage_times, [0.4], cv, h)[0]
    assert early == pytest.approx(0.20 * degree_of_consolidation(1.5 * 0.4 / 9.0) + 0.01)
    assert settlement_time_curve(inc, stage_times, [500.0], cv, h)[0] == pytest.approx(inc.sum())
    # leading axes (plan points) broadcast
    many = settlement_time_curve(np.stack([inc, 2 * inc]), stage_times, times, cv, h)
    np.testing.assert_allclose(many, np.stack([got, 2 * got]), rtol=1e-12)


def test_stage_increments_from_final_settlements():
    p = harrow_flat()
    z, hh = sublayers(p)
    finals = np.stack([settlement_by_layer(p, z, hh, np.full((1, z.size), q))[0] for q in (40.0, 70.0)])
    inc = stage_increments(finals)
    np.testing.assert_allclose(inc.sum(axis=0), finals[-1], rtol=1e-12)
    assert np.all(inc[1] > 0)


def test_settlement_curve_bad_input():
    with pytest.raises(InputError, match="stage_times"):
        settlement_time_curve([0.1, 0.2], [1.0, 0.5], [1.0], 1.0, 1.0)
    with pytest.raises(InputError, match="stage_times"):
        settlement_time_curve([0.1, 0.2], [0.0], [1.0], 1.0, 1.0)
    with pytest.raises(InputError, match="cv"):
        settlement_time_curve([0.1], [0.0], [1.0], -1.0, 1.0)
    with pytest.raises(InputError, match="drainage_path_m"):
        settlement_time_curve([0.1], [0.0], [1.0], 1.0, math.inf)


# --- depth of influence ---------------------------------------------------------------
def test_influence_depth_by_hand():
    z = [0.0, 5.0, 10.0, 15.0]
    s0 = [0.0, 50.0, 100.0, 150.0]
    # Δσ − 0.1σ' = [80, 35, 5, −5]: crossing between 10 and 15 m at 10 + 5/10·5 = 12.5 m
    assert influence_depth(z, [80.0, 40.0, 15.0, 10.0], s0) == pytest.approx(12.5)
    # outside the footprint Δσ rises then falls: the deepest crossing counts
    # Δσ − 0.1σ' = [0, 10, −5, −15] → between 5 and 10 m at 5 + 10/15·5 = 8.333 m
    assert influence_depth(z, [0.0, 15.0, 5.0, 0.0], s0) == pytest.approx(5 + 10 / 15 * 5)
    # still significant at the deepest sample, or never significant: NaN
    assert math.isnan(influence_depth(z, [80, 60, 40, 30], s0))
    assert math.isnan(influence_depth(z, [-1, 1, 2, 3], s0))
    # 20 % rule: [80, 30, −5, ...] → 5 + 30/35·5
    assert influence_depth(z, [80.0, 40.0, 15.0, 10.0], s0, fraction=0.2) == pytest.approx(5 + 30 / 35 * 5)


def _reference_influence(z, dsz_row, s0, fraction):
    found = math.nan
    for k in range(len(z) - 1):
        a = dsz_row[k] - fraction * s0[k]
        b = dsz_row[k + 1] - fraction * s0[k + 1]
        if a >= 0 > b:
            found = z[k] + a / (a - b) * (z[k + 1] - z[k])
    return found


def test_influence_depth_vectorised_matches_loop():
    rng = np.random.default_rng(7)
    z = np.cumsum(rng.uniform(0.2, 2.0, 30))
    s0 = 9.0 * z
    dsz = rng.uniform(0, 1, (50, 1)) * 200.0 / (1 + (z / rng.uniform(2, 20, (50, 1))) ** 2)
    dsz[::7] *= rng.uniform(0.0, 1.0, (8, z.size))               # some ragged rows
    dsz[0] = 0.0                                                 # never significant
    got = influence_depth(z, dsz, s0)
    want = [_reference_influence(z, row, s0, 0.1) for row in dsz]
    np.testing.assert_allclose(got, want, rtol=1e-12, equal_nan=True)
    assert np.isnan(got[0]) and np.isfinite(got).sum() > 10


def test_influence_depth_strip_load_closed_form():
    # Below the centre of a 100 kPa strip 2b = 20 m wide on dry soil γ = 18 kN/m³
    # (Δσ from the strip closed form above), the 10 % depth solves
    # q/π·(α + sin α) = 1.8·z; fine sampling must find the root of that equation.
    from scipy.optimize import brentq
    f = _strip_load(100.0, 10.0)
    root = brentq(lambda zz: f([zz])[0, 0] - 1.8 * zz, 1.0, 200.0)
    z = np.linspace(0.05, 100.0, 4000)
    assert influence_depth(z, f(z)[0], 18.0 * z) == pytest.approx(root, rel=1e-5)


def test_influence_depth_bad_input():
    with pytest.raises(InputError, match="increasing"):
        influence_depth([0.0, 0.0], [1.0, 1.0], [0.0, 1.0])
    with pytest.raises(InputError, match="sigma_v0_eff"):
        influence_depth([0.0, 1.0], [1.0, 1.0], [0.0])
    with pytest.raises(InputError, match="fraction"):
        influence_depth([0.0, 1.0], [1.0, 1.0], [0.0, 1.0], fraction=0.0)
