"""The odds of exceeding a limit: uncertain soil and load parameters, sampled.

Parameters are given as distributions (normal, lognormal, uniform; by mean and coefficient
of variation, or uniform by bounds), sampled with a seeded Latin hypercube (McKay, Beckman
& Conover 1979; the draws of scipy.stats.qmc.LatinHypercube) and, where correlations are
stated, re-paired by the Iman–Conover (1982) rank method, which keeps every marginal sample
exactly and imposes the target correlation on van der Waerden normal scores (the rank
correlation obtained is close to the target, within sampling error). Parameters not named in
a correlation are independent.

Settlement is recomputed for each sample with the full model; the stress is computed once and
scaled, since it is linear in the fill unit weight (the parameter ``load_factor`` =
γ_fill / nominal γ_fill). The estimates per receptor are the sample percentiles, each with a
distribution-free interval from the order statistics, and P(exceed) with its binomial
standard error sqrt(p(1 − p)/n) — conservative for a Latin hypercube, whose variance is no
larger than simple random sampling for a monotone response (McKay et al. 1979).
"""
from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Mapping

import numpy as np
from scipy.special import ndtri

from .._validate import finite, finite_array, positive, whole_number
from ..errors import InputError
from ..settlement import final_settlement_of_profiles
from ..soil import SoilProfile

LOAD_FACTOR = "load_factor"


@dataclass(frozen=True)
class Distribution:
    """A parameter's distribution: ``kind`` "normal", "lognormal" or "uniform" with its
    ``mean`` and standard deviation ``sd`` (uniform: ``low``, ``high``). Build one with
    :func:`normal`, :func:`lognormal` or :func:`uniform`."""

    kind: str
    mean: float
    sd: float
    low: float = -math.inf
    high: float = math.inf

    @property
    def scipy(self):
        """The frozen scipy.stats distribution."""
        from scipy import stats  # loaded when sampled: reading a site file must stay quick
        if self.kind == "normal":
            return stats.norm(self.mean, self.sd)
        if self.kind == "lognormal":
            s_ln = math.sqrt(math.log1p((self.sd / self.mean) ** 2))
            return stats.lognorm(s_ln, scale=self.mean * math.exp(-0.5 * s_ln * s_ln))
        return stats.uniform(self.low, self.high - self.low)

    def ppf(self, u):
        """Values at cumulative probabilities `u` (the inverse distribution function): the
        floats of :attr:`scipy`'s ``ppf``, by the standard normal quantile alone
        (scipy.special.ndtri; scipy.stats takes 0.4 s to load, a fifth of a small run)."""
        u = np.asarray(u, dtype=float)
        if self.kind == "normal":
            return ndtri(u) * self.sd + self.mean
        if self.kind == "lognormal":
            s_ln = math.sqrt(math.log1p((self.sd / self.mean) ** 2))
            return np.exp(s_ln * ndtri(u)) * (self.mean * math.exp(-0.5 * s_ln * s_ln))
        return u * (self.high - self.low) + self.low


def _cov(mean, cov, name):
    return abs(mean) * positive(cov, f"{name}.cov")


def normal(mean, cov=None, *, sd=None, name="normal") -> Distribution:
    """Normal distribution by its mean and COV (sd = COV·|mean|) or its sd.

    Examples
    --------
    >>> normal(18.0, 0.05).sd
    0.9
    """
    mean = finite(mean, f"{name}.mean")
    if (cov is None) == (sd is None):
        raise InputError("give exactly one of cov and sd", argument=name)
    spread = _cov(mean, cov, name) if cov is not None else positive(sd, f"{name}.sd")
    return Distribution("normal", mean, spread)


def lognormal(mean, cov, *, name="lognormal") -> Distribution:
    """Lognormal distribution by its mean (> 0) and COV: ln X is normal with
    σ² = ln(1 + COV²) and μ = ln(mean) − σ²/2 (e.g. Ang & Tang, Probability Concepts in
    Engineering).

    Examples
    --------
    >>> d = lognormal(0.4, 0.3)
    >>> round(float(d.scipy.mean()), 12), round(float(d.scipy.std() / 0.4), 12)
    (0.4, 0.3)
    """
    mean = positive(mean, f"{name}.mean")
    return Distribution("lognormal", mean, _cov(mean, cov, name), 0.0)


