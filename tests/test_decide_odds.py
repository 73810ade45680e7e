"""Odds of exceeding a limit (decide/odds.py).

Check of the issue: one normally consolidated layer with lognormal Cc has a lognormal
settlement (settlement is linear in Cc, Terzaghi 1-D), so the sampled percentiles and
P(exceed) are compared with the exact lognormal values (mean/COV to ln-parameters as in
Ang & Tang, Probability Concepts in Engineering). Latin hypercube: McKay, Beckman & Conover
(1979); rank correlation: Iman & Conover (1982). Soils are invented.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from fillstress.decide.odds import (convergence, correlation_matrix, exceedance, latin_hypercube,
                                    unit_hypercube,
                                    lognormal, normal, odds, profile_with, quantile_bounds,
                                    sampled_settlement, uniform)
from fillstress.errors import InputError
from fillstress.settlement import consolidation_settlement, sublayers
from fillstress.soil import SoilLayer, SoilProfile

CLAY = SoilProfile([SoilLayer("grey clay", 0, 8, 16.0, 16.5, cc=0.45, cr=0.05, e0=1.4,
                              ocr=1.0)], water_table_m=0.5)
CC = lognormal(0.45, 0.35)


def _lognormal_settlement(samples_n, seed):
    z, h = sublayers(CLAY, max_thickness=2.0)
    dsz = np.full((2, z.size), 70.0) * np.array([[1.0], [0.6]])      # two receptors
    samples = latin_hypercube({"grey clay.cc": CC}, samples_n, seed)
    s = sampled_settlement(CLAY, z, h, dsz, samples)
    per_unit_cc = consolidation_settlement(CLAY, z, h, dsz) / 0.45     # s = Cc · k
    return s, samples["grey clay.cc"], per_unit_cc


def _exact(per_unit_cc, p):
    # S = k·Cc: lognormal with mean k·0.45 and the same COV; quantile exp(μ + σ·z_p)
    s_ln = math.sqrt(math.log1p(0.35 ** 2))
    mu = np.log(per_unit_cc * 0.45) - 0.5 * s_ln ** 2
    return np.exp(mu + s_ln * stats.norm.ppf(p)), mu, s_ln


def test_settlement_is_linear_in_cc():
    s, cc, k = _lognormal_settlement(50, 3)
    np.testing.assert_allclose(s / cc[:, None], np.broadcast_to(k, s.shape), rtol=1e-12)


@pytest.mark.parametrize("seed, n", [(1, 2000), (2024, 400)])
def test_sampled_percentiles_match_the_exact_lognormal_quantiles(seed, n):
    # at n = 2000 three standard errors of the median are 3 % of it: a lognormal whose
    # median is set to its mean (6 % too high at COV 0.35) fails here
    s, _, k = _lognormal_settlement(n, seed)
    o = odds(s, [1.05, 0.70])
    for p, got in ((0.1, o.p10), (0.5, o.p50), (0.9, o.p90)):
        exact, mu, s_ln = _exact(k, p)
        _, lo, hi = quantile_bounds(s, p, z=3.0)
        assert np.all(lo <= exact) and np.all(exact <= hi)
        # asymptotic standard error of a sample quantile: sqrt(p(1−p)/n) / f(x_p)
        density = stats.lognorm(s_ln, scale=np.exp(mu)).pdf(exact)
        se = np.sqrt(p * (1 - p) / n) / density
        assert np.all(np.abs(got - exact) < 3 * se)


@pytest.mark.parametrize("seed", [5, 77])
def test_exceedance_matches_the_exact_lognormal_probability(seed):
    s, _, k = _lognormal_settlement(600, seed)
    limit = np.array([1.05, 0.70])                             # mean settlements 0.88, 0.67 m
    _, mu, s_ln = _exact(k, 0.5)
    exact = 1.0 - stats.norm.cdf((np.log(limit) - mu) / s_ln)
    assert np.all((exact > 0.05) & (exact < 0.95))             # a real test, not 0 or 1
    p, se = exceedance(s, limit)
    assert np.all(np.abs(p - exact) <= 3 * se)
    counts, series, series_se = convergence(s, limit)
    assert counts[-1] == 600 and counts[0] == 10 and np.all(np.diff(counts) > 0)
    np.testing.assert_array_equal(series[-1], p)
    assert np.all(np.abs(series[-1] - exact) <= 3 * series_se[-1])


def test_latin_hypercube_fills_every_stratum_once_and_is_seeded():
    dists = {"a": normal(18.0, 0.05), "b": CC, "c": uniform(2.0, 4.0)}
    x = latin_hypercube(dists, 64, seed=11)
    for name, d in dists.items():
        strata = np.floor(d.scipy.cdf(x[name]) * 64).astype(int)
        assert sorted(strata.tolist()) == list(range(64))
    again = latin_hypercube(dists, 64, seed=11)
    assert all(np.array_equal(x[k], again[k]) for k in dists)
    assert not np.array_equal(x["a"], latin_hypercube(dists, 64, seed=12)["a"])


def test_iman_conover_imposes_the_rank_correlation_and_keeps_the_marginals():
    dists = {"cc": CC, "e0": normal(1.4, 0.1), "gamma": uniform(15.5, 17.0)}
    plain = latin_hypercube(dists, 2000, seed=9)
    tied = latin_hypercube(dists, 2000, seed=9, correlation={("cc", "e0"): 0.7})
    for k in dists:
        np.testing.assert_array_equal(np.sort(plain[k]), np.sort(tied[k]))
    rho = stats.spearmanr(np.column_stack([tied[k] for k in dists])).statistic
    assert rho[0, 1] == pytest.approx(0.7, abs=0.03)
    assert abs(rho[0, 2]) < 0.06 and abs(rho[1, 2]) < 0.06      # independent unless stated


def test_distribution_parameters():
    assert normal(20.0, sd=1.5).sd == 1.5
    d = lognormal(0.3, 0.25)
    assert float(d.scipy.mean()) == pytest.approx(0.3) and float(d.scipy.std()) == pytest.approx(0.075)
    u = uniform(mean=16.0, cov=0.05)
    assert u.high - u.low == pytest.approx(2 * math.sqrt(3) * 0.8)
    for bad in (lambda: lognormal(-1.0, 0.2), lambda: normal(1.0), lambda: uniform(3.0, 2.0),
                lambda: uniform(1.0, 2.0, mean=1.5, cov=0.1), lambda: normal(1.0, -0.2)):
        with pytest.raises(InputError):
            bad()


def test_profile_with_and_sampled_settlement_refuse_what_they_cannot_use():
    assert profile_with(CLAY, {"water_table_m": 2.0}).water_table_m == 2.0
    with pytest.raises(InputError, match="samples"):
        profile_with(CLAY, {"grey clay.colour": 1.0})
    with pytest.raises(InputError, match="sample 1"):            # Cc below Cr in sample 1
        sampled_settlement(CLAY, [3.0], [2.0], [[50.0]], {"grey clay.cc": [0.4, 0.01]})
    with pytest.raises(InputError, match="correlation"):
        correlation_matrix(["a", "b", "c"], {("a", "b"): 0.9, ("a", "c"): 0.9, ("b", "c"): -0.9})
    with pytest.raises(InputError, match="correlation"):
        latin_hypercube({"a": CC}, 10, correlation={("a", "z"): 0.5})
    with pytest.raises(InputError, match="n"):
        latin_hypercube({"a": CC}, 1)


def test_load_factor_scales_the_stress():
    z, h = np.array([3.0]), np.array([2.0])
    s = sampled_settlement(CLAY, z, h, [[40.0]], {"load_factor": [1.0, 1.5]})
    np.testing.assert_allclose(s[:, 0], consolidation_settlement(CLAY, z, h, [[40.0], [60.0]]))


@pytest.mark.parametrize("seed, n, d", [(0, 2, 1), (7, 50, 3), (123, 400, 6)])
def test_unit_hypercube_draws_what_scipy_qmc_latin_hypercube_draws(seed, n, d):
    """The Latin hypercube made without scipy.stats is scipy's, draw for draw (the same
    seed gives the samples it gave when scipy.stats.qmc made them)."""
    from scipy.stats import qmc
    ours = unit_hypercube(np.random.default_rng(seed), n, d)
    theirs = qmc.LatinHypercube(d, seed=np.random.default_rng(seed)).random(n)
    np.testing.assert_array_equal(ours, theirs)


@pytest.mark.parametrize("dist", [normal(18.0, 0.05), normal(-3.0, sd=0.4), lognormal(0.4, 0.3),
                                  lognormal(1.6, 1.2), uniform(17.0, 19.0),
                                  uniform(mean=10.0, cov=0.1)], ids=repr)
def test_quantiles_are_scipy_stats_quantiles(dist):
    """Distribution.ppf by ndtri alone gives the floats of the frozen scipy.stats
    distribution's ppf, tails included."""
    u = np.concatenate([np.linspace(1e-9, 1 - 1e-9, 1001), [1e-300, 0.5, 1 - 2 ** -53]])
    np.testing.assert_array_equal(dist.ppf(u), dist.scipy.ppf(u))


