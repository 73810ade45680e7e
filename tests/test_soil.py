"""Soil layers, the water table and in-situ stresses.

Hand calculations use the geostatic stress σv = Σ γ·Δz, hydrostatic pore pressure
u = γw·(z − z_w) and Terzaghi's effective stress σ' = σv − u (Terzaghi 1943, as given in
standard soil mechanics texts). The site and numbers are invented.
"""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from fillstress.errors import InputError
from fillstress.soil import SoilLayer, SoilProfile, layer_fields


def _marsh_end(water_table=4.5):
    """Invented site 'Marsh End': stiff silt over soft clay, water table inside the clay."""
    return SoilProfile([
        SoilLayer("brown silt", 0.0, 3.0, 18.0, 19.5, modulus_kpa=12000),
        SoilLayer("soft clay", 3.0, 11.0, 16.5, 17.2, cc=0.5, cr=0.07, e0=1.4, ocr=1.0),
    ], water_table_m=water_table, gamma_w=9.81)


def test_effective_stress_with_water_table_inside_a_layer():
    p = _marsh_end()
    z = [3.0, 4.5, 8.0, 11.0]
    # Hand calculation:
    #   z = 3.0: σ = 3·18 = 54; u = 0
    #   z = 4.5: σ = 54 + 1.5·16.5 = 78.75 (clay above the water table uses 16.5); u = 0
    #   z = 8.0: σ = 78.75 + 3.5·17.2 = 138.95; u = 3.5·9.81 = 34.335; σ' = 104.615
    #   z = 11 : σ = 78.75 + 6.5·17.2 = 190.55; u = 6.5·9.81 = 63.765; σ' = 126.785
    np.testing.assert_allclose(p.sigma_v0(z), [54.0, 78.75, 138.95, 190.55], rtol=1e-12)
    np.testing.assert_allclose(p.u0(z), [0.0, 0.0, 34.335, 63.765], rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(p.sigma_v0_eff(z), [54.0, 78.75, 104.615, 126.785], rtol=1e-12)


def test_water_table_at_surface_and_below_profile():
    at_surface = _marsh_end(water_table=0.0)
    # z = 5: σ = 3·19.5 + 2·17.2 = 92.9; u = 5·9.81 = 49.05 → σ' = 43.85 (hand calculation)
    assert at_surface.sigma_v0_eff(5.0)[0] == pytest.approx(43.85, rel=1e-12)
    dry = _marsh_end(water_table=30.0)
    # z = 5: σ = 54 + 2·16.5 = 87; no pore pressure (hand calculation)
    assert dry.sigma_v0_eff(5.0)[0] == pytest.approx(87.0, rel=1e-12)
    assert dry.u0(11.0)[0] == 0.0


def _reference_sigma_v0(profile: SoilProfile, z: float) -> float:
    """Plain loop: add each layer's part above z, split at the water table."""
    total = 0.0
    for layer in profile.layers:
        top, bottom = layer.top_m, min(layer.bottom_m, z)
        if bottom <= top:
            break
        dry = max(0.0, min(bottom, profile.water_table_m) - top)
        wet = (bottom - top) - dry
        total += dry * layer.unit_weight + wet * layer.saturated_unit_weight
    return total


@settings(max_examples=60, deadline=None)
@given(thicknesses=st.lists(st.floats(0.2, 6.0), min_size=1, max_size=5),
       weights=st.lists(st.floats(12.0, 22.0), min_size=10, max_size=10),
       water=st.floats(0.0, 25.0), frac=st.lists(st.floats(0.0, 1.0), min_size=1, max_size=20))
def test_vectorised_stress_matches_plain_loop(thicknesses, weights, water, frac):
    tops = np.concatenate([[0.0], np.cumsum(thicknesses)[:-1]])
    layers = [SoilLayer(f"L{i}", float(t), float(t + h), weights[2 * i], weights[2 * i + 1],
                        mv_per_kpa=1e-4)
              for i, (t, h) in enumerate(zip(tops, thicknesses))]
    p = SoilProfile(layers, water_table_m=water)
    z = np.array(frac) * p.bottom_m
    expected = [_reference_sigma_v0(p, zi) for zi in z]
    np.testing.assert_allclose(p.sigma_v0(z), expected, rtol=1e-10, atol=1e-9)
    np.testing.assert_allclose(p.sigma_v0(z) - p.u0(z), p.sigma_v0_eff(z), rtol=1e-12, atol=1e-9)
    order = np.argsort(z)
    assert np.all(np.diff(p.sigma_v0_eff(z[order])) >= -1e-9)   # σ' never drops with depth


def test_layer_index_and_geometry():
    p = _marsh_end()
    assert p.layer_index([0.0, 2.99, 3.0, 11.0]).tolist() == [0, 0, 1, 1]
    assert p.bottom_m == 11.0 and p.rigid_base_m == 11.0
    assert SoilProfile(p.layers, 4.5, rigid_base_m=9.0).rigid_base_m == 9.0
    assert "cv_m2_per_yr" in layer_fields()


def _clay(name="clay", top=0.0, bottom=5.0, **kw):
    args = dict(cc=0.4, cr=0.05, e0=1.1, ocr=1.0)
    args.update(kw)
    return SoilLayer(name, top, bottom, 17.0, 18.0, **args)


# --- bad input: every message names the layer, the key and what is wrong ---------------
@pytest.mark.parametrize("layers, words", [
    ([_clay("upper", 0, 4), _clay("lower", 4.5, 8)], ["lower", "top_m", "gap of 0.5 m"]),
    ([_clay("upper", 0, 4), _clay("lower", 3.5, 8)], ["lower", "top_m", "overlap of 0.5 m"]),
    ([_clay("upper", 1, 4)], ["upper", "must start at the ground surface"]),
    ([_clay("a", 0, 4), _clay("a", 4, 8)], ["names must be unique", "a"]),
])
def test_profile_rejects_bad_layering(layers, words):
    with pytest.raises(InputError) as err:
        SoilProfile(layers, water_table_m=1.0)
    for w in words:
        assert w in str(err.value)


@pytest.mark.parametrize("top, bottom, word", [(4.0, 2.0, "thickness must be positive"),
                                               (3.0, 3.0, "thickness must be positive"),
                                               (-1.0, 3.0, "top_m")])
def test_layer_rejects_bad_thickness(top, bottom, word):
    with pytest.raises(InputError, match=word) as err:
        _clay("peat", top, bottom)
    assert "layers.peat" in str(err.value)


@pytest.mark.parametrize("kw, key, word", [
    (dict(e0=0.0), "e0", "void ratio must be > 0"),
    (dict(e0=-0.3), "e0", "void ratio must be > 0"),
    (dict(cr=0.5, cc=0.3), "cr", "exceeds the compression index"),
    (dict(ocr=0.8), "ocr", "below 1"),
    (dict(ocr=None), "sigma_p_kpa/ocr", "exactly one"),
    (dict(sigma_p_kpa=80.0), "sigma_p_kpa/ocr", "exactly one"),
    (dict(cc=None), "cc", "missing"),
    (dict(mv_per_kpa=3e-4), "compressibility", "mix"),
    (dict(cc=None, cr=None, e0=None, ocr=None), "compressibility", "missing"),
    (dict(drainage="sideways"), "drainage", "must be one of"),
    (dict(cv_m2_per_yr=-1.0), "cv_m2_per_yr", "must be > 0"),
])
def test_layer_rejects_bad_compressibility(kw, key, word):
    with pytest.raises(InputError, match=word) as err:
        _clay("grey clay", **kw)
    assert f"[layers.grey clay.{key}]" in str(err.value)


def test_missing_compressibility_message_lists_the_choices():
    with pytest.raises(InputError, match="modulus_kpa") as err:
        SoilLayer("loam", 0, 2, 18.0)
    assert "missing" in str(err.value)


def test_mixing_mv_and_modulus_is_refused():
    with pytest.raises(InputError, match="mv_per_kpa; modulus_kpa"):
        SoilLayer("loam", 0, 2, 18.0, mv_per_kpa=1e-4, modulus_kpa=1e4)


def test_sigma_p_below_overburden_says_so():
    # σ'v0 at mid-depth 4 m of a 0–8 m clay, water table at 0: 4·(18 − 9.81) = 32.76 kPa
    # (hand calculation); σ'p = 25 kPa stated as overconsolidated cannot be.
    with pytest.raises(InputError) as err:
        SoilProfile([_clay("varved clay", 0, 8, ocr=None, sigma_p_kpa=25.0)], water_table_m=0.0)
    msg = str(err.value)
    assert "[layers.varved clay.sigma_p_kpa]" in msg
    assert "below the effective overburden" in msg and "32.76" in msg and "mid-depth 4 m" in msg
    # σ'p equal to σ'v0 at mid-depth is normally consolidated and accepted
    SoilProfile([_clay("varved clay", 0, 8, ocr=None, sigma_p_kpa=32.76)], water_table_m=0.0)


def test_ocr_below_one_message_differs_from_sigma_p_message():
    with pytest.raises(InputError) as err:
        _clay("varved clay", ocr=0.9)
    assert "OCR = 0.9 is below 1" in str(err.value)
    assert "sigma_p" not in str(err.value)


@pytest.mark.parametrize("kwargs, word", [
    (dict(water_table_m=-0.5), "above the ground surface"),
    (dict(water_table_m=1.0, rigid_base_m=20.0), "below the last layer"),
    (dict(water_table_m=1.0, rigid_base_m=0.0), "rigid_base_m"),
    (dict(water_table_m=1.0, gamma_w=0.0), "gamma_w"),
    (dict(water_table_m=float("nan")), "water_table_m"),
])
def test_profile_rejects_bad_arguments(kwargs, word):
    with pytest.raises(InputError, match=word):
        SoilProfile([_clay()], **kwargs)


def test_saturated_weight_must_exceed_water():
    with pytest.raises(InputError, match="must exceed the unit weight of water"):
        SoilProfile([SoilLayer("peat", 0, 3, 9.0, 9.5, mv_per_kpa=1e-3)], water_table_m=1.0)
    # the same light peat entirely above the water table is fine
    SoilProfile([SoilLayer("peat", 0, 3, 9.0, 9.5, mv_per_kpa=1e-3)], water_table_m=3.0)


def test_depths_outside_profile_are_refused():
    p = _marsh_end()
    with pytest.raises(InputError, match="within the profile"):
        p.sigma_v0([5.0, 12.0])
    with pytest.raises(InputError, match="within the profile"):
        p.u0(-0.1)
    with pytest.raises(InputError, match="NaN"):
        p.sigma_v0_eff([np.nan])


def test_non_layer_items_are_refused():
    with pytest.raises(InputError, match="SoilLayer"):
        SoilProfile([{"name": "clay"}], water_table_m=1.0)
    with pytest.raises(InputError, match="at least one layer"):
        SoilProfile([], water_table_m=1.0)
