"""Stress history, secondary compression and ramp loading (fillstress.settlement).

Sources are named beside each check. Holtz & Kovacs (An Introduction to Geotechnical
Engineering) for the e–log σ' loading/unloading branches and the preload result; Olson (1977)
for ramp loading; bibliographic details recalled from memory.
"""
import math

import numpy as np
import pytest
from scipy.linalg import solve_banded

from fillstress.errors import InputError
from fillstress.settlement import (ramp_degree, secondary_compression, secondary_strain_index,
                                   settlement_time_curve, stress_path, sublayer_settlement,
                                   time_to_fraction)
from fillstress import settlement as st
from fillstress.soil import SoilLayer, SoilProfile

CC, CR, E0 = 0.6, 0.07, 1.6


def _clay(**kw):
    layer = SoilLayer("clay", 0, 10, 10.0, cc=CC, cr=CR, e0=E0, **({"ocr": 1.0} | kw))
    return SoilProfile([layer], water_table_m=50.0)     # dry: σ'0 = 10·z


def test_load_unload_reload_follows_the_hand_e_log_path():
    # Hand calculation on one sublayer (1 m at 6 m, σ'0 = 60 kPa, σ'p = 90 kPa), void ratio
    # step by step on the e–log σ' path (Holtz & Kovacs: Cr below σ'p or the past maximum,
    # Cc beyond it): load to 160, unload to 80, reload to 200.
    p = _clay(ocr=None, sigma_p_kpa=90.0)
    e = E0
    e -= CR * math.log10(90 / 60) + CC * math.log10(160 / 90)     # 60 → 160 across σ'p
    e1 = e
    e += CR * math.log10(160 / 80)                                 # swell to 80
    e2 = e
    e -= CR * math.log10(160 / 80) + CC * math.log10(200 / 160)    # reload past the maximum
    e3 = e
    expected = [(E0 - ei) / (1 + E0) * 1.0 for ei in (e1, e2, e3)]
    got = stress_path(p, [6.0], [1.0], [[100.0], [20.0], [140.0]])
    np.testing.assert_allclose(got.settlement[0, :, 0], expected, rtol=1e-12)
    assert got.branch(0).tolist() == [["virgin (Cc)"]]
    assert got.branch(1).tolist() == [["unloaded on Cr after Cc"]]
    assert got.branch(2).tolist() == [["virgin (Cc)"]]


def test_preload_removed_at_full_consolidation_leaves_permanent_value_minus_rebound():
    # Holtz & Kovacs, preloading: consolidated under permanent q + surcharge qs, then unloaded
    # to q; the final settlement is the virgin-line value at q + qs less the Cr rebound, and
    # later loading up to q + qs recompresses on Cr only (the preload benefit).
    p = _clay()
    z, h, s0, q, qs = 5.0, 2.0, 50.0, 40.0, 30.0
    r = stress_path(p, [z], [h], [[q + qs], [q], [q + qs]]).settlement[0, :, 0]
    peak = CC * h / (1 + E0) * math.log10((s0 + q + qs) / s0)
    rebound = CR * h / (1 + E0) * math.log10((s0 + q + qs) / (s0 + q))
    assert r[1] == pytest.approx(peak - rebound, rel=1e-12)
    permanent_only = sublayer_settlement(p, [z], [h], [[q]])[0, 0]
    assert r[1] > permanent_only                                 # surcharge did its work
    assert r[2] == pytest.approx(peak, rel=1e-12)               # reload on Cr back to peak


def test_single_state_matches_one_load_and_excavation_heaves_on_cr():
    p = _clay(ocr=1.5)
    # excavation below σ'v0: heave on Cr from σ'0 (negative settlement)
    heave = stress_path(p, [5.0], [1.0], [[-20.0]])
    assert heave.settlement[0, 0, 0] == pytest.approx(CR / (1 + E0) * math.log10(30 / 50))
    assert heave.branch().tolist() == [["unloading (Cr) heave"]]
    with pytest.raises(InputError, match="exceeds the effective stress"):
        stress_path(p, [5.0], [1.0], [[10.0], [-60.0]])