def uniform(low=None, high=None, *, mean=None, cov=None, name="uniform") -> Distribution:
    """Uniform distribution by its bounds, or by mean and COV (bounds mean ± √3·sd).

    Examples
    --------
    >>> d = uniform(mean=10.0, cov=0.2 / math.sqrt(3))     # sd = 2/√3, half-width 2
    >>> round(d.low, 12), round(d.high, 12)
    (8.0, 12.0)
    """
    if mean is not None:
        if low is not None or high is not None:
            raise InputError("give bounds or mean and cov, not both", argument=name)
        mean = finite(mean, f"{name}.mean")
        half = math.sqrt(3.0) * _cov(mean, cov, name)
        low, high = mean - half, mean + half
    if low is None or high is None:
        raise InputError("give low and high, or mean and cov", argument=name)
    low, high = finite(low, f"{name}.low"), finite(high, f"{name}.high")
    if not high > low:
        raise InputError(f"high must exceed low, got {low:g} … {high:g}", argument=name)
    return Distribution("uniform", 0.5 * (low + high), (high - low) / math.sqrt(12.0), low, high)


def correlation_matrix(names, correlation: Mapping[tuple[str, str], float]) -> np.ndarray:
    """The target correlation matrix in the order of `names` from pairs {(a, b): ρ}; pairs
    not given are 0 (independent). Must be positive definite.

    Examples
    --------
    >>> correlation_matrix(["cc", "e0", "gamma"], {("e0", "cc"): 0.5}).tolist()
    [[1.0, 0.5, 0.0], [0.5, 1.0, 0.0], [0.0, 0.0, 1.0]]
    """
    names = list(names)
    c = np.eye(len(names))
    for (a, b), rho in correlation.items():
        if a not in names or b not in names or a == b:
            raise InputError(f"pair ({a!r}, {b!r}) must name two different sampled parameters",
                             argument="correlation")
        rho = finite(rho, f"correlation[{a!r}, {b!r}]")
        if not -1.0 < rho < 1.0:
            raise InputError(f"must lie strictly between -1 and 1, got {rho:g}",
                             argument=f"correlation[{a!r}, {b!r}]")
        i, j = names.index(a), names.index(b)
        c[i, j] = c[j, i] = rho
    try:
        np.linalg.cholesky(c)
    except np.linalg.LinAlgError:
        raise InputError("the correlations together are not a valid (positive definite) "
                         "correlation matrix", argument="correlation") from None
    return c


def _iman_conover(x: np.ndarray, target: np.ndarray, rng) -> np.ndarray:
    """Re-pair the columns of `x` so that their van der Waerden scores have correlation
    `target` (Iman & Conover 1982); each column keeps its values."""
    n, d = x.shape
    scores = ndtri(np.arange(1, n + 1) / (n + 1.0))
    s = np.column_stack([rng.permutation(scores) for _ in range(d)])
    q = np.linalg.cholesky(np.corrcoef(s, rowvar=False))
    t = s @ np.linalg.solve(q, np.linalg.cholesky(target).T)
    ranks = np.argsort(np.argsort(t, axis=0), axis=0)
    return np.take_along_axis(np.sort(x, axis=0), ranks, axis=0)


def unit_hypercube(rng: np.random.Generator, n: int, d: int) -> np.ndarray:
    """`n` points of a Latin hypercube in [0, 1)^d (McKay, Beckman & Conover 1979): each
    axis cut into n strata, one point per stratum, at a uniform place within it, the
    strata of the axes paired by random permutations. The draws of
    ``scipy.stats.qmc.LatinHypercube(d, seed=rng).random(n)`` (scrambled, strength 1),
    in its order, so a seed gives the samples it gave before, without loading
    scipy.stats.

    Examples
    --------
    >>> u = unit_hypercube(np.random.default_rng(1), 4, 2)
    >>> np.sort(np.floor(4 * u), axis=0).T.tolist()          # one point per stratum
    [[0.0, 1.0, 2.0, 3.0], [0.0, 1.0, 2.0, 3.0]]
    """
    own = rng.spawn(1)[0]          # qmc draws from a child of the generator it is given
    within = own.uniform(size=(n, d))
    strata = np.tile(np.arange(1, n + 1), (d, 1))
    for axis in strata:
        own.shuffle(axis)
    return (strata.T - within) / n


