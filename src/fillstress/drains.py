"""Vertical drains: radial consolidation to a drain in a cylinder of soil (unit cell).

A drain of equivalent diameter dw drains a soil cylinder of diameter de (the equivalent
influence diameter of the pattern). With n = de/dw, smear ratio s = ds/dw and permeability
ratio kh/ks in the smear zone, the average degree of radial consolidation under equal
vertical strain is (Hansbo 1981)

    Uh = 1 − exp(−8·Th/μ),   Th = ch·t/de²,

    μ = n²/(n²−1)·[ln(n/s) + (kh/ks)·ln s − 3/4] + s²/(n²−1)·(1 − s²/(4n²))
        + (kh/ks)/(n²−1)·[(s⁴−1)/(4n²) − s² + 1]  +  μ_w,

which with no smear (s = 1) is exactly Barron's (1948) equal-strain
``F(n) = n²/(n²−1)·ln n − (3n²−1)/(4n²)``. Well resistance adds (Hansbo 1981)
``μ_w = π·z(2l − z)·kh/qw``, taken here at its average over the drain length l,
``π·(2/3)·l²·kh/qw`` (common practice for a drain discharging at the top). Vertical and
radial flow combine by Carrillo (1942): 1 − U = (1 − Uv)(1 − Uh).

Influence diameter: de = 1.05·spacing for a triangular pattern and 1.128·spacing for a
square one (equal area, Barron 1948). Band (prefabricated) drains: dw = 2(a + b)/π, the
equal-perimeter circle of Hansbo (1979), for width a and thickness b.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._validate import finite, positive
from .errors import InputError

PATTERN_FACTORS = {"triangular": 1.05, "square": 1.128}   # de / spacing (Barron 1948)


def influence_diameter(spacing_m: float, pattern: str) -> float:
    """Equivalent diameter de (m) of the soil cylinder drained by one drain.

    Examples
    --------
    >>> influence_diameter(1.5, "triangular"), round(influence_diameter(1.5, "square"), 3)
    (1.575, 1.692)
    """
    if pattern not in PATTERN_FACTORS:
        raise InputError(f"must be one of {', '.join(PATTERN_FACTORS)}, got {pattern!r}",
                         argument="pattern")
    return PATTERN_FACTORS[pattern] * positive(spacing_m, "spacing_m")


def band_drain_diameter(width_m: float, thickness_m: float) -> float:
    """Equivalent diameter dw = 2(a + b)/π of a band drain, Hansbo (1979).

    Examples
    --------
    >>> round(band_drain_diameter(0.100, 0.004), 4)
    0.0662
    """
    a, b = positive(width_m, "width_m"), positive(thickness_m, "thickness_m")
    if b > a:
        raise InputError(f"thickness {b:g} m exceeds width {a:g} m", argument="thickness_m")
    return 2.0 * (a + b) / math.pi


def barron_f(n):
    """Barron's (1948) equal-strain drain factor F(n) = n²/(n²−1)·ln n − (3n²−1)/(4n²).

    Examples
    --------
    >>> round(barron_f(20.0), 4)
    2.2539
    """
    n = np.asarray(n, dtype=float)
    if np.any(n <= 1):
        raise InputError("n = de/dw must exceed 1", argument="n")
    out = n**2 / (n**2 - 1) * np.log(n) - (3 * n**2 - 1) / (4 * n**2)
    return float(out) if out.ndim == 0 else out


def hansbo_mu(n, smear_ratio: float = 1.0, k_ratio: float = 1.0, well: float = 0.0):
    """Hansbo's (1981) drain factor μ with smear (s = ds/dw, kh/ks) and well resistance.

    `well` is the well-resistance term μ_w (see `well_resistance`). With s = 1 (or
    kh/ks = 1 and s = 1) and no well resistance it equals `barron_f` exactly.

    Examples
    --------
    >>> round(hansbo_mu(20.0), 4) == round(barron_f(20.0), 4)
    True
    >>> round(hansbo_mu(20.0, smear_ratio=2.0, k_ratio=3.0), 3)   # simplified form: 3.632
    3.629
    """
    n = np.asarray(n, dtype=float)
    s = float(smear_ratio)
    k = float(k_ratio)
    if s < 1 or np.any(n <= s):
        raise InputError(f"need 1 <= s = ds/dw < n = de/dw, got s = {s:g}, n = {n}",
                         argument="smear_ratio")
    if k < 1:
        raise InputError(f"kh/ks must be >= 1 (the smear zone is less permeable), got {k:g}",
                         argument="k_ratio")
    n2 = n**2
    out = (n2 / (n2 - 1) * (np.log(n / s) + k * math.log(s) - 0.75)
           + s**2 / (n2 - 1) * (1 - s**2 / (4 * n2))
           + k / (n2 - 1) * ((s**4 - 1) / (4 * n2) - s**2 + 1) + float(well))
    return float(out) if out.ndim == 0 else out


def well_resistance(length_m: float, kh_over_qw: float) -> float:
    """Depth-averaged well-resistance term μ_w = π·(2/3)·l²·kh/qw (Hansbo 1981).

    `length_m` is the drain length l discharging at its top (half the length when it
    discharges at both ends); `kh_over_qw` the horizontal permeability of the soil over the
    drain's discharge capacity (1/m², e.g. (m/yr)/(m³/yr)).

    Examples
    --------
    >>> round(well_resistance(10.0, 1e-4), 4)         # π·(2/3)·100·1e-4
    0.0209
    """
    l = positive(length_m, "length_m")
    r = finite(kh_over_qw, "kh_over_qw")
    if r < 0:
        raise InputError(f"must be >= 0, got {r:g}", argument="kh_over_qw")
    return math.pi * 2.0 / 3.0 * l**2 * r


def radial_degree(th, mu):
    """Uh = 1 − exp(−8·Th/μ), Th = ch·t/de² (Barron 1948; Hansbo 1981).

    Examples
    --------
    >>> round(radial_degree(0.2, barron_f(20.0)), 4)
    0.5083
    """
    th = np.asarray(th, dtype=float)
    out = 1.0 - np.exp(-8.0 * np.maximum(th, 0.0) / mu)
    return float(out) if out.ndim == 0 else out


def combined_degree(uv, uh):
    """Carrillo (1942): U = 1 − (1 − Uv)(1 − Uh).

    >>> combined_degree(0.2, 0.5)
    0.6
    """
    out = 1.0 - (1.0 - np.asarray(uv, dtype=float)) * (1.0 - np.asarray(uh, dtype=float))
    return float(out) if out.ndim == 0 else out


@dataclass(frozen=True)
class VerticalDrains:
    """A pattern of vertical drains (SI units: m, years).

    Parameters
    ----------
    spacing_m : float
        Centre-to-centre spacing.
    pattern : str
        ``"triangular"`` or ``"square"``.
    diameter_m : float, optional
        Drain (or sand drain) diameter dw; or give `width_m` and `thickness_m` of a band
        drain (dw by Hansbo 1979).
    depth_m : float
        Depth of penetration below ground; drains act above it only.
    smear_diameter_m : float, optional
        Diameter ds of the smear zone (default: no smear, ds = dw).
    k_ratio : float
        kh/ks, horizontal permeability of the undisturbed soil over that of the smear zone.
    kh_over_qw : float
        Soil kh over drain discharge capacity qw (1/m²) for well resistance; 0 = none.

    Examples
    --------
    >>> d = VerticalDrains(1.2, "triangular", width_m=0.1, thickness_m=0.004, depth_m=12)
    >>> round(d.de, 3), round(d.n, 2), round(d.mu, 3)
    (1.26, 19.03, 2.205)
    >>> round(float(d.radial_rate(2.0)), 3)              # 8·ch/(de²·μ), 1/year
    4.571
    """

    spacing_m: float
    pattern: str = "triangular"
    diameter_m: float | None = None
    width_m: float | None = None
    thickness_m: float | None = None
    depth_m: float = math.inf
    smear_diameter_m: float | None = None
    k_ratio: float = 1.0
    kh_over_qw: float = 0.0

    def __post_init__(self):
        influence_diameter(self.spacing_m, self.pattern)
        if (self.diameter_m is None) == (self.width_m is None and self.thickness_m is None):
            raise InputError("give the drain diameter, or the width and thickness of a band "
                             "drain (one of them)", argument="diameter_m")
        if self.diameter_m is None and (self.width_m is None or self.thickness_m is None):
            raise InputError("a band drain needs both width and thickness", argument="width_m")
        if not (self.depth_m > 0):
            raise InputError(f"must be > 0, got {self.depth_m!r}", argument="depth_m")
        self.mu    # checks n, smear and k_ratio

    @property
    def dw(self) -> float:
        if self.diameter_m is not None:
            return positive(self.diameter_m, "diameter_m")
        return band_drain_diameter(self.width_m, self.thickness_m)

    @property
    def de(self) -> float:
        return influence_diameter(self.spacing_m, self.pattern)

    @property
    def n(self) -> float:
        return self.de / self.dw

    @property
    def smear_ratio(self) -> float:
        return 1.0 if self.smear_diameter_m is None else positive(self.smear_diameter_m, "smear_diameter_m") / self.dw

    @property
    def mu(self) -> float:
        well = 0.0 if not self.kh_over_qw else well_resistance(
            self.depth_m if math.isfinite(self.depth_m) else 0.0, self.kh_over_qw)
        return hansbo_mu(self.n, self.smear_ratio, self.k_ratio, well)

    def radial_rate(self, ch) -> np.ndarray:
        """λ = 8·ch/(de²·μ) (1/year) so that Uh = 1 − exp(−λ·t); `ch` in m²/year."""
        return 8.0 * np.asarray(ch, dtype=float) / (self.de**2 * self.mu)

    def with_spacing(self, spacing_m: float) -> "VerticalDrains":
        from dataclasses import replace
        return replace(self, spacing_m=spacing_m)


def spacing_for_degree(drains: VerticalDrains, ch: float, target_u: float, years: float,
                       uv: float = 0.0) -> float:
    """Drain spacing (m) giving average degree `target_u` after `years` (brentq).

    `uv` is the vertical degree of consolidation reached by then without drains, combined
    by Carrillo (1942). The other drain properties are those of `drains`. Raises when even
    a spacing of 1.5 drain diameters falls short.

    Examples
    --------
    >>> d = VerticalDrains(1.5, "triangular", diameter_m=0.066, depth_m=10)
    >>> s = spacing_for_degree(d, ch=2.0, target_u=0.9, years=0.5)
    >>> u = combined_degree(0.0, 1 - math.exp(-d.with_spacing(s).radial_rate(2.0) * 0.5))
    >>> round(u, 6)
    0.9
    """
    u_t = finite(target_u, "target_u")
    if not 0 < u_t < 1:
        raise InputError(f"must lie in (0, 1), got {u_t:g}", argument="target_u")
    t = positive(years, "years")
    if uv >= u_t:
        raise InputError(f"vertical drainage alone reaches U = {uv:.3f} >= the target; no "
                         "drains are needed", argument="target_u")

    def shortfall(spacing):
        uh = 1.0 - math.exp(-float(drains.with_spacing(spacing).radial_rate(ch)) * t)
        return combined_degree(uv, uh) - u_t

    smear = drains.smear_ratio * drains.dw
    lo = 1.01 * max(smear, drains.dw) / PATTERN_FACTORS[drains.pattern] * 1.5
    if shortfall(lo) < 0:
        raise InputError(f"even drains {lo:.2f} m apart do not reach U = {u_t:g} in {t:g} "
                         "years", argument="target_u")
    hi = lo
    while shortfall(hi) > 0:
        hi *= 1.5
        if hi > 1e3:
            return math.inf
    from scipy.optimize import brentq  # loaded when solved: reading a site stays quick
    return brentq(shortfall, lo, hi, xtol=1e-6)