def test_linear_layer_unloads_on_its_unloading_modulus():
    lay = SoilLayer("silt", 0, 4, 18.0, modulus_kpa=5000.0, unloading_modulus_kpa=20000.0)
    p = SoilProfile([lay], water_table_m=10)
    s = stress_path(p, [2.0], [1.0], [[100.0], [40.0], [-10.0]]).settlement[0, :, 0]
    np.testing.assert_allclose(s, [100 / 5000, 100 / 5000 - 60 / 20000, 0.02 - 110 / 20000])
    with pytest.raises(InputError, match="unloading_modulus_kpa"):
        SoilLayer("c", 0, 4, 18.0, cc=0.3, cr=0.03, e0=1, ocr=1, unloading_modulus_kpa=1e4)


def test_secondary_compression_law_and_reduced_ratio_validation():
    # S = Cα/(1+ep)·H·log10(t/tp) (e.g. Holtz & Kovacs): two log cycles after tp
    clay = SoilLayer("c", 0, 6, 16, cc=0.5, cr=0.05, e0=1.4, ocr=1, c_alpha=0.024)
    ca = float(secondary_strain_index(clay, 0.04))          # ep = 1.4 − 2.4·0.04 = 1.304
    assert ca == pytest.approx(0.024 / 2.304)
    assert float(secondary_compression(ca, 3.0, 100.0, 1.0)) == pytest.approx(ca * 3 * 2)
    assert float(secondary_compression(ca, 3.0, 0.5, 1.0)) == 0.0
    with pytest.raises(InputError, match="c_alpha_ratio_surcharged"):
        SoilLayer("c", 0, 6, 16, cc=0.5, cr=0.05, e0=1.4, ocr=1, c_alpha=0.02,
                  c_alpha_ratio_surcharged=1.5)
    with pytest.raises(InputError, match="c_alpha_eps"):
        SoilLayer("s", 0, 6, 16, mv_per_kpa=1e-4, c_alpha=0.02)


# --- ramp loading ---------------------------------------------------------------------
def _olson(tv, tc, terms=4000):
    """Olson (1977) ramp loading, average degree: written from his closed form."""
    m = np.pi * (2 * np.arange(terms) + 1) / 2
    if tv <= tc:
        return tv / tc * (1 - 2 / tv * np.sum((1 - np.exp(-m**2 * tv)) / m**4))
    # (e^(M²Tc) − 1)·e^(−M²T) written as e^(−M²(T−Tc)) − e^(−M²T) to avoid overflow
    return 1 - 2 / tc * np.sum((np.exp(-m**2 * (tv - tc)) - np.exp(-m**2 * tv)) / m**4)


@pytest.mark.parametrize("tv, tc", [(0.05, 0.2), (0.2, 0.2), (0.5, 0.2), (0.3, 1.0), (1.0, 1.0),
                                    (2.0, 1.0)])
def test_ramp_matches_olson_1977(tv, tc):
    assert float(ramp_degree(tv, tc, 1.0)) == pytest.approx(_olson(tv, tc), abs=1e-9)


def _fd_ramp(tv_targets, tc, n=200, dt=2e-4):
    """Crank–Nicolson on ∂u/∂T = ∂²u/∂Z² + dσ/dT, doubly drained layer of unit drainage
    path (Z in 0…2, u = 0 at both faces), load σ rising as T/Tc to 1; U = 1 − ∫u/(σ_final·2)
    measured against the full load's final settlement."""
    dz = 2.0 / n
    u = np.zeros(n - 1)                          # interior nodes
    band = np.zeros((3, n - 1))
    band[0, 1:], band[1], band[2, :-1] = 1.0, -2.0, 1.0
    r = dt / dz**2
    lhs = -0.5 * r * band
    lhs[1] += 1.0
    t, out = 0.0, []
    for target in tv_targets:
        while t < target - 1e-12:
            load_rate = 1.0 / tc if t + 0.5 * dt <= tc else 0.0
            rhs = u + 0.5 * r * (np.concatenate([[0], u[:-1]]) - 2 * u + np.concatenate([u[1:], [0]]))
            u = solve_banded((1, 1), lhs, rhs + dt * load_rate)
            t += dt
        sigma = min(t / tc, 1.0)
        out.append(sigma - np.sum(u) * dz / 2.0)
    return np.array(out)