def latin_hypercube(distributions: Mapping[str, Distribution], n: int, seed: int = 0,
                    correlation: Mapping[tuple[str, str], float] | None = None
                    ) -> dict[str, np.ndarray]:
    """`n` seeded Latin-hypercube samples of every parameter.

    Parameters
    ----------
    distributions : mapping name -> Distribution
    n : int
        Number of samples (>= 2).
    seed : int
        The same seed gives the same samples.
    correlation : mapping (name, name) -> float, optional
        Target rank correlations, imposed by Iman–Conover; other pairs independent.

    Returns
    -------
    dict name -> ndarray, shape (n,)

    Examples
    --------
    >>> s = latin_hypercube({"cc": lognormal(0.4, 0.3), "gamma": uniform(17.0, 19.0)}, 4, 7)
    >>> sorted(np.floor((s["gamma"] - 17.0) / 0.5).astype(int).tolist())   # one per stratum
    [0, 1, 2, 3]
    """
    if not isinstance(distributions, Mapping) or not distributions:
        raise InputError("must map parameter names to distributions", argument="distributions")
    names = list(distributions)
    for name in names:
        if not isinstance(distributions[name], Distribution):
            raise InputError("must be a Distribution (normal, lognormal, uniform)",
                             argument=f"distributions[{name!r}]")
    n = whole_number(n, "n", minimum=2)
    seed = whole_number(seed, "seed", minimum=0)
    rng = np.random.default_rng(seed)
    u = unit_hypercube(rng, n, len(names))
    x = np.column_stack([distributions[k].ppf(u[:, i]) for i, k in enumerate(names)])
    if correlation:
        x = _iman_conover(x, correlation_matrix(names, correlation), rng)
    return {k: x[:, i] for i, k in enumerate(names)}


def profile_with(profile: SoilProfile, values: Mapping[str, float]) -> SoilProfile:
    """A copy of `profile` with parameters replaced: keys ``"<layer>.<field>"`` (a
    SoilLayer field, e.g. ``"clay.cc"``) or ``"water_table_m"``; ``load_factor`` is ignored
    here (it scales the stress). Every layer is validated again.

    Examples
    --------
    >>> from fillstress.soil import SoilLayer
    >>> p = SoilProfile([SoilLayer("clay", 0, 5, 17.0, cc=0.4, cr=0.04, e0=1.2, ocr=1.0)], 1.0)
    >>> profile_with(p, {"clay.cc": 0.5, "water_table_m": 2.0}).layers[0].cc
    0.5
    """
    fields = {f.name for f in dataclasses.fields(profile.layers[0])}
    changes: dict[str, dict] = {}
    water = profile.water_table_m
    for key, value in values.items():
        if key == LOAD_FACTOR:
            continue
        if key == "water_table_m":
            water = value
            continue
        layer, _, field = key.partition(".")
        if layer not in {lay.name for lay in profile.layers} or field not in fields - {"name"}:
            raise InputError(f"{key!r} must be 'water_table_m', '{LOAD_FACTOR}' or "
                             "'<layer name>.<soil layer field>'", argument="samples")
        changes.setdefault(layer, {})[field] = float(value)
    layers = [dataclasses.replace(lay, **changes.get(lay.name, {})) for lay in profile.layers]
    rigid = profile.rigid_base_m if profile.rigid_base_m < profile.layers[-1].bottom_m else None
    return SoilProfile(layers, water, rigid, profile.gamma_w)


def sampled_profiles(profile: SoilProfile, samples: Mapping[str, np.ndarray]
                     ) -> list[SoilProfile]:
    """One profile per sample (:func:`profile_with`); a sample the soil model refuses (e.g.
    Cr above Cc) is named by its index.

    Examples
    --------
    >>> from fillstress.soil import SoilLayer
    >>> p = SoilProfile([SoilLayer("clay", 0, 4, 10.0, cc=0.5, cr=0.05, e0=1.5, ocr=1.0)], 10.0)
    >>> [q.layers[0].e0 for q in sampled_profiles(p, {"clay.e0": [1.2, 1.6]})]
    [1.2, 1.6]
    """
    cols = _sample_columns(samples)
    n = len(next(iter(cols.values()))) if cols else 0
    out = []
    for i in range(n):
        try:
            out.append(profile_with(profile, {k: v[i] for k, v in cols.items()}))
        except InputError as err:
            raise InputError(f"sample {i}: {err}", argument="samples") from None
    return out


