"""Primary consolidation settlement below fills and its rate (Terzaghi's 1-D theory).

The compressible layers are cut into sublayers; each sublayer is represented by its
mid-depth, where the in-situ effective stress σ'0 and the stress increase Δσz are taken.
Settlement is the sum of the sublayers' 1-D (oedometric) compressions:

- index layers (Cc, Cr, e0, σ'p), Terzaghi's 1-D consolidation with the log-linear
  e–log σ' law, written as one expression that covers all three cases,
  ``s = h/(1+e0) · [Cr·log10(min(σ'1, σ'p)/σ'0) + Cc·log10(max(σ'1, σ'p)/σ'p)]``
  with σ'1 = σ'0 + Δσ and σ'p taken as at least σ'0;
- mv layers, ``s = mv·h·Δσ``; modulus layers, ``s = h·Δσ/M``.

Unloading (Δσ < 0) follows the recompression (swelling) index Cr in index layers
(σ'1 < σ'0 <= σ'p gives a negative settlement, i.e. heave) and the same mv or M in linear
layers. The equations and their sources are in docs/method-settlement.md.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from ._validate import finite, finite_array, positive
from .errors import InputError
from .soil import SoilLayer, SoilProfile

DEFAULT_MAX_SUBLAYER_M = 1.0
_GROWTH_DEPTH_M = 5.0      # sublayers reach max thickness at this depth below ground
_MIN_FRACTION = 0.1        # ... and are never thinner than this fraction of it
# Below Tv = 1/40, U = 2·sqrt(Tv/π) is exact in double precision: the first neglected term
# is of order exp(−1/Tv) (a 40-digit mpmath sum of the series differs by 1.8e-20 at 0.025).
# The series then needs about 13 terms instead of 200 (settlement-time curves with ramps
# and root searches evaluate it millions of times).
_SHORT_TIME_TV = 1.0 / 40.0
_SERIES_EXPONENT = 40.0    # series cut where exp(-M²·Tv) < exp(-40) ≈ 4e-18


# --- sublayers ------------------------------------------------------------------------
def _sublayer_thickness(z_top: float, cap: float) -> float:
    """The default rule: thin near the ground, where σ'0 changes fastest relative to itself."""
    return cap * min(max(z_top / _GROWTH_DEPTH_M, _MIN_FRACTION), 1.0)


def _split_interval(top: float, bottom: float, cap: float) -> list[float]:
    edges = [top]
    z = top
    while bottom - z > 1e-9:
        h = _sublayer_thickness(z, cap)
        if z + 1.25 * h >= bottom:      # no sliver at the bottom: stretch the last one
            h = bottom - z
        z += h
        edges.append(z)
    edges[-1] = bottom
    return edges