def test_ramp_matches_finite_difference_with_time_varying_load():
    tv = [0.1, 0.4, 0.8, 1.5]
    fd = _fd_ramp(tv, tc=0.4)
    np.testing.assert_allclose(ramp_degree(np.array(tv), 0.4, 1.0), fd, atol=2e-4)


def test_ramp_with_radial_flow_only_matches_its_closed_form():
    # Uh = 1 − e^(−λt) integrated over the ramp in closed form (no vertical flow: rate 0)
    lam, tc = 3.0, 0.5
    for t in (0.2, 0.5, 1.3):
        a = min(t, tc)
        exact = (a - (math.exp(-lam * (t - a)) - math.exp(-lam * t)) / lam) / tc
        assert float(ramp_degree(t, tc, 0.0, lam)) == pytest.approx(exact, abs=1e-12)


def test_staged_curve_with_build_duration_and_removal():
    # 0.3 m built over 0.5 years from t = 0, then 0.05 m of rebound from a removal at 2 years
    curve = settlement_time_curve([0.3, -0.05], [0.0, 2.0], [0.5, 2.0, 50.0], 1.0, 1.0,
                                  durations=[0.5, 0.0])
    assert curve[0] == pytest.approx(0.3 * _olson(0.5, 0.5), abs=1e-9)
    assert curve[2] == pytest.approx(0.25, abs=1e-9)
    t50 = time_to_fraction(lambda t: settlement_time_curve([0.3], [0.0], t, 1.0, 1.0), 0.5, 0.3, 10)
    assert t50 == pytest.approx(0.19674, abs=1e-4)     # Terzaghi: Tv50 = 0.197


def test_several_fractions_on_one_bracketing_grid_equal_separate_searches():
    curve = lambda t: st.settlement_time_curve([0.2, 0.1, -0.05], [0.0, 0.4, 1.5],  # noqa: E731
                                               t, 2.0, 1.3, durations=[0.2, 0.1, 0.0])
    fractions = [0.5, 0.9, 0.95, 1.0, 1.2]
    together = st.times_to_fractions(curve, fractions, 0.3, 100.0)
    alone = [st.time_to_fraction(curve, f, 0.3, 100.0) for f in fractions]
    np.testing.assert_array_equal(together, alone)
    assert np.isfinite(together[:3]).all() and np.isnan(together[-1])


def test_end_of_primary_is_the_instant_loads_u95_for_each_sublayer():
    from fillstress.run import timeline as tl
    history = tl.PointHistory(np.zeros((1, 3)), np.zeros(1), np.zeros(1),
                              np.array([1.5, 1.5, 4.0]), np.array([2.0, 2.0, 1.0]),
                              np.array([0.0, 0.0, 0.3]))
    layers = [type("Layer", (), {"end_of_primary_yr": None})()] * 3
    got = history.end_of_primary(layers)
    for k, (cv, h, radial) in enumerate([(1.5, 2.0, 0.0), (1.5, 2.0, 0.0), (4.0, 1.0, 0.3)]):
        u95 = st.time_to_fraction(lambda t: st.ramp_degree(t, 0.0, cv / h**2, radial),
                                  tl.U_END_OF_PRIMARY, 1.0, 1e4)
        assert got[k] == u95
    assert float(st.ramp_degree(got[2], 0.0, 4.0, 0.3)) == pytest.approx(0.95, abs=1e-6)
