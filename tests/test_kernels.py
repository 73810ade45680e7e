"""Scalar kernels against the numpy reference and the classic Newmark (1935) form."""
from __future__ import annotations

import math

import numpy as np
import pytest

import reference
from fillstress.errors import InputError
from fillstress.kernels import (boussinesq, point_influence, rectangle_influence,
                                resolve_method, westergaard)
from fillstress.kernels.corner import shared_corner
from fillstress.kernels.spec import eta as westergaard_eta


def newmark_corner(m, n):
    """Newmark (1935) corner factor with its branch rule: add π to the arctangent
    when m²n² > m²+n²+1 (the principal arctangent is then negative)."""
    v = m * m + n * n + 1.0
    s = 2.0 * m * n * math.sqrt(v)
    angle = math.atan(s / (v - m * m * n * n))
    if m * m * n * n > v:
        angle += math.pi
    return (s / (v + m * m * n * n) * (v + 1.0) / v + angle) / (4.0 * math.pi)


OFFSETS = [-7.3, -1.0, -0.25, -0.0, 0.0, 1e-9, 0.4, 1.0, 3.0, 250.0]
DEPTHS = [0.0, -0.0, 1e-12, 0.3, 1.0, 4.0, 60.0]


@pytest.mark.parametrize("z", DEPTHS)
def test_boussinesq_corner_matches_reference(z):
    for a in OFFSETS:
        for b in OFFSETS:
            expected = float(reference.boussinesq_corner(a, b, abs(z)))  # -0.0 is depth 0
            assert boussinesq.corner(a, b, z) == pytest.approx(expected, abs=1e-15)


@pytest.mark.parametrize("nu", [0.0, 0.25, 0.49])
def test_westergaard_corner_matches_reference(nu):
    eta = westergaard_eta(nu)
    for z in DEPTHS:
        for a in OFFSETS:
            for b in OFFSETS:
                expected = float(reference.westergaard_corner(a, b, abs(z), nu))
                assert westergaard.corner(a, b, z, eta) == pytest.approx(expected, abs=1e-15)


def test_shared_corner_equals_both_methods():
    eta = westergaard_eta(0.3)
    for z in DEPTHS:
        for a in OFFSETS:
            for b in OFFSETS:
                assert shared_corner(a, b, z, 1.0, 1.0) == pytest.approx(
                    boussinesq.corner(a, b, z), abs=1e-15)
                assert shared_corner(a, b, z, eta, 0.0) == pytest.approx(
                    westergaard.corner(a, b, z, eta), abs=1e-15)


@pytest.mark.parametrize("m, n", [(2.0, 2.0), (3.0, 1.5), (10.0, 1.2), (1.5, 2.5), (5.0, 5.0)])
def test_branch_free_corner_in_newmark_plus_pi_region(m, n):
    # these pairs satisfy m²n² > m²+n²+1, where the textbook arctangent needs +π
    assert m * m * n * n > m * m + n * n + 1
    assert boussinesq.corner(m, n, 1.0) == pytest.approx(newmark_corner(m, n), rel=1e-13)


@pytest.mark.parametrize("m, n", [(0.1, 0.1), (0.5, 1.0), (1.0, 1.0), (0.3, 2.0)])
def test_branch_free_corner_outside_plus_pi_region(m, n):
    assert m * m * n * n < m * m + n * n + 1
    assert boussinesq.corner(m, n, 1.0) == pytest.approx(newmark_corner(m, n), rel=1e-13)


def test_corner_is_odd_in_each_offset():
    for a, b, z in [(1.3, 0.7, 0.9), (4.0, 0.2, 2.0), (0.5, 9.0, 0.0)]:
        assert boussinesq.corner(-a, b, z) == -boussinesq.corner(a, b, z)
        assert boussinesq.corner(a, -b, z) == -boussinesq.corner(a, b, z)
        eta = westergaard_eta(0.1)
        assert westergaard.corner(-a, b, z, eta) == -westergaard.corner(a, b, z, eta)


def test_tiny_depth_is_finite_and_near_surface_value():
    for z in (1e-300, 1e-170, 5e-324):
        assert boussinesq.rectangle(-1.0, 1.0, -1.0, 1.0, z) == pytest.approx(1.0, abs=1e-12)
        assert boussinesq.rectangle(0.0, 1.0, -1.0, 1.0, z) == pytest.approx(0.5, abs=1e-12)
        assert boussinesq.rectangle(0.0, 1.0, 0.0, 1.0, z) == pytest.approx(0.25, abs=1e-12)


def test_point_kernels_match_reference():
    for r in (0.0, 0.5, 3.0, 40.0):
        for z in (0.2, 1.0, 7.0):
            assert boussinesq.point(r, z) == pytest.approx(reference.boussinesq_point(r, z), rel=1e-14)
            for nu in (0.0, 0.35):
                assert westergaard.point(r, z, westergaard_eta(nu)) == pytest.approx(
                    reference.westergaard_point(r, z, nu), rel=1e-14)


