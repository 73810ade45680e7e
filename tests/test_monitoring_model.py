"""The monitoring model: the run's own prediction at instruments, scaled and fitted."""
import dataclasses

import numpy as np
import pytest

from fillstress.examples import example_site
from fillstress.monitoring.model import (Placement, design_placements, fit_factors, isochrone,
                                         piezometer_model, point_model, relative_settlement,
                                         scaled_profile)
from fillstress.run.compute import compute
from fillstress.settlement import degree_of_consolidation
from fillstress.site.build import load_site
from reference import terzaghi_excess_pore_pressure

CENTRE = [452100.0, 218300.0]      # BH-01 of the preload sample
EDGE = [452145.0, 218300.0]        # BH-02


@pytest.fixture(scope="module")
def site():
    return load_site(example_site("preload_surcharge"))


@pytest.fixture(scope="module")
def model(site):
    return point_model(site, [CENTRE, EDGE], [0.0, 0.0])


def test_matches_the_run_at_the_boreholes(site, model):
    res = compute(site)
    final = res.points.groupby("receptor_id")["settlement"].first()
    for row, bh in enumerate(["BH-01", "BH-02"]):
        days, curve = res.time_curves[bh]
        assert model.final()[row] == pytest.approx(final[bh], rel=1e-9)
        assert model.settlement(days)[row] == pytest.approx(curve, rel=1e-6, abs=1e-9)


def test_compressibility_factor_is_exact_by_interpolation(site, model):
    truth = point_model(dataclasses.replace(site, soil=scaled_profile(site.soil, 0.8, 2.0)),
                        [CENTRE, EDGE], [0.0, 0.0])
    days = np.array([50.0, 300.0, 2000.0])
    assert truth.settlement(days) == pytest.approx(model.settlement(days, 0.8, 2.0), rel=1e-9)
    assert np.all(model.final(1.3) > model.final()) and np.all(model.final() > model.final(0.8))


def test_construction_record_changes_the_loading(site, model):
    late = point_model(site, [CENTRE], [0.0], [Placement(1, 0.0), Placement(2, 200.0, 0.5),
                                               Placement(2, 260.0, 0.5)])
    # the same final load in the end; less settlement at day 200 than the design (day 120)
    assert late.final()[0] == pytest.approx(model.final()[0], rel=1e-3)
    assert late.settlement([200.0])[0, 0] < model.settlement([200.0])[0, 0]
    assert [p.day for p in design_placements(site)] == [0.0, 120.0]


def fit_data(model, f_c, f_cv, noise=0.0, days=np.arange(20.0, 1500.0, 30.0), seed=0):
    rows = np.repeat(np.arange(2), days.size)
    dd = np.tile(days, 2)
    base = np.array([2.0, 2.0])
    meas = relative_settlement(model, rows, dd, base, f_c, f_cv)
    meas = meas + np.random.default_rng(seed).normal(0.0, noise, meas.size)
    return rows, dd, meas, base


def test_fit_recovers_exact_factors_from_the_models_own_curve(model):
    fit = fit_factors(model, *fit_data(model, 0.8, 2.0))
    assert fit.f_c == pytest.approx(0.8, rel=1e-5)
    assert fit.f_cv == pytest.approx(2.0, rel=1e-5)
    assert fit.rms < 1e-6


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_fit_interval_holds_the_truth_with_noise(model, seed):
    fit = fit_factors(model, *fit_data(model, 0.8, 2.0, noise=0.004, seed=seed))
    assert fit.f_c_ci[0] < 0.8 < fit.f_c_ci[1]
    assert fit.f_cv_ci[0] < 2.0 < fit.f_cv_ci[1]
    assert fit.f_c_ci[1] - fit.f_c_ci[0] < 0.2          # informative, not a blanket
    assert fit.rms == pytest.approx(0.004, rel=0.3)


def test_isochrone_against_the_reference_series():
    z = np.linspace(0.0, 2.0, 9)
    for tv in (0.01, 0.1, 0.5, 1.5):
        assert isochrone(z, tv) == pytest.approx(terzaghi_excess_pore_pressure(z, tv), abs=1e-9)
    # the layer average of u/u0 is 1 − U (Terzaghi): Simpson over the double-drained layer
    zz = np.linspace(0, 2, 2001)
    u = isochrone(zz, 0.3)
    average = (u[0] + u[-1] + 4 * u[1:-1:2].sum() + 2 * u[2:-1:2].sum()) * (zz[1] - zz[0]) / 3 / 2
    assert average == pytest.approx(1 - degree_of_consolidation(0.3), abs=1e-6)


def test_piezometer_starts_at_the_stress_increase_and_dissipates(site):
    pz = piezometer_model(site, [[*CENTRE, 7.5]])
    assert pz.z_over_h[0] == pytest.approx((7.5 - 1.5) / 6.0)
    first = pz.excess([1e-6])[0, 0]
    assert first == pytest.approx(pz.du[0, 0], rel=1e-3)
    u = pz.excess([10.0, 119.0, 121.0, 2000.0, 20000.0])[0]
    assert u[0] > u[1] and u[2] > u[1] and u[2] > u[3] > u[4] and u[4] < 0.01 * u[2]
    assert pz.excess([2000.0], f_cv=2.0)[0, 0] < u[3]


def test_early_readings_do_not_pretend_to_separate_the_factors(site):
    # U < 30 % by vertical drainage alone: settlement grows as f_c·√f_cv, so the cv factor
    # is barely bounded (the sample's drains are taken out: radial drainage grows as f_cv·t).
    model = point_model(dataclasses.replace(site, drains=[]), [CENTRE, EDGE], [0.0, 0.0])
    rows, days, meas, base = fit_data(model, 0.8, 2.0, noise=0.004, days=np.arange(5.0, 90.0, 7.0))
    fit = fit_factors(model, rows, days, meas, base)
    width = fit.f_cv_ci[1] - fit.f_cv_ci[0]
    assert not fit.identifiable or width > 1.0
