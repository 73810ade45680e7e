"""The odds of exceeding a limit through a run ([uncertainty], run/odds.py).

Checks of the issue, on a whole run: one normally consolidated layer with lognormal Cc gives
a lognormal settlement (Terzaghi 1-D: s = Cc·h/(1+e0)·log10(σ'1/σ'0), linear in Cc), so the
sampled percentiles and P(exceed) of a building's settlement and angular distortion are
compared with the exact lognormal values (mean/COV to ln-parameters as in Ang & Tang,
Probability Concepts in Engineering); a site with no distribution gives the settlement of
the normal run; the vectorised samples equal runs of site files with the sampled values
written in (the slow reference). The site is invented.
"""
from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from fillstress.cli import main
from fillstress.run.compute import compute
from fillstress.site.build import load_site
from fillstress.units import SI

CC, COV = 0.42, 0.35
SITE = """
[site]
name = "Marrow Fen depot"
crs = "EPSG:32630"

[grid]
cell = 2.0
margin = 6.0
convergence_check = false

[bodies.bund]
kind = "footprint"
outline = [[400000, 6000000], [400030, 6000000], [400030, 6000014], [400000, 6000014]]
height = 2.5
unit_weight = 19.0

[[buildings]]
id = "pump_house"
outline = [[400034, 6000002], [400046, 6000002], [400046, 6000010], [400034, 6000010]]
foundation_depth = 1.0
interior_spacing = 4.0
wall_spacing = 2.0

[soil]
water_table = 1.0

[[soil.layers]]
name = "soft silty clay"
top = 0.0
bottom = 9.0
unit_weight = 16.5
saturated_unit_weight = 17.0
cc = 0.42
cr = 0.05
e0 = 1.3
ocr = 1.0
cv = 1.5
"""