def _sample_columns(samples) -> dict[str, np.ndarray]:
    cols = {k: np.atleast_1d(finite_array(v, f"samples[{k!r}]")) for k, v in samples.items()}
    sizes = {v.shape for v in cols.values()}
    if len(sizes) > 1 or any(len(s) != 1 for s in sizes):
        raise InputError("every sampled parameter needs one 1-D array of the same length",
                         argument="samples")
    return cols


def sampled_load_states(per_body, active, factors) -> np.ndarray:
    """Δσz (kPa) of every load state for every sample, the stress of each body computed
    once and scaled by its sampled load factor (γ_fill / nominal γ_fill: Δσz is linear in
    the load): shape (n, N, E, K).

    Parameters
    ----------
    per_body : array_like, shape (N, B, K)
        Δσz of each body at its nominal unit weight, per point and sublayer.
    active : array_like, shape (E, B)
        Which bodies are in place (1) at each load state.
    factors : array_like, shape (n, B)
        Each sample's factor on each body's load.

    Examples
    --------
    >>> sampled_load_states([[[10.0], [4.0]]], [[1, 0], [1, 1]], [[1.0, 1.0], [2.0, 0.5]]
    ...                     )[:, 0, :, 0].tolist()
    [[10.0, 14.0], [20.0, 22.0]]
    """
    return np.einsum("eb,nb,mbk->nmek", np.asarray(active, float), np.asarray(factors, float),
                     np.asarray(per_body, float))


def sampled_settlement(profile: SoilProfile, z_mid, h, dsz, samples: Mapping[str, np.ndarray]
                       ) -> np.ndarray:
    """Primary consolidation settlement (m) for every sample, shape (n samples, N points),
    vectorised over the samples (settlement.final_settlement_of_profiles).

    Parameters
    ----------
    profile : SoilProfile
        The nominal profile; each sample replaces the parameters it names
        (:func:`profile_with`).
    z_mid, h : array_like, shape (K,)
        Sublayers (m).
    dsz : array_like, shape (N, K)
        Δσz (kPa) of the loads at their nominal unit weight; scaled by ``load_factor``.
    samples : mapping name -> array, shape (n,)
        From :func:`latin_hypercube`.

    Examples
    --------
    >>> from fillstress.soil import SoilLayer
    >>> p = SoilProfile([SoilLayer("clay", 0, 4, 10.0, cc=0.5, cr=0.05, e0=1.5, ocr=1.0)], 10.0)
    >>> sampled_settlement(p, [3.0], [2.0], [[60.0]], {"clay.cc": [0.5, 1.0]}).round(4).tolist()
    [[0.1908], [0.3817]]
    """
    d = np.atleast_2d(finite_array(dsz, "dsz"))
    profiles = sampled_profiles(profile, samples)
    factor = _sample_columns(samples).get(LOAD_FACTOR, np.ones(len(profiles)))
    return final_settlement_of_profiles(profiles, z_mid, h,
                                        factor[:, None, None, None] * d[None, :, None, :])


def _sample_matrix(samples) -> np.ndarray:
    s = finite_array(samples, "samples")
    s = s[:, None] if s.ndim == 1 else s
    if s.ndim != 2 or s.shape[0] < 2:
        raise InputError(f"must have shape (n samples >= 2, N receptors), got {s.shape}",
                         argument="samples")
    return s


def exceedance(samples, limit) -> tuple[np.ndarray, np.ndarray]:
    """P(value > limit) per receptor and its binomial standard error sqrt(p(1−p)/n).

    Examples
    --------
    >>> p, se = exceedance([[1.0], [2.0], [3.0], [4.0]], 2.5)
    >>> p.tolist(), se.round(4).tolist()
    ([0.5], [0.25])
    """
    s = _sample_matrix(samples)
    lim = np.broadcast_to(finite_array(limit, "limit"), s.shape[1:])
    p = np.mean(s > lim, axis=0)
    return p, np.sqrt(p * (1.0 - p) / s.shape[0])