def test_correlated_samples_are_those_of_the_scipy_stats_reference():
    """latin_hypercube (with Iman–Conover re-pairing) equals the same steps done with
    scipy.stats: qmc's hypercube, the frozen distributions' ppf and norm.ppf scores."""
    dists = {"cc": lognormal(0.4, 0.3), "e0": normal(1.2, 0.1), "gamma": uniform(17.0, 19.0)}
    pairs = {("cc", "e0"): 0.6}
    got = latin_hypercube(dists, 64, seed=11, correlation=pairs)
    rng = np.random.default_rng(11)
    from scipy.stats import qmc
    u = qmc.LatinHypercube(3, seed=rng).random(64)
    x = np.column_stack([d.scipy.ppf(u[:, i]) for i, d in enumerate(dists.values())])
    scores = stats.norm.ppf(np.arange(1, 65) / 65.0)
    s = np.column_stack([rng.permutation(scores) for _ in range(3)])
    q = np.linalg.cholesky(np.corrcoef(s, rowvar=False))
    t = s @ np.linalg.solve(q, np.linalg.cholesky(correlation_matrix(list(dists), pairs)).T)
    ranks = np.argsort(np.argsort(t, axis=0), axis=0)
    want = np.take_along_axis(np.sort(x, axis=0), ranks, axis=0)
    for i, k in enumerate(dists):
        np.testing.assert_array_equal(got[k], want[:, i])