def _write(tmp_path, text, name="site.toml"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def _odds(samples, seed, extra=""):
    return (f"\n[uncertainty]\nsamples = {samples}\nseed = {seed}\n"
            "[[uncertainty.parameters]]\nlayer = \"soft silty clay\"\nparameter = \"cc\"\n"
            f"distribution = \"lognormal\"\ncov = {COV}\n" + extra)


def _row(table, quantity, limit=""):
    t = table[(table["receptor_id"] == "pump_house") & (table["quantity"] == quantity)]
    return t[t["limit"] == limit].iloc[0] if limit else t.iloc[0]


@pytest.fixture(scope="module")
def nominal(tmp_path_factory):
    site = load_site(_write(tmp_path_factory.mktemp("nominal"), SITE))
    b = compute(site).buildings[0]
    return {"settlement": b.settlement_max_m, "angular_distortion": b.angular_distortion}


def _exact(nominal_value, p):
    """Quantile p of nominal·Cc/CC with Cc lognormal (mean CC, COV): exp(μ + σ·z_p)."""
    s_ln = math.sqrt(math.log1p(COV ** 2))
    mu = math.log(nominal_value) - 0.5 * s_ln ** 2
    return math.exp(mu + s_ln * stats.norm.ppf(p)), mu, s_ln


@pytest.mark.parametrize("seed", [4, 2026])
def test_lognormal_cc_gives_the_exact_lognormal_settlement_and_odds(tmp_path, nominal, seed):
    n = 1000
    s_limit = 1.2 * nominal["settlement"]              # P(exceed) about 0.24
    beta_limit = 0.8 * nominal["angular_distortion"]   # P(exceed) about 0.68
    text = SITE + f"\n[limits]\npublished = false\nsettlement = {1000 * s_limit}\n" \
                  f"angular_distortion = {beta_limit}\n" + _odds(n, seed)
    res = compute(load_site(_write(tmp_path, text)))
    table = res.odds.table(SI)
    for quantity, limit in (("settlement", s_limit), ("angular_distortion", beta_limit)):
        factor = 1000.0 if quantity == "settlement" else 1.0        # mm in the table
        row = _row(table, quantity, quantity)
        for p, got in ((0.1, row["p10"]), (0.5, row["p50"]), (0.9, row["p90"])):
            exact, mu, s_ln = _exact(nominal[quantity], p)
            # asymptotic standard error of a sample quantile: sqrt(p(1−p)/n) / f(x_p)
            se = math.sqrt(p * (1 - p) / n) / stats.lognorm(s_ln, scale=math.exp(mu)).pdf(exact)
            assert abs(got / factor - exact) < 3 * se
        _, mu, s_ln = _exact(nominal[quantity], 0.5)
        exact_p = 1.0 - stats.norm.cdf((math.log(limit) - mu) / s_ln)
        assert 0.1 < exact_p < 0.9                                  # a real test
        assert abs(row["p_exceed"] - exact_p) <= 3 * row["standard_error"]
        assert row["wilson_low"] < row["p_exceed"] < row["wilson_high"]
        assert row["samples"] == n and row["samples_over"] == round(row["p_exceed"] * n)


def test_a_site_with_no_distribution_gives_the_normal_runs_settlement(tmp_path, nominal):
    res = compute(load_site(_write(tmp_path, SITE + "\n[uncertainty]\nsamples = 20\n")))
    row = _row(res.odds.table(SI), "settlement")
    for col in ("nominal", "p10", "p50", "p90"):
        assert row[col] == pytest.approx(1000 * nominal["settlement"], rel=1e-12)
    assert np.all(res.odds.values == res.odds.values[0])


def test_each_sample_equals_a_run_of_the_site_with_its_values(tmp_path):
    """The fast path (stress once per body, scaled; settlement vectorised over samples)
    against the slow one: the site file rewritten with one sample's values and run."""
    extra = ("[[uncertainty.parameters]]\nlayer = \"soft silty clay\"\n"
             "parameter = \"saturated_unit_weight\"\ndistribution = \"uniform\"\n"
             "low = 16.0\nhigh = 18.0\n"
             "[[uncertainty.parameters]]\nparameter = \"water_table\"\n"
             "distribution = \"normal\"\nsd = 0.3\n"
             "[[uncertainty.parameters]]\nbody = \"bund\"\nparameter = \"unit_weight\"\n"
             "distribution = \"normal\"\ncov = 0.06\n"
             "[[uncertainty.correlations]]\nbetween = [\"soft silty clay.cc\", "
             "\"bund.unit_weight\"]\ncoefficient = 0.6\n")
    res = compute(load_site(_write(tmp_path, SITE + _odds(20, 8, extra))))
    drawn = res.odds.parameters
    assert stats.spearmanr(drawn["soft silty clay.cc"], drawn["bund.unit_weight"]).statistic > 0.3
    for i in (3, 17):
        one = (SITE.replace("cc = 0.42", f"cc = {float(drawn['soft silty clay.cc'][i])!r}")
               .replace("saturated_unit_weight = 17.0",
                        f"saturated_unit_weight = {float(drawn['soft silty clay.saturated_unit_weight'][i])!r}")
               .replace("water_table = 1.0", f"water_table = {float(drawn['water_table'][i])!r}")
               .replace("unit_weight = 19.0", f"unit_weight = {float(drawn['bund.unit_weight'][i])!r}"))
        b = compute(load_site(_write(tmp_path, one, f"s{i}.toml"))).buildings[0]
        got = dict(zip(res.odds.quantities, res.odds.values[i]))
        for quantity, attr in (("settlement", "settlement_max_m"),
                               ("differential_settlement", "differential_m"),
                               ("angular_distortion", "angular_distortion"), ("tilt", "tilt")):
            assert got[("building", "pump_house", quantity)] == pytest.approx(
                getattr(b, attr), rel=1e-9)


def test_a_sampled_cv_gives_the_time_to_90_percent(tmp_path):
    extra = ("[[uncertainty.parameters]]\nlayer = \"soft silty clay\"\nparameter = \"cv\"\n"
             "distribution = \"lognormal\"\ncov = 0.4\n")
    res = compute(load_site(_write(tmp_path, SITE + _odds(50, 1, extra))))
    row = res.odds.table(SI).query("quantity == 't90'").iloc[0]
    # Terzaghi: T90 = 0.848, double drainage of 9 m: H_dr = 4.5 m; t = T·H²/cv (years)
    assert row["nominal"] == pytest.approx(0.848 * 4.5 ** 2 / 1.5 * 365.25, rel=2e-3)
    t = 0.848 * 4.5 ** 2 / res.odds.parameters["soft silty clay.cv"] * 365.25
    assert row["p50"] == pytest.approx(np.quantile(t, 0.5), rel=2e-3)


def test_the_run_writes_the_odds_tables_and_report_section(tmp_path, capsys):
    text = SITE + "\n[limits]\nsettlement = 60.0\n" + _odds(60, 2)
    out = tmp_path / "out"
    assert main(["run", str(_write(tmp_path, text)), "-o", str(out)]) == 0
    odds = pd.read_csv(out / "odds.csv", encoding="utf-8-sig")
    assert {"p10", "p50", "p90", "p_exceed", "standard_error", "wilson_low",
            "wilson_high", "unit"} <= set(odds.columns)
    assert set(odds.loc[odds["quantity"] == "settlement", "unit"]) == {"mm"}
    conv = pd.read_csv(out / "odds_convergence.csv", encoding="utf-8-sig")
    assert conv["samples"].max() == 60 and (conv["wilson_low"] <= conv["p_exceed"]).all()
    params = pd.read_csv(out / "odds_parameters.csv", encoding="utf-8-sig")
    assert params["parameter"].tolist() == ["soft silty clay.cc"]
    html = (out / "report.html").read_text(encoding="utf-8")
    section = html[html.index('<section id="odds"'):]
    assert "Likeliest limit exceeded" in section[:2000] and "data:image/png" in section
    printed = " ".join(capsys.readouterr().out.split())
    assert "odds: likeliest limit exceeded: beta_no_cracking at building pump_house, 60 of 60 " \
        "samples" in printed
    assert "No parameter was given as a distribution" not in section[:3000]


def test_without_uncertainty_there_are_no_odds(tmp_path):
    res = compute(load_site(_write(tmp_path, SITE)))
    assert res.odds is None


def test_samples_spread_over_dask_equal_the_serial_samples(tmp_path):
    from distributed import Client
    from fillstress.run.odds import BLOCK, odds_results
    site = load_site(_write(tmp_path, SITE + _odds(BLOCK + 7, 5)))
    res = compute(site)
    with Client(processes=False, n_workers=1, threads_per_worker=2,
                dashboard_address=":0") as client:
        spread = odds_results(res, client)
    np.testing.assert_array_equal(spread.values, res.odds.values)
    np.testing.assert_array_equal(spread.utilisation, res.odds.utilisation)
