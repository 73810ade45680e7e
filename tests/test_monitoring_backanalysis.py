"""Asaoka (1978) and the hyperbolic method (Tan 1971) on readings of known form."""
import numpy as np
import pytest

from fillstress.errors import InputError
from fillstress.monitoring import asaoka, hyperbolic, resample_equal
from reference import terzaghi_average_degree
from validation_cases import BACK_ANALYSIS, cases

S_ULT = 0.62          # m, invented
CV = 2.4              # m²/year, invented
H_DR = 4.0            # m, drainage path


def terzaghi_readings(days):
    """Settlement of one layer under one instant load step, Terzaghi's series (reference)."""
    tv = CV * np.asarray(days) / 365.25 / H_DR**2
    return S_ULT * terzaghi_average_degree(tv)


def u_above(fraction):
    """First day the reference series passes the degree `fraction`."""
    days = np.arange(1.0, 5000.0)
    return days[np.argmax(terzaghi_average_degree(CV * days / 365.25 / H_DR**2) > fraction)]


@pytest.mark.parametrize("step", [15.0, 30.0, 60.0])
def test_asaoka_on_terzaghi_above_60_percent(step):
    # Acceptance check: ultimate within 2 %, cv within 5 % from readings with U > 60 %.
    start = u_above(0.6)
    days = start + step * np.arange(12)
    fit = asaoka(days, terzaghi_readings(days), drainage_path_m=H_DR)
    assert fit.ultimate == pytest.approx(S_ULT, rel=0.02)
    assert fit.cv_m2_per_yr == pytest.approx(CV, rel=0.05)
    assert np.max(np.abs(fit.residuals)) < 1e-3 * S_ULT


def test_asaoka_early_readings_are_worse_not_hidden():
    # Below U = 30 % the higher series terms matter: the first-order line is not exact
    # and the cv it implies drifts (this test fails if the method were tuned to pass).
    days = 5.0 + 5.0 * np.arange(10)
    assert terzaghi_average_degree(CV * days[-1] / 365.25 / H_DR**2) < 0.3
    fit = asaoka(days, terzaghi_readings(days), drainage_path_m=H_DR)
    assert abs(fit.cv_m2_per_yr / CV - 1) > 0.05


def test_asaoka_resamples_unequal_readings():
    start = u_above(0.65)
    rng = np.random.default_rng(3)
    days = np.sort(start + rng.uniform(0, 400, 25))
    fit = asaoka(days, terzaghi_readings(days), step=20.0, drainage_path_m=H_DR)
    assert fit.step_days == 20.0
    assert fit.ultimate == pytest.approx(S_ULT, rel=0.02)
    assert fit.cv_m2_per_yr == pytest.approx(CV, rel=0.05)


def test_asaoka_refuses_readings_that_do_not_converge():
    days = np.arange(10.0)
    with pytest.raises(InputError, match="do not converge"):
        asaoka(days, 0.01 * days)            # still settling at a constant rate
    with pytest.raises(InputError, match="at least 4"):
        asaoka(days[:3], days[:3])
    with pytest.raises(InputError, match="increasing"):
        asaoka([0, 2, 1, 3], [0, 1, 2, 3])


def test_hyperbolic_recovers_its_own_closed_form_exactly():
    # Tan (1971): (t − t0)/(s − s0) = α + β(t − t0), invented α, β, t0, s0.
    alpha, beta, t0, s0 = 55.0, 1.6, 90.0, 0.21
    days = t0 + np.array([0.0, 7, 19, 40, 75, 130, 260, 500])
    s = s0 + np.where(days > t0, (days - t0) / (alpha + beta * (days - t0)), 0.0)
    fit = hyperbolic(days, s, start_day=t0)
    assert fit.alpha == pytest.approx(alpha, rel=1e-12)
    assert fit.beta == pytest.approx(beta, rel=1e-12)
    assert fit.ultimate == pytest.approx(s0 + 1 / beta, rel=1e-12)
    assert np.max(np.abs(fit.residuals)) < 1e-12


def test_hyperbolic_on_terzaghi_is_a_second_estimate_not_the_same():
    # Fitted from the end of loading over U = 60 … 90 %, the hyperbola levels off more
    # slowly than Terzaghi's curve and overestimates its ultimate (the tendency reported
    # for the method, recalled from memory; measured here: 0.83 m against 0.62 m).
    days = u_above(0.6) + 30.0 * np.arange(12)
    fit = hyperbolic(days, terzaghi_readings(days))
    assert S_ULT * 1.05 < fit.ultimate < S_ULT * 1.6


def test_hyperbolic_refuses_bad_readings():
    with pytest.raises(InputError, match="start_day"):
        hyperbolic([0, 1, 2, 3], [0, 1, 2, 3], start_day=9)
    with pytest.raises(InputError, match="exceed"):
        hyperbolic([0, 1, 2, 3], [0.0, -0.1, 0.2, 0.3])


def test_resample_equal_keeps_the_first_reading_and_interpolates():
    t, s = resample_equal([3.0, 4.0, 9.0], [1.0, 2.0, 7.0], step=2.0)
    assert t.tolist() == [3.0, 5.0, 7.0, 9.0]
    assert s.tolist() == [1.0, 3.0, 5.0, 7.0]


@pytest.mark.parametrize("case", cases(BACK_ANALYSIS), ids=lambda c: c.id)
def test_registry_cases(case):
    computed = case.compute()
    assert case.passes(computed), case.explain(computed)