def test_point_kernels_at_surface():
    assert boussinesq.point(1.0, 0.0) == 0.0
    assert westergaard.point(1.0, 0.0, 0.7) == 0.0
    assert boussinesq.point(0.0, 0.0) == math.inf
    assert westergaard.point(0.0, 0.0, 0.7) == math.inf


def test_rectangle_influence_broadcasts_and_matches_reference():
    rng = np.random.default_rng(4)
    x1 = rng.uniform(-5, 5, 50)
    x2 = x1 + rng.uniform(0, 3, 50)
    y1 = rng.uniform(-5, 5, 50)
    y2 = y1 + rng.uniform(0, 3, 50)
    z = rng.uniform(0, 4, 50)
    for method, nu in (("boussinesq", None), ("westergaard", 0.2)):
        got = rectangle_influence(x1, x2, y1, y2, z, method, nu)
        expected = reference.rectangle(x1, x2, y1, y2, z, method, nu)
        np.testing.assert_allclose(got, expected, rtol=0, atol=1e-14)


def test_point_influence_vectorised():
    r = np.array([0.0, 1.0, 2.0])
    np.testing.assert_allclose(point_influence(r, 2.0), reference.boussinesq_point(r, 2.0),
                               rtol=1e-14)
    np.testing.assert_allclose(point_influence(r, 2.0, "westergaard", 0.3),
                               reference.westergaard_point(r, 2.0, 0.3), rtol=1e-14)


@pytest.mark.parametrize("kwargs, argument", [
    (dict(method="newmark"), "method"),
    (dict(method=3), "method"),
    (dict(method="boussinesq", poisson=0.2), "poisson"),
    (dict(method="westergaard", poisson=0.5), "poisson"),
    (dict(method="westergaard", poisson=-0.1), "poisson"),
    (dict(method="westergaard", poisson=float("nan")), "poisson"),
    (dict(method="westergaard", poisson="soft"), "poisson"),
])
def test_resolve_method_refuses_bad_choices(kwargs, argument):
    with pytest.raises(InputError) as info:
        resolve_method(**kwargs)
    assert info.value.argument == argument


def test_resolve_method_defaults():
    assert resolve_method("Westergaard").poisson == 0.0
    assert resolve_method("westergaard", 0.25).depth_scale == pytest.approx(math.sqrt(1 / 3))
    assert resolve_method().method == "boussinesq"


def test_public_influence_functions_validate():
    with pytest.raises(InputError, match="depth"):
        rectangle_influence(0, 1, 0, 1, -1.0)
    with pytest.raises(InputError, match="x2/y2"):
        rectangle_influence(1, 0, 0, 1, 1.0)
    with pytest.raises(InputError, match="x1"):
        rectangle_influence(float("nan"), 1, 0, 1, 1.0)
    with pytest.raises(InputError, match="radius"):
        point_influence(-1.0, 1.0)


def test_tiny_offsets_keep_their_quadrant_at_the_surface():
    # a·b of two offsets near 1e-293 underflows to 0; the corner must still be ±1/4
    tiny = 1.08e-293
    assert boussinesq.corner(tiny, tiny, 0.0) == 0.25
    assert boussinesq.corner(-tiny, tiny, 0.0) == -0.25
    assert westergaard.corner(tiny, tiny, 0.0, 0.7) == 0.25
    assert shared_corner(tiny, -tiny, 0.0, 1.0, 1.0) == -0.25
    assert boussinesq.rectangle(tiny, 1.0, tiny, 1.0, 0.0) == 0.0     # a hair outside
    assert boussinesq.rectangle(-tiny, 1.0, -tiny, 1.0, 0.0) == 1.0   # a hair inside


def test_fast_atan_matches_libm():
    from fillstress.kernels.corner import fast_atan
    rng = np.random.default_rng(8)
    xs = np.concatenate([rng.standard_normal(20000) * 10.0 ** rng.integers(-30, 30, 20000),
                         [0.0, -0.0, 0.66, -0.66, 2.414213562373095, 1.0, -1.0, 1e300,
                          5e-324, np.inf, -np.inf]])
    for x in xs:
        expected = math.atan(x)
        assert abs(fast_atan(x) - expected) <= 4e-16 * abs(expected)


def test_corner_angle_matches_atan2_for_non_negative_c():
    from fillstress.kernels.corner import corner_angle
    for y in (-3.0, -1e-200, -0.0, 0.0, 1e-300, 0.5, 7.0, 1e200):
        for c in (0.0, 1e-300, 1e-10, 0.3, 2.0, 1e6):
            inv_c = 1.0 / c if c > 0 else math.inf
            expected = math.atan2(y, c)
            assert corner_angle(y, c, inv_c) == pytest.approx(expected, rel=4e-16, abs=0)
