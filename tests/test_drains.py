"""Vertical drains (fillstress.drains): closed forms and an independent numerical solution.

Barron (1948) equal strain F(n); Hansbo (1979) band-drain diameter; Hansbo (1981) smear and
well resistance; Carrillo (1942). Bibliographic details recalled from memory.
"""
import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.sparse import diags

from fillstress.drains import (VerticalDrains, band_drain_diameter, barron_f, combined_degree,
                               hansbo_mu, influence_diameter, radial_degree, spacing_for_degree,
                               well_resistance)
from fillstress.errors import InputError


@pytest.mark.parametrize("n", [5.0, 10.0, 20.0, 40.0, 100.0])
def test_barron_f_closed_form_and_its_large_n_limit(n):
    # Barron (1948): F(n) = n²/(n²−1) ln n − (3n²−1)/(4n²), → ln n − 3/4 for large n
    f = n**2 / (n**2 - 1) * math.log(n) - (3 * n**2 - 1) / (4 * n**2)
    assert barron_f(n) == pytest.approx(f, rel=1e-14)
    assert abs(barron_f(n) - (math.log(n) - 0.75)) < 1.5 * math.log(n) / n**2 + 1 / n**2


@pytest.mark.parametrize("n", [10.0, 20.0, 40.0])
def test_hansbo_mu_reduces_to_barron_and_to_his_simplified_form(n):
    # no smear: Hansbo's (1981) μ is Barron's F(n); with smear, for large n it tends to the
    # simplified μ = ln(n/s) + (kh/ks) ln s − 3/4 (Hansbo 1981)
    assert hansbo_mu(n) == pytest.approx(barron_f(n), rel=1e-13)
    assert hansbo_mu(n, 1.0, 5.0) == pytest.approx(barron_f(n), rel=1e-13)   # s = 1: k irrelevant
    s, k = 2.5, 3.0
    simplified = math.log(n / s) + k * math.log(s) - 0.75
    assert hansbo_mu(n, s, k) == pytest.approx(simplified, abs=3 * k * s**2 / n**2)
    assert hansbo_mu(n, s, k) > hansbo_mu(n)                  # smear slows consolidation


def test_pattern_band_drain_and_well_resistance():
    assert influence_diameter(2.0, "triangular") == pytest.approx(2.10)    # Barron (1948)
    assert influence_diameter(2.0, "square") == pytest.approx(2.256)
    assert band_drain_diameter(0.1, 0.005) == pytest.approx(2 * 0.105 / math.pi)  # Hansbo (1979)
    assert well_resistance(12.0, 2e-4) == pytest.approx(math.pi * 2 / 3 * 144 * 2e-4)
    with pytest.raises(InputError, match="pattern"):
        influence_diameter(2.0, "hexagonal")
    with pytest.raises(InputError, match="diameter"):
        VerticalDrains(1.5, "square")


def _free_strain_degree(n, th_targets, cells=400):
    """Barron's free-strain radial consolidation ∂u/∂t = ch(∂²u/∂r² + (1/r)∂u/∂r), u = 0 at
    the drain (r = rw), no flow at re, uniform initial u = 1: finite differences in
    x = ln r (so ∂u/∂t = ch/r² ∂²u/∂x²), stiff integration by scipy's BDF. Lengths scaled
    by de (= 1), ch = 1, so t = Th. Returns the area-average degree 1 − ū."""
    re, rw = 0.5, 0.5 / n
    x = np.linspace(math.log(rw), math.log(re), cells + 1)
    dx = x[1] - x[0]
    r = np.exp(x[1:])                                       # unknowns: all but the drain node
    main = -2.0 * np.ones(cells)
    upper = np.ones(cells - 1)
    lower = np.ones(cells - 1)
    lower[-1] = 2.0                                         # ghost node: ∂u/∂x = 0 at re
    lap = diags([lower, main, upper], [-1, 0, 1]) / dx**2
    jac = diags(1.0 / r**2) @ lap

    def rhs(_, u):
        return jac @ u

    sol = solve_ivp(rhs, (0.0, max(th_targets)), np.ones(cells), method="BDF", jac=jac,
                    t_eval=th_targets, rtol=1e-8, atol=1e-10)
    w = r**2 * dx                                           # ∫u r dr = ∫u r² dx (trapezoid)
    w[-1] *= 0.5
    area = 0.5 * (re**2 - rw**2)
    return 1.0 - (w @ sol.y) / area


@pytest.mark.parametrize("n", [10.0, 20.0, 40.0])
def test_equal_strain_closed_form_against_free_strain_finite_differences(n):
    # Equal strain (Barron's closed form) and free strain are different theories: they
    # differ by about 0.01 in U at Th = 0.1 and far less later; agreement within 0.02.
    th = [0.1, 0.3, 1.0]
    fd = _free_strain_degree(n, th)
    closed = radial_degree(np.array(th), barron_f(n))
    np.testing.assert_allclose(closed, fd, atol=0.02)
    assert abs(closed[2] - fd[2]) < 0.005


def test_free_strain_solver_converges():
    # the numerical reference itself: doubling the cells changes U by < 1e-3
    a = _free_strain_degree(20.0, [0.1], cells=200)
    b = _free_strain_degree(20.0, [0.1], cells=400)
    assert abs(a[0] - b[0]) < 1e-3


def test_carrillo_and_spacing_solved_for_a_target():
    assert combined_degree(0.3, 0.6) == pytest.approx(1 - 0.7 * 0.4)       # Carrillo (1942)
    d = VerticalDrains(1.5, "square", width_m=0.1, thickness_m=0.004, depth_m=15.0,
                       smear_diameter_m=0.2, k_ratio=2.0)
    s = spacing_for_degree(d, ch=1.8, target_u=0.9, years=0.75, uv=0.1)

    def u_at(spacing):
        uh = 1 - math.exp(-float(d.with_spacing(spacing).radial_rate(1.8)) * 0.75)
        return combined_degree(0.1, uh)

    assert u_at(s) == pytest.approx(0.9, abs=1e-6)
    assert u_at(1.02 * s) < 0.9 < u_at(0.98 * s)
    with pytest.raises(InputError, match="no drains are needed"):
        spacing_for_degree(d, ch=1.8, target_u=0.5, years=1.0, uv=0.6)