def sublayers(profile: SoilProfile, top_depth: float = 0.0,
              max_thickness: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Mid-depths and thicknesses (m) of the sublayers of the compressible layers.

    Only soil below `top_depth` and above the rigid base is cut; incompressible layers are
    skipped. Sublayer boundaries fall on every layer boundary. The default rule makes a
    sublayer starting at depth z (below the ground) ``max_thickness · clip(z / 5 m, 0.1, 1)``
    thick, so sublayers are 0.1 m near the ground (where σ'0 → 0 and the log law varies
    fastest) and ``max_thickness`` (default 1 m) from 5 m down; tests show halving them
    changes a typical fill settlement by well under 1 % (see `converged_settlement`).

    Parameters
    ----------
    profile : SoilProfile
        The soil layers, water table and rigid base.
    top_depth : float
        Depth (m) below which soil counts, e.g. a foundation level. Default 0.
    max_thickness : float, optional
        Largest sublayer thickness, m; every thickness scales with it.

    Returns
    -------
    z_mid : numpy.ndarray, shape (K,)
        Sublayer mid-depths, m, top down.
    thickness : numpy.ndarray, shape (K,)
        Sublayer thicknesses, m.

    Examples
    --------
    >>> from fillstress.soil import SoilLayer, SoilProfile
    >>> p = SoilProfile([SoilLayer("clay", 0, 8, 17.0, 18.0, mv_per_kpa=3e-4)], water_table_m=1)
    >>> z, h = sublayers(p, top_depth=6.0)
    >>> z.tolist(), h.tolist()
    ([6.5, 7.5], [1.0, 1.0])
    >>> float(sublayers(p)[1].sum())
    8.0
    """
    top_depth = _non_negative(top_depth, "top_depth")
    cap = DEFAULT_MAX_SUBLAYER_M if max_thickness is None else positive(max_thickness, "max_thickness")
    edges_mid, thick = [], []
    for layer in profile.layers:
        top = max(layer.top_m, top_depth)
        bottom = min(layer.bottom_m, profile.rigid_base_m)
        if not layer.compressible or bottom - top <= 1e-9:
            continue
        edges = np.array(_split_interval(top, bottom, cap))
        edges_mid.append(0.5 * (edges[:-1] + edges[1:]))
        thick.append(np.diff(edges))
    if not thick:
        return np.zeros(0), np.zeros(0)
    return np.concatenate(edges_mid), np.concatenate(thick)


def _non_negative(value, name: str) -> float:
    v = finite(value, name)
    if v < 0:
        raise InputError(f"must be a depth >= 0 m, got {value!r}", argument=name)
    return v


# --- consolidation settlement ---------------------------------------------------------
def _check_sublayer_arrays(profile, z_mid, h, dsz):
    z = np.atleast_1d(finite_array(z_mid, "z_mid"))
    hh = np.atleast_1d(finite_array(h, "h"))
    if z.ndim != 1 or hh.shape != z.shape:
        raise InputError(f"must be 1-D and match z_mid {z.shape}, got {hh.shape}", argument="h")
    if np.any(hh <= 0):
        raise InputError(f"sublayer thicknesses must be > 0, got minimum {hh.min():g}", argument="h")
    d = finite_array(dsz, "dsz")
    if d.ndim == 1:
        d = d[None, :]
    if d.ndim != 2 or d.shape[1] != z.size:
        raise InputError(f"must have shape (N points, K={z.size} sublayers), got {d.shape}",
                         argument="dsz")
    profile.layer_index(z)           # raises when a depth lies outside the profile
    return z, hh, d


def _sublayer_parameters(profile: SoilProfile, z: np.ndarray) -> dict[str, np.ndarray]:
    """Per-sublayer arrays: kind flags, indices, e0, σ'0, σ'p (>= σ'0) and linear compliances
    for loading and for unloading/reloading."""
    idx = profile.layer_index(z)
    layers = [profile.layers[i] for i in idx]
    s0 = profile.sigma_v0_eff(z)
    is_index = np.array([lay.kind == "index" for lay in layers], dtype=bool)
    cc = np.array([lay.cc if lay.kind == "index" else 0.0 for lay in layers])
    cr = np.array([lay.cr if lay.kind == "index" else 0.0 for lay in layers])
    e0 = np.array([lay.e0 if lay.kind == "index" else 0.0 for lay in layers])
    sp_given = np.array([_preconsolidation(lay, s) for lay, s in zip(layers, s0)])
    compliance = np.array([_linear_compliance(lay) for lay in layers])
    unload = np.array([1.0 / lay.unloading_modulus_kpa if lay.unloading_modulus_kpa else c
                       for lay, c in zip(layers, compliance)])
    return {"layer": idx, "is_index": is_index, "cc": cc, "cr": cr, "e0": e0, "s0": s0,
            "sp": np.maximum(sp_given, s0), "compliance": compliance, "unload": unload}


def _preconsolidation(layer: SoilLayer, s0: float) -> float:
    if layer.kind != "index":
        return 0.0
    return layer.sigma_p_kpa if layer.sigma_p_kpa is not None else layer.ocr * s0


def _linear_compliance(layer: SoilLayer) -> float:
    """Strain per kPa of a linear layer (mv or 1/M); 0 for index and incompressible layers."""
    if layer.kind == "mv":
        return layer.mv_per_kpa
    if layer.kind == "modulus":
        return 1.0 / layer.modulus_kpa
    return 0.0


@dataclass(frozen=True)
class StressPath:
    """Settlement of each sublayer along a sequence of load states (stress history).

    Attributes (shapes (N, S, K): points, states, sublayers): ``settlement`` m after each
    state; ``sigma`` the effective stress σ' = σ'0 + Δσz; ``sigma_max`` the largest effective
    stress so far, at least σ'p (σ'0 for linear layers); ``strain`` = settlement / h.
    ``s0``, ``sp`` (K,): σ'0 and σ'p at the sublayer mid-depths.
    """

    settlement: np.ndarray
    sigma: np.ndarray
    sigma_max: np.ndarray
    strain: np.ndarray
    s0: np.ndarray
    sp: np.ndarray
    is_index: np.ndarray

    def branch(self, state: int = -1) -> np.ndarray:
        """Which part of the e–log σ' path each sublayer is on after `state`, shape (N, K):
        ``"recompression (Cr)"``, ``"virgin (Cc)"``, ``"unloaded on Cr after Cc"``,
        ``"reloading (Cr)"``, ``"unloading (Cr) heave"``, or ``"linear"`` (mv/M layers)."""
        sig, smax = self.sigma[:, state], self.sigma_max[:, state]
        below_max = sig < smax * (1 - 1e-9)
        beyond_p = smax > self.sp * (1 + 1e-9)
        heave = sig < self.s0 * (1 - 1e-9)
        out = np.where(beyond_p, np.where(below_max, "unloaded on Cr after Cc", "virgin (Cc)"),
                       np.where(heave, "unloading (Cr) heave",
                                np.where(below_max, "reloading (Cr)", "recompression (Cr)")))
        return np.where(self.is_index[None, :], out, "linear")


def stress_path(profile: SoilProfile, z_mid, h, dsz_states) -> StressPath:
    """Settlement through a sequence of load states, each sublayer keeping its stress history.

    Each sublayer keeps its largest past effective stress σ'm (at least σ'p). Loading beyond
    σ'm follows the virgin line (Cc), unloading and reloading below it the recompression line
    (Cr): Terzaghi's e–log σ' model with the loading and unloading branches as in standard
    texts (e.g. Holtz & Kovacs, An Introduction to Geotechnical Engineering). The settlement
    in a state depends only on its σ' and the σ'm reached before, so with
    ``C(σ) = Cr·log10(min(σ, σ'p)/σ'0) + Cc·log10(max(σ, σ'p)/σ'p)``

        s = h/(1+e0) · [C(σ'm) − Cr·log10(σ'm/σ')]

    and for linear layers ``s = h·[mv·(σ'm − σ'0) − mv_ur·(σ'm − σ')]`` with the unloading
    compliance mv_ur = 1/M_ur (default: the loading value). A surcharge removed after full
    consolidation thus leaves the permanent-load settlement of the virgin line minus the Cr
    rebound.

    Parameters
    ----------
    profile : SoilProfile
        The soil layers, water table and rigid base.
    z_mid, h : array_like, shape (K,)
        Sublayer mid-depths and thicknesses (m).
    dsz_states : array_like, shape (N, S, K) or (S, K)
        Δσz (kPa) with the loads of each successive state in place (negative: unloading).

    Examples
    --------
    One NC sublayer, 1 m at 5 m, σ'0 = 50 kPa: load to 150, unload to 100 and reload to 200
    (hand calculation on the e–log σ' path, Cc = 0.5, Cr = 0.05, e0 = 1):

    >>> from fillstress.soil import SoilLayer, SoilProfile
    >>> p = SoilProfile([SoilLayer("c", 0, 10, 10.0, cc=0.5, cr=0.05, e0=1.0, ocr=1.0)],
    ...                 water_table_m=20)
    >>> r = stress_path(p, [5.0], [1.0], [[100.0], [50.0], [150.0]])
    >>> r.settlement[0, :, 0].round(4).tolist()   # 0.25·log 3; − 0.025·log 1.5; 0.25·log 4
    [0.1193, 0.1149, 0.1505]
    >>> r.branch(1).tolist()
    [['unloaded on Cr after Cc']]
    """
    z = np.atleast_1d(finite_array(z_mid, "z_mid"))
    d = finite_array(dsz_states, "dsz_states")
    if d.ndim == 2:
        d = d[None]
    if d.ndim != 3 or d.shape[2] != z.size:
        raise InputError(f"must have shape (N points, S states, K={z.size} sublayers), got "
                         f"{d.shape}", argument="dsz_states")
    z, hh, _ = _check_sublayer_arrays(profile, z, h, d[:, 0])
    par = _sublayer_parameters(profile, z)
    sig = par["s0"] + d
    compressible = par["is_index"] | (par["compliance"] > 0)
    bad = (sig <= 0) & compressible
    if np.any(bad):
        n, st, k = np.argwhere(bad)[0]
        raise InputError(f"unloading of {-d[n, st, k]:.4g} kPa at depth {z[k]:g} m (point {n}, "
                         f"state {st}) exceeds the effective stress {par['s0'][k]:.4g} kPa there; "
                         "the soil would be at zero effective stress (heave or removal), "
                         "outside 1-D consolidation", argument="dsz_states")
    strain, smax = _strain_on_path(par, sig)
    idx = par["is_index"]
    return StressPath(settlement=strain * hh, sigma=sig,
                      sigma_max=np.maximum(smax, np.where(idx, par["sp"], 0.0)),
                      strain=strain, s0=par["s0"], sp=np.where(idx, par["sp"], par["s0"]),
                      is_index=idx)


def _strain_on_path(par: dict, sig: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Strain of each sublayer along the states (axis -2) of effective stresses `sig`, and
    the largest effective stress so far; `par` from `_sublayer_parameters` (its arrays may
    carry leading axes that broadcast against `sig`, e.g. one row per parameter sample)."""
    smax = np.maximum.accumulate(np.maximum(sig, par["s0"]), axis=-2)
    idx = par["is_index"]
    safe = np.where(idx, sig, 1.0)
    safe_max = np.where(idx, smax, 1.0)
    sp, s0 = np.where(idx, par["sp"], 1.0), np.where(idx, par["s0"], 1.0)
    virgin = (par["cr"] * np.log10(np.minimum(safe_max, sp) / s0)
              + par["cc"] * np.log10(np.maximum(safe_max, sp) / sp))
    strain_index = (virgin - par["cr"] * np.log10(safe_max / safe)) / (1.0 + par["e0"])
    strain_linear = par["compliance"] * (smax - par["s0"]) - par["unload"] * (smax - sig)
    return np.where(idx, strain_index, strain_linear), smax


def final_settlement_of_profiles(profiles, z_mid, h, dsz_states) -> np.ndarray:
    """Settlement (m) after the last load state for each of P profiles of one layering
    (e.g. sampled soil parameters), vectorised over the profiles: shape (P, N).

    Each profile follows the stress path of :func:`stress_path`; a point where unloading
    exceeds a sublayer's σ'0 in a profile (heave, outside 1-D consolidation) is NaN there.

    Parameters
    ----------
    profiles : sequence of SoilProfile
        Same layer depths; parameters and water table may differ.
    z_mid, h : array_like, shape (K,)
    dsz_states : array_like, shape (P or 1, N, S, K)
        Δσz (kPa) of each load state, per profile or shared by all.

    Examples
    --------
    >>> from fillstress.soil import SoilLayer, SoilProfile
    >>> clay = [SoilProfile([SoilLayer("c", 0, 4, 10.0, cc=cc, cr=0.05, e0=1.5, ocr=1.0)], 10.0)
    ...         for cc in (0.5, 1.0)]
    >>> final_settlement_of_profiles(clay, [3.0], [2.0], [[[[60.0]]]]).round(4).tolist()
    [[0.1908], [0.3817]]
    """
    profiles = list(profiles)
    z = np.atleast_1d(finite_array(z_mid, "z_mid"))
    d = finite_array(dsz_states, "dsz_states")
    if not profiles or d.ndim != 4 or d.shape[0] not in (1, len(profiles)) or d.shape[3] != z.size:
        raise InputError(f"must have shape ({len(profiles)} or 1 profiles, N points, S states, "
                         f"K={z.size} sublayers), got {d.shape}", argument="dsz_states")
    z, hh, _ = _check_sublayer_arrays(profiles[0], z, h, d[0, :, 0])
    each = [_sublayer_parameters(p, z) for p in profiles]
    par = {k: np.stack([e[k] for e in each])[:, None, None, :] for k in each[0]}
    sig = par["s0"] + d
    compressible = par["is_index"] | (par["compliance"] > 0)
    heave = np.any((sig <= 0) & compressible, axis=(2, 3))                 # (P, N)
    strain, _ = _strain_on_path(par, np.where(heave[:, :, None, None], par["s0"], sig))
    out = (strain[:, :, -1, :] * hh).sum(axis=-1)
    out[heave] = np.nan
    return out


def sublayer_settlement(profile: SoilProfile, z_mid, h, dsz) -> np.ndarray:
    """Settlement (m) of each sublayer at each plan point, shape (N, K).

    Same inputs as `consolidation_settlement`; positive is downward, negative is heave.
    One load state of `stress_path`.

    Examples
    --------
    >>> from fillstress.soil import SoilLayer, SoilProfile
    >>> p = SoilProfile([SoilLayer("silt", 0, 4, 19.0, mv_per_kpa=2e-4)], water_table_m=10)
    >>> sublayer_settlement(p, [1.0, 3.0], [2.0, 2.0], [[50.0, 30.0]]).tolist()
    [[0.02, 0.012]]
    """
    z, hh, d = _check_sublayer_arrays(profile, z_mid, h, dsz)
    try:
        return stress_path(profile, z, hh, d[:, None, :]).settlement[:, 0]
    except InputError as err:
        raise InputError(str(err.reason).replace(", state 0", ""), argument="dsz") from None


def consolidation_settlement(profile: SoilProfile, z_mid, h, dsz) -> np.ndarray:
    """Primary consolidation settlement (m) at N plan points, Terzaghi 1-D theory.

    Parameters
    ----------
    profile : SoilProfile
        The soil layers, water table and rigid base.
    z_mid, h : array_like, shape (K,)
        Sublayer mid-depths and thicknesses (m), e.g. from `sublayers`.
    dsz : array_like, shape (N, K)
        Vertical stress increase Δσz (kPa) at each point and sublayer mid-depth; negative
        for unloading (follows Cr, or the same mv/M, as heave).

    Returns
    -------
    ndarray, shape (N,)
        Settlement in m, positive downward.

    Examples
    --------
    Normally consolidated clay, 2 m sublayer at 3 m, σ'0 = 30 kPa, Δσ = 60 kPa:
    s = 0.5·2/(1+1.5)·log10(90/30) = 0.1908… m.

    >>> from fillstress.soil import SoilLayer, SoilProfile
    >>> clay = SoilLayer("clay", 0, 4, 10.0, cc=0.5, cr=0.05, e0=1.5, ocr=1.0)
    >>> p = SoilProfile([clay], water_table_m=10.0)
    >>> consolidation_settlement(p, [3.0], [2.0], [[60.0]]).round(4).tolist()
    [0.1908]
    """
    return sublayer_settlement(profile, z_mid, h, dsz).sum(axis=1)


def settlement_by_layer(profile: SoilProfile, z_mid, h, dsz) -> np.ndarray:
    """Settlement (m) of each profile layer at each point, shape (N, len(profile.layers)).

    Columns follow ``profile.layers``; layers without sublayers have zeros. Rows sum to
    `consolidation_settlement`.

    Parameters
    ----------
    profile : SoilProfile
        The soil layers, water table and rigid base.
    z_mid, h : array_like, shape (K,)
        Sublayer mid-depths and thicknesses (m), e.g. from `sublayers`.
    dsz : array_like, shape (N, K)
        Δσz (kPa) at each point and sublayer mid-depth.

    Returns
    -------
    numpy.ndarray, shape (N, len(profile.layers))
        Settlement of each layer at each point, m, positive downward.

    Examples
    --------
    >>> from fillstress.soil import SoilLayer, SoilProfile
    >>> p = SoilProfile([SoilLayer("a", 0, 2, 19.0, modulus_kpa=1e4),
    ...                  SoilLayer("b", 2, 4, 19.0, modulus_kpa=5e3)], water_table_m=10)
    >>> settlement_by_layer(p, [1.0, 3.0], [2.0, 2.0], [[50.0, 50.0]]).tolist()
    [[0.01, 0.02]]
    """
    per_sublayer = sublayer_settlement(profile, z_mid, h, dsz)
    idx = profile.layer_index(z_mid)
    one_hot = np.zeros((idx.size, len(profile.layers)))
    one_hot[np.arange(idx.size), idx] = 1.0
    return per_sublayer @ one_hot


@dataclass(frozen=True)
class ConvergedSettlement:
    """Settlement after halving sublayers until the change is below the tolerance.

    Attributes: ``settlement`` (N,) m; ``z_mid``, ``thickness`` (K,) of the final sublayers;
    ``max_thickness_m`` of the final rule; ``relative_change`` of the last halving (max
    |Δs| over points / max |s|); ``halvings`` done; ``converged`` whether
    ``relative_change < tolerance``.
    """

    settlement: np.ndarray
    z_mid: np.ndarray
    thickness: np.ndarray
    max_thickness_m: float
    relative_change: float
    halvings: int
    converged: bool


def converged_settlement(profile: SoilProfile, dsz_at: Callable[[np.ndarray], np.ndarray],
                         top_depth: float = 0.0, max_thickness: float | None = None,
                         tolerance: float = 0.01, max_halvings: int = 6) -> ConvergedSettlement:
    """Consolidation settlement with sublayers halved until it changes by < `tolerance`.

    Parameters
    ----------
    profile : SoilProfile
        The soil layers, water table and rigid base.
    dsz_at : callable
        ``dsz_at(z_mid)`` returns Δσz (kPa), shape (N, K), at the sublayer mid-depths.
    top_depth, max_thickness : float
        As for `sublayers`; `max_thickness` is the starting rule.
    tolerance : float
        Relative change (max over points of |Δs| / max |s|) accepted, default 1 %.
    max_halvings : int
        Give up (``converged=False``) after this many halvings.

    Returns
    -------
    ConvergedSettlement
        The settlement (m) at the points with the final sublayers, the last relative
        change and whether it met `tolerance`.

    Examples
    --------
    >>> from fillstress.soil import SoilLayer, SoilProfile
    >>> p = SoilProfile([SoilLayer("clay", 0, 6, 17.0, 18.0, cc=0.3, cr=0.04, e0=0.9,
    ...                            ocr=1.0)], water_table_m=1.0)
    >>> r = converged_settlement(p, lambda z: np.full((1, z.size), 80.0))
    >>> r.converged, r.halvings >= 1
    (True, True)
    """
    tolerance = positive(tolerance, "tolerance")
    cap = DEFAULT_MAX_SUBLAYER_M if max_thickness is None else positive(max_thickness, "max_thickness")
    if int(max_halvings) < 1:
        raise InputError(f"must be >= 1, got {max_halvings!r}", argument="max_halvings")

    def run(thickness_cap):
        z, h = sublayers(profile, top_depth, thickness_cap)
        if z.size == 0:
            return z, h, np.zeros(0)
        return z, h, consolidation_settlement(profile, z, h, dsz_at(z))

    z, h, s = run(cap)
    change = float("inf")
    for halving in range(1, int(max_halvings) + 1):
        cap /= 2.0
        z, h, s_new = run(cap)
        scale = float(np.max(np.abs(s_new))) if s_new.size else 0.0
        change = 0.0 if scale == 0.0 else float(np.max(np.abs(s_new - s))) / scale
        s = s_new
        if change < tolerance:
            return ConvergedSettlement(s, z, h, cap, change, halving, True)
    return ConvergedSettlement(s, z, h, cap, change, int(max_halvings), False)


# --- time rate ------------------------------------------------------------------------
def _series_average_degree(tv: np.ndarray) -> np.ndarray:
    """U = 1 − Σ 2/M² exp(−M² Tv), M = π(2m+1)/2, cut where every later term < e^-40."""
    m_needed = math.sqrt(_SERIES_EXPONENT / float(tv.min())) * 2.0 / math.pi
    n_terms = int(math.ceil(0.5 * (m_needed - 1.0))) + 2
    remaining = np.zeros_like(tv)
    for m in range(n_terms):
        big_m = math.pi * (2 * m + 1) / 2.0
        remaining += 2.0 / big_m**2 * np.exp(-big_m**2 * tv)
    return 1.0 - remaining


def degree_of_consolidation(tv):
    """Average degree of consolidation U (0…1) for time factor Tv, Terzaghi 1-D theory.

    Uniform initial excess pore pressure, drained boundary (or boundaries), average over the
    layer. Series ``U = 1 − Σ 2/M² exp(−M² Tv)``, ``M = π(2m+1)/2``, summed until the next
    term is below e⁻⁴⁰; for Tv < 1/40 the short-time form ``U = 2·sqrt(Tv/π)`` is used, whose
    error there is of order exp(−1/Tv), far below double precision.

    Parameters
    ----------
    tv : float or array_like
        Time factor Tv = cv·t / H_dr², >= 0.

    Returns
    -------
    float or numpy.ndarray
        U, the shape of `tv` (a float for a scalar).

    Examples
    --------
    >>> round(degree_of_consolidation(0.197), 3)
    0.5
    >>> degree_of_consolidation([0.0, 0.848]).round(3).tolist()
    [0.0, 0.9]
    """
    arr = finite_array(tv, "tv")
    if np.any(arr < 0):
        raise InputError(f"time factor must be >= 0, got minimum {arr.min():g}", argument="tv")
    flat = arr.ravel()
    out = 2.0 * np.sqrt(flat / math.pi)
    series = flat >= _SHORT_TIME_TV
    if np.any(series):
        out[series] = _series_average_degree(flat[series])
    out = out.reshape(arr.shape)
    return float(out) if out.ndim == 0 else out


def time_factor(u):
    """Time factor Tv that gives average degree of consolidation `u` (inverse, brentq).

    Parameters
    ----------
    u : float or array_like
        Average degree of consolidation, 0 <= u < 1.

    Returns
    -------
    float or numpy.ndarray
        Tv, the shape of `u` (a float for a scalar).

    Examples
    --------
    >>> round(time_factor(0.5), 4), round(time_factor(0.9), 3)
    (0.1967, 0.848)
    """
    arr = finite_array(u, "u")
    if np.any((arr < 0) | (arr >= 1)):
        raise InputError("degree of consolidation must satisfy 0 <= u < 1 (U = 1 needs "
                         f"infinite time); got {arr.min():g} … {arr.max():g}", argument="u")
    out = np.array([_invert_degree(float(v)) for v in arr.ravel()]).reshape(arr.shape)
    return float(out) if out.ndim == 0 else out


def _invert_degree(u: float) -> float:
    if u == 0.0:
        return 0.0
    hi = 1.0
    while degree_of_consolidation(hi) < u:
        hi *= 2.0
    from scipy.optimize import brentq   # loaded when solved: reading a site stays quick
    return brentq(lambda t: degree_of_consolidation(t) - u, 0.0, hi, xtol=1e-15, rtol=1e-13)


def time_to_degree(u, cv, drainage_path_m):
    """Time (years) to reach average degree of consolidation `u`: t = Tv·H_dr²/cv.

    Parameters
    ----------
    u : float or array_like
        Degree of consolidation, 0 <= u < 1.
    cv : float
        Coefficient of consolidation, m²/year.
    drainage_path_m : float
        Longest drainage path H_dr, m (see `drainage_path`).

    Returns
    -------
    float or numpy.ndarray
        Time in years, the shape of `u`.

    Examples
    --------
    >>> round(time_to_degree(0.9, cv=2.0, drainage_path_m=3.0), 3)   # 0.848·9/2
    3.816
    """
    cv = positive(cv, "cv")
    h_dr = positive(drainage_path_m, "drainage_path_m")
    return time_factor(u) * h_dr**2 / cv


def drainage_path(layer: SoilLayer, base_m: float | None = None) -> float:
    """Longest drainage path H_dr (m): half the thickness for double drainage, all of it
    for single drainage. `base_m` (a rigid base inside the layer) shortens the layer.

    Examples
    --------
    >>> clay = SoilLayer("clay", 2, 8, 17, 18, mv_per_kpa=3e-4, drainage="double")
    >>> drainage_path(clay), drainage_path(clay, base_m=6.0)
    (3.0, 2.0)
    """
    if not isinstance(layer, SoilLayer):
        raise InputError(f"must be a SoilLayer, got {type(layer).__name__}", argument="layer")
    bottom = layer.bottom_m if base_m is None else min(layer.bottom_m, positive(base_m, "base_m"))
    thickness = bottom - layer.top_m
    if thickness <= 0:
        raise InputError(f"base {base_m:g} m is above the top of layer {layer.name!r}", argument="base_m")
    return 0.5 * thickness if layer.double_drained else thickness


def time_parameters(profile: SoilProfile, no_cv: str = "error") -> tuple[np.ndarray, np.ndarray]:
    """cv (m²/year) and H_dr (m) of every profile layer, in ``profile.layers`` order.

    Incompressible layers, and layers wholly below the rigid base, get cv = inf (settle at
    once; their settlement is zero anyway). A compressible layer without cv raises, unless
    ``no_cv="immediate"``, which treats it as draining at once (free-draining sand, say).

    Examples
    --------
    >>> p = SoilProfile([SoilLayer("sand", 0, 2, 18, modulus_kpa=3e4),
    ...                  SoilLayer("clay", 2, 8, 17, 18, mv_per_kpa=3e-4, cv_m2_per_yr=1.5)],
    ...                 water_table_m=1)
    >>> cv, h = time_parameters(p, no_cv="immediate")
    >>> cv.tolist(), h.tolist()
    ([inf, 1.5], [1.0, 3.0])
    """
    if no_cv not in ("error", "immediate"):
        raise InputError(f"must be 'error' or 'immediate', got {no_cv!r}", argument="no_cv")
    cv, h_dr = [], []
    for layer in profile.layers:
        above_base = layer.top_m < profile.rigid_base_m
        base = profile.rigid_base_m if above_base else None
        h_dr.append(drainage_path(layer, base) if above_base else 0.5 * layer.thickness_m)
        if layer.cv_m2_per_yr is not None:
            cv.append(layer.cv_m2_per_yr)
        elif not layer.compressible or not above_base or no_cv == "immediate":
            cv.append(math.inf)
        else:
            raise InputError("missing: the time rate needs cv (m²/year) for every compressible "
                             "layer", key=f"layers.{layer.name}.cv_m2_per_yr")
    return np.array(cv), np.array(h_dr)


def stage_increments(final_after_stage) -> np.ndarray:
    """Settlement increment of each stage from the final settlement after each stage.

    `final_after_stage` has the stage axis second to last, shape (..., S, L): the final
    consolidation settlement with the loads of stages 1…s in place. The increments are its
    differences along the stage axis (the first stage's increment is its own total).

    Examples
    --------
    >>> stage_increments([[0.10], [0.16], [0.19]]).round(2).tolist()
    [[0.1], [0.06], [0.03]]
    """
    arr = finite_array(final_after_stage, "final_after_stage")
    if arr.ndim < 2:
        raise InputError(f"must have shape (..., stages, layers), got {arr.shape}",
                         argument="final_after_stage")
    return np.diff(arr, axis=-2, prepend=0.0)


_RAMP_NODES, _RAMP_WEIGHTS = np.polynomial.legendre.leggauss(48)


def _instant_degree(t: np.ndarray, vertical_rate: np.ndarray, radial_rate: np.ndarray) -> np.ndarray:
    """U after an instant load at t = 0, vertical (Terzaghi) and radial (drains) flow
    combined by Carrillo (1942): 1 − U = (1 − Uv)·exp(−λ·t). Rates broadcast against t."""
    t = np.maximum(t, 0.0)
    with np.errstate(invalid="ignore"):
        tv = vertical_rate * t
    tv = np.where(t > 0, tv, 0.0)                                   # inf·0 → not started
    finite_tv = np.where(np.isinf(tv), 0.0, tv)
    uv = np.where(np.isinf(tv), 1.0, degree_of_consolidation(finite_tv))
    return 1.0 - (1.0 - uv) * np.exp(-radial_rate * t)


def ramp_degree(t, duration, vertical_rate, radial_rate=0.0) -> np.ndarray:
    """Average degree of consolidation under a load rising linearly from 0 at t = 0 to its
    full value at t = `duration`, relative to the full load's final settlement.

    Superposition of instant increments (Duhamel's integral, exact for linear consolidation;
    for Terzaghi's equation it is Olson's (1977) ramp-loading solution):
    ``U(t) = (1/tc)·∫ U_inst(t − τ) dτ over 0 <= τ <= min(t, tc)``, integrated by
    Gauss–Legendre quadrature in w = sqrt(t − τ), which removes the √t start of U_inst.

    Parameters
    ----------
    t : array_like
        Time since the start of loading, years.
    duration : float
        Build (ramp) duration tc, years; 0 is an instant load.
    vertical_rate : array_like
        cv/H_dr² (1/year; inf = drains at once), broadcast against `t`.
    radial_rate : array_like
        8·ch/(de²·μ) of vertical drains (1/year; 0 = none), see `fillstress.drains`.

    Examples
    --------
    Olson (1977): at the end of construction, Tc = 1, U = 1 − (2/Tc)·Σ (1/M⁴)(1 − e^(−M²Tc)):

    >>> round(float(ramp_degree(1.0, 1.0, 1.0)), 4)
    0.6945
    >>> float(ramp_degree(0.5, 0.0, 1.0)) == degree_of_consolidation(0.5)
    True
    """
    t = finite_array(t, "t")
    tc = finite(duration, "duration")
    if tc < 0:
        raise InputError(f"must be >= 0 years, got {duration!r}", argument="duration")
    vr = np.asarray(vertical_rate, dtype=float)
    hr = np.asarray(radial_rate, dtype=float)
    if tc == 0.0:
        return _instant_degree(t, vr, hr)
    t = np.maximum(t, 0.0)
    lo = np.sqrt(np.maximum(t - tc, 0.0))[..., None]
    hi = np.sqrt(t)[..., None]
    w = 0.5 * (hi + lo) + 0.5 * (hi - lo) * _RAMP_NODES            # (..., nodes)
    u = _instant_degree(w**2, vr[..., None], hr[..., None])
    integral = 0.5 * (hi - lo)[..., 0] * np.sum(_RAMP_WEIGHTS * u * 2.0 * w, axis=-1)
    return integral / tc


def settlement_time_curve(stage_settlements, stage_times, times, cv, drainage_path_m, *,
                          durations=None, radial_rate=None) -> np.ndarray:
    """Consolidation settlement (m) versus time for loads placed (or removed) in stages.

    Each stage's settlement increment consolidates from that stage's start time, the load
    rising linearly over its build duration (`ramp_degree`; instant when 0), with the
    average degree of consolidation of its layer (or sublayer), and the increments add:
    ``s(t) = Σ_stages Σ_layers Δs_sl · U_l(t − t_s)``. Approximations: superposition is exact
    for a linear soil with constant cv and an approximation for the e–log σ' law (the
    increments come from the nonlinear settlements along the stress path, see
    `stage_increments`); unloading (rebound) increments swell at the same rate; U assumes a
    uniform initial excess pore pressure over each layer.

    Parameters
    ----------
    stage_settlements : array_like, shape (..., S, L) or (S,)
        Final settlement increment (m) of each stage in each layer; (S,) is one layer.
    stage_times : array_like, shape (S,)
        Time (years) each stage starts, non-decreasing.
    times : array_like, shape (T,)
        Times (years) at which to report settlement.
    cv, drainage_path_m : array_like, shape (L,) or scalar
        Coefficient of consolidation (m²/year; inf = immediate) and drainage path (m).
    durations : array_like, shape (S,), optional
        Build duration of each stage, years (default 0: placed instantly).
    radial_rate : array_like, shape (L,), optional
        Radial consolidation rate 8·ch/(de²·μ) (1/year) of vertical drains, combined by
        Carrillo (1942); 0 where no drains reach.

    Returns
    -------
    numpy.ndarray, shape (..., T)
        Settlement (m) at each of `times`, summed over stages and layers.

    Examples
    --------
    One layer, 0.2 m from a stage at t = 0 and 0.1 m more from a stage at t = 1 year,
    Tv = t for cv = 1 m²/yr and H_dr = 1 m:

    >>> s = settlement_time_curve([0.2, 0.1], [0.0, 1.0], [0.0, 0.848, 1.848], 1.0, 1.0)
    >>> s.round(3).tolist()      # 0.2·U(1.848) + 0.1·U(0.848) = 0.2·0.9915 + 0.09
    [0.0, 0.18, 0.288]
    """
    inc = finite_array(stage_settlements, "stage_settlements")
    if inc.ndim == 1:
        inc = inc[:, None]
    if inc.ndim < 2:
        raise InputError(f"must have shape (..., stages, layers), got {inc.shape}", argument="stage_settlements")
    n_stage, n_layer = inc.shape[-2:]
    t_stage = np.atleast_1d(finite_array(stage_times, "stage_times"))
    if t_stage.shape != (n_stage,):
        raise InputError(f"must have one time per stage ({n_stage}), got shape {t_stage.shape}",
                         argument="stage_times")
    if np.any(np.diff(t_stage) < 0):
        raise InputError("stage start times must be non-decreasing", argument="stage_times")
    build = np.zeros(n_stage) if durations is None else np.atleast_1d(finite_array(durations, "durations"))
    if build.shape != (n_stage,) or np.any(build < 0):
        raise InputError(f"must be one duration >= 0 per stage ({n_stage}), got {build.tolist()}",
                         argument="durations")
    t = np.atleast_1d(finite_array(times, "times"))
    if t.ndim != 1:
        raise InputError(f"must be 1-D, got shape {t.shape}", argument="times")
    cv_arr = _per_layer(cv, "cv", n_layer, allow_inf=True)
    h_arr = _per_layer(drainage_path_m, "drainage_path_m", n_layer, allow_inf=False)
    radial = np.zeros(n_layer) if radial_rate is None else np.broadcast_to(
        finite_array(radial_rate, "radial_rate"), (n_layer,))
    if np.any(radial < 0):
        raise InputError("radial consolidation rates must be >= 0", argument="radial_rate")
    vertical = (cv_arr / h_arr**2)[:, None]
    u = np.stack([ramp_degree(t[None, :] - ts, d, vertical, radial[:, None])
                  for ts, d in zip(t_stage, build)])                    # (S, L, T)
    return np.einsum("...sl,slt->...t", inc, u)


def time_to_fraction(curve: Callable[[np.ndarray], np.ndarray], fraction: float,
                     final: float, t_max: float) -> float:
    """Earliest time (years) at which ``curve(t)`` reaches `fraction` × `final` (brentq).

    `curve` maps an array of times to settlements; NaN when it does not get there by
    `t_max`. Used for t50, t90, t95 and the earliest surcharge removal day.

    Examples
    --------
    >>> f = lambda t: 0.3 * (1 - np.exp(-np.asarray(t)))
    >>> round(time_to_fraction(f, 0.5, 0.3, 50.0), 4)         # ln 2
    0.6931
    """
    return times_to_fractions(curve, [fraction], final, t_max)[0]


def times_to_fractions(curve: Callable[[np.ndarray], np.ndarray], fractions, final: float,
                       t_max: float) -> list[float]:
    """:func:`time_to_fraction` of each of `fractions`, the curve bracketed on one grid of
    times for all of them.

    Examples
    --------
    >>> f = lambda t: 0.3 * (1 - np.exp(-np.asarray(t)))
    >>> [round(v, 4) for v in times_to_fractions(f, [0.5, 0.9], 0.3, 50.0)]   # ln 2, ln 10
    [0.6931, 2.3026]
    """
    grid = np.concatenate([[0.0], np.geomspace(1e-6 * t_max, t_max, 400)])
    values = np.asarray(curve(grid), dtype=float)
    return [_first_reached(curve, grid, values, float(f) * float(final), final, t_max)
            for f in fractions]


def _first_reached(curve, grid, values, target: float, final: float, t_max: float) -> float:
    reached = np.nonzero(values - target >= 0)[0]
    if final == 0 or reached.size == 0:
        return math.nan
    k = int(reached[0])
    if k == 0:
        return 0.0
    from scipy.optimize import brentq
    return brentq(lambda x: float(np.asarray(curve(np.array([x])))[0]) - target,
                  grid[k - 1], grid[k], xtol=1e-9 * t_max)


# --- secondary compression ------------------------------------------------------------
def secondary_strain_index(layer: SoilLayer, primary_strain) -> np.ndarray:
    """Cα/(1+e_p): strain per log cycle of time after primary consolidation.

    e_p = e0 − (1+e0)·ε_primary is the void ratio at the end of primary consolidation; a
    layer given ``c_alpha_eps`` uses it as stated (already divided by 1+e0).

    Examples
    --------
    >>> clay = SoilLayer("c", 0, 5, 16, cc=0.6, cr=0.06, e0=1.5, ocr=1, c_alpha=0.03)
    >>> round(float(secondary_strain_index(clay, 0.1)), 5)     # e_p = 1.25: 0.03/2.25
    0.01333
    """
    eps = np.asarray(finite_array(primary_strain, "primary_strain"))
    if layer.c_alpha_eps is not None:
        return np.full(eps.shape, layer.c_alpha_eps)
    if layer.c_alpha is None:
        return np.zeros(eps.shape)
    e_p = layer.e0 - (1.0 + layer.e0) * eps
    if np.any(e_p <= 0):
        raise InputError(f"primary strain {eps.max():.3g} leaves no void ratio (e0 = "
                         f"{layer.e0:g}) in layer {layer.name!r}", argument="primary_strain")
    return layer.c_alpha / (1.0 + e_p)


def secondary_compression(strain_index, thickness, t, tp) -> np.ndarray:
    """Secondary compression S = Cα/(1+e_p) · H · log10(t/tp) for t > tp, else 0.

    Parameters: `strain_index` Cα/(1+e_p); `thickness` H (m); `t` time and `tp` end of
    primary consolidation, both measured from the start of loading, same unit.

    Examples
    --------
    >>> round(float(secondary_compression(0.01, 4.0, 20.0, 2.0)), 3)     # 0.01·4·log10(10)
    0.04
    >>> float(secondary_compression(0.01, 4.0, 1.0, 2.0))
    0.0
    """
    ca = finite_array(strain_index, "strain_index")
    h = finite_array(thickness, "thickness")
    tt = finite_array(t, "t")
    t_p = finite_array(tp, "tp")
    if np.any(t_p <= 0):
        raise InputError("the end of primary consolidation tp must be > 0", argument="tp")
    return ca * h * np.log10(np.maximum(tt, t_p) / t_p)


def _per_layer(value, name: str, n_layer: int, *, allow_inf: bool) -> np.ndarray:
    try:
        arr = np.atleast_1d(np.asarray(value, dtype=float))
    except (TypeError, ValueError):
        raise InputError(f"must be numeric, got {value!r}", argument=name) from None
    if arr.size == 1:
        arr = np.full(n_layer, arr[0])
    if arr.shape != (n_layer,):
        raise InputError(f"must be a scalar or one value per layer ({n_layer}), got shape "
                         f"{arr.shape}", argument=name)
    ok = (arr > 0) & (np.isfinite(arr) | (allow_inf & np.isposinf(arr)))
    if not np.all(ok):
        raise InputError(f"must be positive{' (inf allowed)' if allow_inf else ' and finite'}, "
                         f"got {arr.tolist()}", argument=name)
    return arr


# --- depth of influence ---------------------------------------------------------------
def influence_depth(z, dsz, sigma_v0_eff, fraction: float = 0.1):
    """Depth where Δσz falls to `fraction` × σ'v0 (common-practice 10 % rule).

    The deepest downward crossing of ``Δσz − fraction·σ'v0`` through zero, linearly
    interpolated between samples. NaN where Δσz is still above the fraction at the deepest
    sample (the zone of significant stress runs below the samples) or never reaches it.

    Parameters
    ----------
    z : array_like, shape (K,)
        Increasing sample depths, m.
    dsz : array_like, shape (K,) or (N, K)
        Stress increase, kPa.
    sigma_v0_eff : array_like, shape (K,)
        In-situ effective vertical stress at `z`, kPa.
    fraction : float
        Default 0.1.

    Returns
    -------
    float or numpy.ndarray, shape (N,)
        Influence depth, m (a float for 1-D `dsz`); NaN where not reached.

    Examples
    --------
    >>> influence_depth([0.0, 10.0, 20.0], [100.0, 20.0, 5.0], [0.0, 100.0, 200.0])
    14.0
    """
    zz = np.atleast_1d(finite_array(z, "z"))
    if zz.ndim != 1 or zz.size < 2 or np.any(np.diff(zz) <= 0):
        raise InputError("must be at least two strictly increasing depths", argument="z")
    s0 = np.atleast_1d(finite_array(sigma_v0_eff, "sigma_v0_eff"))
    if s0.shape != zz.shape:
        raise InputError(f"must match z {zz.shape}, got {s0.shape}", argument="sigma_v0_eff")
    d = finite_array(dsz, "dsz")
    single = d.ndim == 1
    d = np.atleast_2d(d)
    if d.ndim != 2 or d.shape[1] != zz.size:
        raise InputError(f"must have shape (K={zz.size},) or (N, K), got {d.shape}", argument="dsz")
    frac = positive(fraction, "fraction")
    excess = d - frac * s0[None, :]
    above = excess >= 0
    last = zz.size - 1 - np.argmax(above[:, ::-1], axis=1)       # deepest sample at/above
    found = above.any(axis=1) & (last < zz.size - 1)
    k = np.where(found, last, 0)
    rows = np.arange(d.shape[0])
    e_a, e_b = excess[rows, k], excess[rows, np.minimum(k + 1, zz.size - 1)]
    with np.errstate(invalid="ignore", divide="ignore"):
        depth = zz[k] + e_a / (e_a - e_b) * (zz[np.minimum(k + 1, zz.size - 1)] - zz[k])
    depth = np.where(found, depth, np.nan)
    return float(depth[0]) if single else depth