def wilson_interval(p, n, z: float = 1.96) -> tuple[np.ndarray, np.ndarray]:
    """Wilson (1927) score interval of a binomial proportion `p` observed in `n` trials
    (default z = 1.96: 95 %); unlike p ± z·sqrt(p(1−p)/n) it does not shrink to a point
    when no sample (or every sample) exceeds.

    Examples
    --------
    >>> lo, hi = wilson_interval(0.0, 400)
    >>> float(lo), round(float(hi), 4)
    (0.0, 0.0095)
    """
    p = np.asarray(finite_array(p, "p"), float)
    n = np.asarray(finite_array(n, "n"), float)
    if np.any(n <= 0) or np.any((p < 0) | (p > 1)):
        raise InputError("needs 0 <= p <= 1 and n > 0", argument="p")
    z2 = positive(z, "z") ** 2
    centre = (p + z2 / (2 * n)) / (1 + z2 / n)
    half = math.sqrt(z2) / (1 + z2 / n) * np.sqrt(p * (1 - p) / n + z2 / (4 * n * n))
    return np.clip(centre - half, 0.0, 1.0), np.clip(centre + half, 0.0, 1.0)


def quantile_bounds(samples, q, z: float = 3.0) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Sample quantile per receptor with a distribution-free interval from the order
    statistics: the ranks n·q ± z·sqrt(n·q(1−q)) of the binomial count below the quantile
    (clipped to the smallest and largest sample).

    Returns ``(estimate, low, high)``, each shape (N,).

    Examples
    --------
    >>> est, lo, hi = quantile_bounds(np.arange(1.0, 101.0), 0.5, z=2.0)
    >>> float(est[0]), float(lo[0]), float(hi[0])
    (50.5, 40.0, 60.0)
    """
    s = np.sort(_sample_matrix(samples), axis=0)
    n = s.shape[0]
    q = finite(q, "q")
    if not 0.0 < q < 1.0:
        raise InputError(f"must lie strictly between 0 and 1, got {q:g}", argument="q")
    spread = positive(z, "z") * math.sqrt(n * q * (1.0 - q))
    lo = int(np.clip(math.floor(n * q - spread), 1, n)) - 1
    hi = int(np.clip(math.ceil(n * q + spread), 1, n)) - 1
    return np.quantile(s, q, axis=0), s[lo], s[hi]


@dataclass(frozen=True)
class Odds:
    """Per receptor (arrays of shape (N,)): percentiles P10, P50, P90 of the sampled values,
    the probability of exceeding the limit and its standard error, from ``n`` samples."""

    p10: np.ndarray
    p50: np.ndarray
    p90: np.ndarray
    p_exceed: np.ndarray
    standard_error: np.ndarray
    n: int


def odds(samples, limit) -> Odds:
    """P10/P50/P90 and P(exceed limit) with its standard error, per receptor.

    Parameters
    ----------
    samples : array_like, shape (n, N) or (n,)
        Sampled values (e.g. settlement, m) per sample and receptor.
    limit : float or array_like, shape (N,)

    Examples
    --------
    >>> o = odds(np.linspace(0.0, 0.1, 101), 0.08)
    >>> round(float(o.p50[0]), 6), round(float(o.p_exceed[0]), 4)
    (0.05, 0.198)
    """
    s = _sample_matrix(samples)
    p10, p50, p90 = np.quantile(s, [0.1, 0.5, 0.9], axis=0)
    p, se = exceedance(s, limit)
    return Odds(p10, p50, p90, p, se, s.shape[0])


def convergence(samples, limit, counts=None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """P(exceed) and its standard error from the first n samples, for growing n.

    The rows of a Latin hypercube come in random order, so the first n are a random subset
    of the strata; the binomial error applies to them as to random sampling.

    Parameters
    ----------
    samples : array_like, shape (n, N) or (n,)
    limit : float or array_like, shape (N,)
    counts : sequence of int, optional
        Sample counts; default about 20 counts spaced geometrically from 10 to n.

    Returns
    -------
    (counts (C,), p (C, N), standard_error (C, N))

    Examples
    --------
    >>> c, p, se = convergence(np.r_[np.zeros(50), np.ones(50)], 0.5, counts=[50, 100])
    >>> c.tolist(), p[:, 0].tolist()
    ([50, 100], [0.0, 0.5])
    """
    s = _sample_matrix(samples)
    n = s.shape[0]
    if counts is None:
        counts = np.unique(np.geomspace(min(10, n), n, 20).round().astype(np.int64))
    counts = np.asarray([whole_number(c, "counts", minimum=2, maximum=n) for c in counts])
    lim = np.broadcast_to(finite_array(limit, "limit"), s.shape[1:])
    hits = np.cumsum(s > lim, axis=0)[counts - 1]
    p = hits / counts[:, None]
    return counts, p, np.sqrt(p * (1.0 - p) / counts[:, None])
