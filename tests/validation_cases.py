"""The registry of published check values: one place for every validation number.

Each :class:`Case` holds the quantity checked, the published (or closed-form) value, its
source as cited in the tests, a tolerance (absolute or relative) and a zero-argument
function that computes fillstress's value through the public API.  The validation tests
parametrize over :data:`CASES` (|computed − published| <= tolerance) and
``tools/write_validation_table.py`` writes ``docs/validation.md`` from the same list, so
the table and the tests cannot disagree.

Closed forms for the strip, the circle and the embankment are derived in
docs/method-engine.md and written out here independently of the kernels.  Sites and
numbers are invented.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache, partial
from typing import Callable

import numpy as np
import shapely
from scipy import integrate

from fillstress import LoadGrid, stress_slices, vertical_stress
from fillstress.grid import GridSpec
from fillstress.kernels import point_influence
from fillstress.settlement import consolidation_settlement, degree_of_consolidation, time_factor, \
    time_to_degree
from fillstress.shapes.embankment import embankment_thickness
from fillstress.shapes.footprints import footprint_thickness, sloping_footprint_thickness
from fillstress.shapes.stockpile import pile_thickness
from fillstress.soil import SoilLayer, SoilProfile

import reference


@dataclass(frozen=True)
class Case:
    """One published check value and how fillstress computes the same quantity."""

    id: str
    topic: str
    quantity: str
    published: float
    source: str
    tolerance: float
    tolerance_kind: str                  # "abs" or "rel" (relative to the published value)
    compute: Callable[[], float]
    derived: bool = False                # published value evaluated from a closed form here

    def __post_init__(self):
        if self.tolerance_kind not in ("abs", "rel") or not self.tolerance > 0:
            raise ValueError(f"case {self.id}: tolerance must be a positive abs or rel value")

    @property
    def allowed(self) -> float:
        """The largest |computed − published| that passes."""
        if self.tolerance_kind == "abs":
            return self.tolerance
        return self.tolerance * abs(self.published)

    def passes(self, computed: float) -> bool:
        return abs(computed - self.published) <= self.allowed

    def explain(self, computed: float) -> str:
        return (f"{self.id}: {self.quantity}: computed {computed!r}, published "
                f"{self.published!r} ({self.source}), |difference| "
                f"{abs(computed - self.published):.3g} > allowed {self.allowed:.3g}")


CASES: list[Case] = []

CORNER = "Corner influence factors (Boussinesq rectangle)"
STRIP = "Strip load"
CIRCLE = "Circular load, centreline"
EMBANKMENT = "Long embankment (Osterberg)"
EMBANKMENT_END = "Embankment end"
EQUILIBRIUM = "Equilibrium"
WESTERGAARD = "Westergaard"
SETTLEMENT = "Consolidation settlement, hand calculations"
TIME_RATE = "Time rate of consolidation (Terzaghi)"
VOLUMES = "Fill volumes against analytic solids"
BACK_ANALYSIS = "Back-analysis of settlement readings"

TOPICS = [CORNER, STRIP, CIRCLE, EMBANKMENT, EMBANKMENT_END, EQUILIBRIUM, WESTERGAARD,
          SETTLEMENT, TIME_RATE, VOLUMES, BACK_ANALYSIS]


def add(id, topic, quantity, published, source, tolerance, kind, compute, derived=False):
    if any(c.id == id for c in CASES):
        raise ValueError(f"duplicate case id {id}")
    CASES.append(Case(id, topic, quantity, float(published), source, float(tolerance), kind,
                      compute, derived))


def cases(topic: str) -> list[Case]:
    """The cases of one topic, in registry order (for pytest.mark.parametrize)."""
    found = [c for c in CASES if c.topic == topic]
    if not found:
        raise KeyError(f"no cases under topic {topic!r}")
    return found


def case_id(case: Case) -> str:
    return case.id


_computed: dict[str, float] = {}


def computed_value(case: Case) -> float:
    """fillstress's value for `case`, computed once a session (the table reuses it)."""
    if case.id not in _computed:
        _computed[case.id] = float(case.compute())
    return _computed[case.id]


def check(case: Case) -> None:
    """Assert |computed − published| <= tolerance: the rule the validation table reports."""
    got = computed_value(case)
    assert abs(got - case.published) <= case.allowed, case.explain(got)


# --- corner influence factors -----------------------------------------------------------
BIG = 1e7  # stands in for an infinite side (m/z, n/z = ∞)

NEWMARK_SOURCE = ("Newmark (1935) / Fadum (1948) corner influence factor, as tabulated in "
                  "standard foundation engineering texts")
# Newmark (1935) / Fadum (1948) corner influence factors I(m, n), m = B/z, n = L/z, as
# tabulated in standard foundation engineering texts.  The first eight pairs are table
# values as printed there; the rest are recalled from memory of that table.
NEWMARK_TABLE = [
    (0.1, 0.1, 0.0047), (0.5, 0.5, 0.0840), (0.5, 1.0, 0.1202), (1.0, 1.0, 0.1752),
    (1.0, 2.0, 0.1999), (2.0, 2.0, 0.2325), (1.0, BIG, 0.2046), (BIG, BIG, 0.2500),
    (0.2, 0.2, 0.0179), (0.3, 0.3, 0.0374), (0.4, 0.4, 0.0602), (0.6, 0.6, 0.1069),
    (0.8, 0.8, 0.1461), (0.1, 1.0, 0.0279), (0.2, 1.0, 0.0547), (2.0, BIG, 0.2399),
]
NEWMARK_AS_PRINTED = 8


def _ratio_text(v: float) -> str:
    return "∞" if v == BIG else f"{v:g}"


def _ratio_id(v: float) -> str:
    return "inf" if v == BIG else f"{v:g}"


def corner_factor(m: float, n: float, kernel: str) -> float:
    """Δσz/q below the corner of a uniform m·z by n·z rectangle, z = 2.5 m, q = 80 kPa."""
    z, q = 2.5, 80.0
    grid = LoadGrid([[q]], x0=0.0, y0=0.0, dx=m * z, dy=n * z)
    return vertical_stress(grid, [[0.0, 0.0, z]], kernel=kernel)[0] / q


for _k, (_m, _n, _value) in enumerate(NEWMARK_TABLE):
    _note = "table value" if _k < NEWMARK_AS_PRINTED \
        else "recalled from memory of that table"
    for _kernel in ("nodes", "cells"):
        add(f"corner-m{_ratio_id(_m)}-n{_ratio_id(_n)}-{_kernel}", CORNER,
            f"I(m = {_ratio_text(_m)}, n = {_ratio_text(_n)}), {_kernel} kernel", _value,
            f"{NEWMARK_SOURCE}; {_note}", 2e-4, "abs", partial(corner_factor, _m, _n, _kernel))


# --- strip ------------------------------------------------------------------------------
STRIP_SOURCE = ("uniform strip load Δσz/q = (α + sin α cos(α + 2δ))/π, by integrating the "
                "Boussinesq line load (Flamant 1892)")
STRIP_WIDTH, STRIP_LENGTH, STRIP_Q = 4.0, 800.0, 60.0     # 200 times longer than wide


def strip_factor(x, z, half_width):
    """Uniform strip load: Δσz/q = (α + sin α cos(α + 2δ)) / π (α the angle the strip
    subtends at the point, δ the angle from the vertical to its near edge), as derived
    by integrating the Boussinesq line load (Flamant 1892)."""
    theta1 = math.atan((-half_width - x) / z)
    theta2 = math.atan((half_width - x) / z)
    alpha, delta = theta2 - theta1, theta1
    return (alpha + math.sin(alpha) * math.cos(alpha + 2 * delta)) / math.pi


def long_rectangle_factor(x: float, z: float) -> float:
    """Δσz/q at mid-length of a 4 m × 800 m rectangle, x from its centre line."""
    grid = LoadGrid([[STRIP_Q, STRIP_Q]], x0=-2.0, y0=0.0, dx=2.0, dy=STRIP_LENGTH)
    return vertical_stress(grid, [[x, STRIP_LENGTH / 2, z]])[0] / STRIP_Q


for _x, _where in [(0.0, "centre"), (2.0, "edge"), (6.5, "outside")]:
    for _z in (0.8, 3.0, 9.0):
        add(f"strip-x{_x:g}-z{_z:g}", STRIP,
            f"Δσz/q, B = 4 m, {_where} (x = {_x:g} m), z = {_z:g} m",
            strip_factor(_x, _z, STRIP_WIDTH / 2), STRIP_SOURCE, 5e-3, "rel",
            partial(long_rectangle_factor, _x, _z), derived=True)


# --- circle -----------------------------------------------------------------------------
DISC_RADIUS, DISC_CELL, DISC_Q = 5.0, 0.25, 100.0
CIRCLE_SOURCE = ("uniform circular load, centreline 1 − (1 + (R/z)²)^(−3/2), from Boussinesq "
                 "(1885) by integration over the disc, as given in standard soil mechanics texts")


@lru_cache(maxsize=None)
def disc_grid(radius, cell, q):
    """A disc of pressure q on square cells, each weighted by its covered fraction
    (a 1024-sided polygon stands in for the circle; its area is short by 6e-6)."""
    n = int(math.ceil(radius / cell)) + 1
    edges = np.arange(-n, n + 1) * cell
    xs, ys = np.meshgrid(edges[:-1], edges[:-1])
    boxes = shapely.box(xs, ys, xs + cell, ys + cell)
    disc = shapely.Point(0.0, 0.0).buffer(radius, quad_segs=256)
    fraction = shapely.area(shapely.intersection(boxes, disc)) / cell**2
    return LoadGrid(q * fraction, x0=edges[0], y0=edges[0], dx=cell, dy=cell)


def disc_centreline_factor(z: float) -> float:
    grid = disc_grid(DISC_RADIUS, DISC_CELL, DISC_Q)
    return vertical_stress(grid, [[0.0, 0.0, z]])[0] / DISC_Q


for _z in (0.5, 2.0, 5.0, 12.0):
    add(f"circle-z{_z:g}", CIRCLE, f"Δσz/q, R = 5 m, z = {_z:g} m",
        1.0 - (1.0 + (DISC_RADIUS / _z) ** 2) ** -1.5, CIRCLE_SOURCE, 1e-2, "rel",
        partial(disc_centreline_factor, _z), derived=True)


# --- Osterberg (1957) embankment ----------------------------------------------------------
CREST_HALF, SLOPE, HEIGHT, GAMMA = 4.0, 6.0, 3.0, 19.0   # crest 8 m wide, slopes 1V:2H
Q_CREST = HEIGHT * GAMMA
EMBANKMENT_LENGTH = 4000.0
OSTERBERG_SOURCE = ("Osterberg (1957) embankment influence, halves superposed at the point "
                    "(infinitely long symmetric embankment)")


def osterberg(a, b, z):
    """Osterberg (1957) half-embankment influence below the inner edge of a uniform
    part of width b followed by a slope of horizontal length a (b may be 0):
    I = (1/π)[((a+b)/a)(α1+α2) − (b/a)α2], α2 = atan(b/z), α1 = atan((a+b)/z) − α2."""
    alpha2 = math.atan(b / z)
    alpha1 = math.atan((a + b) / z) - alpha2
    return (((a + b) / a) * (alpha1 + alpha2) - (b / a) * alpha2) / math.pi


def embankment_closed_form(x, z):
    """Δσz below an infinitely long symmetric embankment, by superposing Osterberg
    halves split at the vertical through the point (x measured from the centre line)."""
    c, a, q = CREST_HALF, SLOPE, Q_CREST
    x = abs(x)
    if x <= c:                                     # below the crest
        return q * (osterberg(a, c + x, z) + osterberg(a, c - x, z))
    if x < c + a:                                  # below a slope, u from the crest edge
        u = x - c
        h_ratio = (a - u) / a
        right = q * h_ratio * osterberg(a - u, 0.0, z)
        left = q * osterberg(a, 2 * c + u, z) - q * (u / a) * osterberg(u, 0.0, z)
        return right + left
    d = x - c - a                                  # beyond the toe, d from the toe
    return q * (osterberg(a, d + a + 2 * c, z) - osterberg(a, d, z))


@lru_cache(maxsize=None)
def embankment_grid(length, cell=0.25):
    """Trapezoidal cross-section on cells of width `cell`; every slope break is on a
    cell edge, so the cell-average height is the mean of its two edge heights."""
    half_base = CREST_HALF + SLOPE
    edges = np.arange(-half_base - 2.0, half_base + 2.0 + cell / 2, cell)
    height = HEIGHT * np.clip((half_base - np.abs(edges)) / SLOPE, 0.0, 1.0)
    average = 0.5 * (height[:-1] + height[1:])
    return LoadGrid.from_thickness(average[None, :], GAMMA, x0=edges[0], y0=0.0,
                                   dx=cell, dy=length)


def embankment_stress(x: float, y: float, z: float, length: float = EMBANKMENT_LENGTH) -> float:
    return vertical_stress(embankment_grid(length), [[x, y, z]])[0]


_PLACES = {0.0: "crest centre", 2.5: "crest", 4.0: "crest edge", 7.0: "slope",
           9.5: "slope", 13.0: "beyond the toe"}
for _x, _where in _PLACES.items():
    for _z in (1.5, 4.0, 10.0, 25.0):
        add(f"embankment-x{_x:g}-z{_z:g}", EMBANKMENT,
            f"Δσz (kPa), H = 3 m, {_where} (x = {_x:g} m), z = {_z:g} m",
            embankment_closed_form(_x, _z), OSTERBERG_SOURCE, 1e-2, "rel",
            partial(embankment_stress, _x, EMBANKMENT_LENGTH / 2, _z), derived=True)


def end_over_double_middle(x: float, z: float) -> float:
    """Δσz at the end of a length-L fill over Δσz at the middle of a 2L fill."""
    end = embankment_stress(x, 0.0, z)
    return end / embankment_stress(x, EMBANKMENT_LENGTH, z, 2 * EMBANKMENT_LENGTH)


def end_over_own_middle(x: float, z: float) -> float:
    """Δσz at the end of a long fill over Δσz at its own mid-length."""
    return embankment_stress(x, 0.0, z) / embankment_stress(x, EMBANKMENT_LENGTH / 2, z)


for _x, _z in [(0.0, 3.0), (6.0, 8.0), (11.0, 2.0)]:
    # exact by symmetry: the end of a length-L fill is half the middle of a 2L fill
    add(f"end-symmetry-x{_x:g}-z{_z:g}", EMBANKMENT_END,
        f"Δσz(end of L) / Δσz(middle of 2L), x = {_x:g} m, z = {_z:g} m", 0.5,
        "exact by symmetry (superposition of two fills end to end)", 1e-12, "rel",
        partial(end_over_double_middle, _x, _z))
    # and for a long fill the end carries half its own mid-length value (common practice)
    add(f"end-half-x{_x:g}-z{_z:g}", EMBANKMENT_END,
        f"Δσz(end) / Δσz(mid-length), L = 4 km, x = {_x:g} m, z = {_z:g} m", 0.5,
        "common practice: the end of a long fill carries half its mid-length value",
        1e-3, "rel", partial(end_over_own_middle, _x, _z))


# --- equilibrium --------------------------------------------------------------------------
EQUILIBRIUM_DEPTH, EQUILIBRIUM_PAD = 8.0, 300.0


def irregular_pile():
    rng = np.random.default_rng(11)
    pressure = rng.uniform(20.0, 90.0, (8, 12))
    pressure[:3, :4] = 0.0                          # a notch in the footprint
    return LoadGrid(pressure, x0=100.0, y0=200.0, dx=1.0, dy=1.0)


@lru_cache(maxsize=None)
def plane_equilibrium(method: str, poisson) -> tuple[float, float, float]:
    """(load carried by a wide plane at z = 8 m, total load, influence of the plane).

    The plane is finite: the part of the load spread beyond it is taken as that of a
    point load at the load centroid, i.e. 1 − (rectangle influence of the plane seen
    from the load).  Boussinesq's tail is ~(z/S)³, negligible; Westergaard's decays
    only as z/S, so there the correction matters.
    """
    grid = irregular_pile()
    plane = stress_slices(grid, [EQUILIBRIUM_DEPTH], method, poisson, pad=EQUILIBRIUM_PAD)
    carried = float(plane.sum()) * grid.cell_area
    w = grid.pressure * grid.cell_area
    xc = float(np.sum(w * grid.x_centres[None, :]) / w.sum())
    yc = float(np.sum(w * grid.y_centres[:, None]) / w.sum())
    x_lo, x_hi = plane.x.values[0] - 0.5, plane.x.values[-1] + 0.5
    y_lo, y_hi = plane.y.values[0] - 0.5, plane.y.values[-1] + 0.5
    inside = float(reference.rectangle(x_lo - xc, x_hi - xc, y_lo - yc, y_hi - yc,
                                       EQUILIBRIUM_DEPTH, method, poisson))
    return carried, grid.total_load, inside


def carried_over_expected(method: str, poisson) -> float:
    carried, total, inside = plane_equilibrium(method, poisson)
    return carried / (total * inside)


def carried_over_total(method: str, poisson) -> float:
    carried, total, _ = plane_equilibrium(method, poisson)
    return carried / total


def _method_text(method, poisson):
    return "Boussinesq" if method == "boussinesq" else f"Westergaard ν = {poisson:g}"


for _method, _poisson in [("boussinesq", None), ("westergaard", 0.0), ("westergaard", 0.3)]:
    _label = _method_text(_method, _poisson)
    _tag = _method if _poisson is None else f"{_method}-nu{_poisson:g}"
    add(f"equilibrium-plane-{_tag}", EQUILIBRIUM,
        f"{_label}: load through a 612 m plane at z = 8 m / (total × plane influence)", 1.0,
        "equilibrium of vertical force (statics); plane influence from the point-load form",
        5e-3, "rel", partial(carried_over_expected, _method, _poisson))
    if _method == "boussinesq":
        add(f"equilibrium-total-{_tag}", EQUILIBRIUM,
            f"{_label}: load through the plane / total load", 1.0,
            "equilibrium of vertical force (statics); Boussinesq tail ~(z/S)³ negligible",
            5e-3, "rel", partial(carried_over_total, _method, _poisson))


def point_form_total(method: str, poisson) -> float:
    """∫ Δσz 2πr dr over the plane z = 1.7 m for a unit point load (scipy quad)."""
    z = 1.7
    total, _ = integrate.quad(lambda r: point_influence(r, z, method, poisson) * 2 * math.pi * r,
                              0, np.inf, epsabs=1e-12)
    return total


for _method, _poisson in [("boussinesq", None), ("westergaard", 0.0), ("westergaard", 0.45)]:
    _tag = _method if _poisson is None else f"{_method}-nu{_poisson:g}"
    add(f"equilibrium-point-{_tag}", EQUILIBRIUM,
        f"{_method_text(_method, _poisson)} point load: ∫ Δσz 2πr dr / Q (scipy quad)", 1.0,
        "equilibrium of the point-load form itself: ∫ Δσz 2πr dr = Q", 1e-8, "rel",
        partial(point_form_total, _method, _poisson))


# --- Westergaard ------------------------------------------------------------------------------
def westergaard_quadrant(poisson: float) -> float:
    grid = LoadGrid([[1.0]], x0=0.0, y0=0.0, dx=BIG, dy=BIG)
    return vertical_stress(grid, [[0.0, 0.0, 3.0]], "westergaard", poisson)[0]


for _poisson in (0.0, 0.2, 0.45):
    # Westergaard (1938) corner of an infinite area: 1/4 (the quadrant of a half-space)
    add(f"westergaard-quadrant-nu{_poisson:g}", WESTERGAARD,
        f"corner of an infinite area, ν = {_poisson:g}, z = 3 m (Δσz/q)", 0.25,
        "Westergaard (1938) corner of an infinite area: 1/4 (the quadrant of a half-space)",
        1e-6, "abs", partial(westergaard_quadrant, _poisson))


def westergaard_point_nu0(r: float, z: float) -> float:
    return point_influence(r, z, "westergaard")


for _r, _z in [(0.0, 1.0), (1.0, 1.0), (3.0, 2.0), (0.5, 4.0)]:
    # Westergaard (1938), ν = 0, as reproduced in standard foundation engineering texts:
    # Δσz = Q / (π z²) · [1 + 2 (r/z)²]^(−3/2)
    add(f"westergaard-point-r{_r:g}-z{_z:g}", WESTERGAARD,
        f"point load, ν = 0, r = {_r:g} m, z = {_z:g} m (Δσz/Q, 1/m²)",
        1.0 / (math.pi * _z * _z) * (1.0 + 2.0 * (_r / _z) ** 2) ** -1.5,
        "Westergaard (1938), ν = 0, Q/(π z²)·[1 + 2(r/z)²]^(−3/2), as reproduced in "
        "standard foundation engineering texts", 1e-13, "rel",
        partial(westergaard_point_nu0, _r, _z), derived=True)


# --- consolidation settlement, hand calculations ------------------------------------------------
GAMMA_W = 9.81
HAND_SOURCE = ("hand calculation: Terzaghi 1-D consolidation, e–log σ' settlement formulas as "
               "given in standard soil mechanics texts")


def harrow_flat(**clay):
    """Invented site 'Harrow Flat': 2 m sand over 4 m clay, water table at 2 m.

    At the clay mid-depth z = 4 m: σ'0 = 2·18 + 2·(17 − 9.81) = 36 + 14.38 = 50.38 kPa.
    """
    args = dict(cc=0.36, cr=0.05, e0=1.05, ocr=1.0)
    args.update(clay)
    return SoilProfile([SoilLayer("sand", 0.0, 2.0, 18.0, 19.0, modulus_kpa=30000),
                        SoilLayer("clay", 2.0, 6.0, 16.0, 17.0, **args)],
                       water_table_m=2.0, gamma_w=GAMMA_W)


def one_sublayer(profile, dsz):
    """The whole clay as one sublayer (z = 4 m, h = 4 m), one plan point."""
    return float(consolidation_settlement(profile, [4.0], [4.0], [[dsz]])[0])


def harrow_flat_settlement(dsz: float, **clay) -> float:
    return one_sublayer(harrow_flat(**clay), dsz)


def silt_settlement(dsz: float, **compressibility) -> float:
    profile = SoilProfile([SoilLayer("silt", 0, 6, 18.0, 19.0, **compressibility)], 1.0)
    return one_sublayer(profile, dsz)


# Cc·h/(1+e0) = 0.36·4/2.05 = 0.702439; Cr·h/(1+e0) = 0.05·4/2.05 = 0.097561.
_HAND = [
    # s = 0.702439·log10((50.38 + 70)/50.38) = 0.702439·0.378296 = 0.26573 m
    ("settlement-nc", "normally consolidated clay, Δσ = 70 kPa (m)", 0.265730, 1e-5,
     partial(harrow_flat_settlement, 70.0)),
    # σ'p = 150 kPa; σ'1 = 120.38 < σ'p: s = 0.097561·log10(120.38/50.38) = 0.036907 m
    ("settlement-oc-below", "overconsolidated, σ'p = 150 kPa not reached, Δσ = 70 kPa (m)",
     0.036907, 1e-4, partial(harrow_flat_settlement, 70.0, ocr=None, sigma_p_kpa=150.0)),
    # σ'p = 150 kPa; σ'1 = 210.38 > σ'p:
    # s = 0.097561·log10(150/50.38) + 0.702439·log10(210.38/150)
    #   = 0.097561·0.473833 + 0.702439·0.146913 = 0.046228 + 0.103197 = 0.149425 m
    ("settlement-oc-crossing", "overconsolidated, crossing σ'p = 150 kPa, Δσ = 160 kPa (m)",
     0.149425, 1e-5, partial(harrow_flat_settlement, 160.0, ocr=None, sigma_p_kpa=150.0)),
    # OCR = 2: σ'p = 100.76 kPa at z = 4 m; σ'1 = 120.38 crosses it:
    # s = 0.097561·log10(2) + 0.702439·log10(120.38/100.76)
    #   = 0.029369 + 0.702439·0.077266 = 0.029369 + 0.054275 = 0.083644 m
    ("settlement-ocr2", "OCR = 2 (σ'p = 100.76 kPa at 4 m), Δσ = 70 kPa (m)", 0.083644, 1e-4,
     partial(harrow_flat_settlement, 70.0, ocr=2.0)),
    # Δσ = −20 kPa: s = 0.097561·log10(30.38/50.38) = 0.097561·(−0.219670) = −0.021431 m (heave)
    ("settlement-unloading", "unloading Δσ = −20 kPa, swelling along Cr (m)", -0.021431, 1e-4,
     partial(harrow_flat_settlement, -20.0)),
    # mv·h·Δσ = 2.5e-4·4·70 = 0.07 m; h·Δσ/M = 4·70/5000 = 0.056 m (hand calculation)
    ("settlement-mv", "linear layer mv = 2.5e-4 /kPa, h = 4 m, Δσ = 70 kPa (m)", 0.07, 1e-12,
     partial(silt_settlement, 70.0, mv_per_kpa=2.5e-4)),
    ("settlement-modulus", "linear layer M = 5 MPa, h = 4 m, Δσ = 70 kPa (m)", 0.056, 1e-12,
     partial(silt_settlement, 70.0, modulus_kpa=5000.0)),
    # h·Δσ/M = 4·(−10)/5000 = −0.008 m
    ("settlement-modulus-unloading", "linear layer M = 5 MPa, h = 4 m, Δσ = −10 kPa (m)",
     -0.008, 1e-12, partial(silt_settlement, -10.0, modulus_kpa=5000.0)),
]
for _id, _quantity, _value, _rel, _compute in _HAND:
    add(_id, SETTLEMENT, _quantity, _value, HAND_SOURCE, _rel, "rel", _compute)


# --- time rate -----------------------------------------------------------------------------------
TERZAGHI_SOURCE = ("Terzaghi (1943) average degree of consolidation table, as reproduced in "
                   "standard soil mechanics texts, to 3 significant figures (values recalled "
                   "from memory of that table)")
# Terzaghi (1943) average degree of consolidation table, as reproduced in standard soil
# mechanics texts, 3 significant figures, recalled from memory of that table.
TERZAGHI_U_TV = [(0.10, 0.00785), (0.20, 0.0314), (0.50, 0.197), (0.60, 0.287),
                 (0.70, 0.403), (0.80, 0.567), (0.90, 0.848)]

for _u, _tv in TERZAGHI_U_TV:
    # the table is rounded to 3 figures: allow half a unit in the third figure (60 % is
    # also printed as 0.286 in some texts, so 0.3 % covers both)
    add(f"terzaghi-tv-u{round(100 * _u)}", TIME_RATE, f"Tv for U = {100 * _u:g} %", _tv,
        TERZAGHI_SOURCE, 3e-3, "rel", partial(time_factor, _u))
    add(f"terzaghi-u-tv{_tv:g}", TIME_RATE, f"U at Tv = {_tv:g}", _u, TERZAGHI_SOURCE, 2e-3,
        "abs", partial(degree_of_consolidation, _tv))

# t90 = 0.848·H²/cv = 0.8481·16/2 = 6.78 years (Tv from the series)
add("terzaghi-t90", TIME_RATE, "t90 (years), cv = 2 m²/yr, drainage path 4 m", 6.785,
    "hand calculation t90 = Tv(90 %)·H²/cv with the Terzaghi (1943) table value Tv = 0.848",
    1e-3, "rel", partial(time_to_degree, 0.9, 2.0, 4.0))


# --- back-analysis of settlement readings ------------------------------------------------------
# Readings generated exactly from Terzaghi's series (an independent 200-term sum in
# reference.py): one layer, one instant load step, invented s_ult = 0.62 m, cv = 2.4 m²/yr,
# H_dr = 4 m, every 30 days from the day U first exceeds 60 % (12 readings).
READINGS_ULT, READINGS_CV, READINGS_HDR = 0.62, 2.4, 4.0
ASAOKA_SOURCE = ("Asaoka (1978) on readings generated from Terzaghi's (1943) series with the "
                 "stated s_ult and cv; tolerance of the project's acceptance check (U > 60 %)")


@lru_cache(maxsize=1)
def _asaoka_on_terzaghi():
    from fillstress.monitoring import asaoka
    rate = READINGS_CV / 365.25 / READINGS_HDR**2
    days = np.arange(1.0, 5000.0)
    start = days[np.argmax(reference.terzaghi_average_degree(rate * days) > 0.6)]
    t = start + 30.0 * np.arange(12)
    return asaoka(t, READINGS_ULT * reference.terzaghi_average_degree(rate * t),
                  drainage_path_m=READINGS_HDR)


def _hyperbolic_closed_form() -> float:
    """Tan (1971) hyperbola with invented α = 55 days/m, β = 1.6 /m, t0 = 90, s0 = 0.21 m."""
    from fillstress.monitoring import hyperbolic
    t = 90.0 + np.array([0.0, 7, 19, 40, 75, 130, 260, 500])
    s = 0.21 + np.where(t > 90, (t - 90) / (55.0 + 1.6 * (t - 90)), 0.0)
    return hyperbolic(t, s, start_day=90.0).ultimate


add("asaoka-ultimate", BACK_ANALYSIS, "Asaoka ultimate settlement (m), readings at U > 60 %",
    READINGS_ULT, ASAOKA_SOURCE, 0.02, "rel", lambda: _asaoka_on_terzaghi().ultimate,
    derived=True)
add("asaoka-cv", BACK_ANALYSIS, "cv implied by Asaoka's β1 (m²/year), H_dr = 4 m",
    READINGS_CV, ASAOKA_SOURCE, 0.05, "rel", lambda: _asaoka_on_terzaghi().cv_m2_per_yr,
    derived=True)
# s0 + 1/β = 0.21 + 1/1.6 = 0.835 m
add("hyperbolic-ultimate", BACK_ANALYSIS, "Tan (1971) hyperbolic ultimate on its own closed "
    "form (m)", 0.835, "closed form s0 + 1/β of the hyperbola the readings lie on", 1e-12,
    "rel", _hyperbolic_closed_form, derived=True)


# --- fill volumes against analytic solids ------------------------------------------------------------
VOLUME_CELLS = [2.0, 0.7]


def grid_volume(t, spec) -> float:
    return float(t.sum() * spec.cell_area)


PRISM_PAD = shapely.Polygon([(2, 1), (31, 4), (27, 22), (5, 18)],
                            holes=[[(10, 8), (16, 8), (16, 12), (10, 12)]])
PRISM_HEIGHT = 3.25


def prism_volume(cell: float) -> float:
    spec = GridSpec.covering(PRISM_PAD.bounds, cell, margin=2)
    return grid_volume(footprint_thickness(PRISM_PAD, PRISM_HEIGHT, spec), spec)


WEDGE_XY = [(0, 0), (24, 2), (22, 15), (3, 12)]


def wedge_height(x, y):
    return 0.5 + 0.1 * x + 0.05 * y


WEDGE = shapely.Polygon([(x, y, wedge_height(x, y)) for x, y in WEDGE_XY])


def wedge_volume(cell: float) -> float:
    spec = GridSpec.covering(WEDGE.bounds, cell, margin=1)
    return grid_volume(sloping_footprint_thickness(WEDGE, spec), spec)


def _wedge_exact() -> float:
    c = shapely.Polygon(WEDGE_XY).centroid
    return wedge_height(c.x, c.y) * WEDGE.area


# Toe: regular 96-gon of circumradius R. With no cap, h = tan(a)·distance to the toe
# is a pyramid whose apex is the centre, at height apothem·tan(a): V = A·H/3.
CONE_R, CONE_SIDES, CONE_ANGLE = 15.0, 96, 34.0
CONE_TOE = shapely.Polygon([(40 + CONE_R * math.cos(t), 30 + CONE_R * math.sin(t))
                            for t in np.linspace(0, 2 * math.pi, CONE_SIDES, endpoint=False)])
CONE_HEIGHT = CONE_R * math.cos(math.pi / CONE_SIDES) * math.tan(math.radians(CONE_ANGLE))


@lru_cache(maxsize=None)
def cone_pile(cell: float):
    spec = GridSpec.covering(CONE_TOE.bounds, cell, margin=1)
    return pile_thickness(CONE_TOE, CONE_ANGLE, spec), spec


# Square toe of side L, slope t = tan(a): the level set at height z is a square of
# side s(z) = L − 2z/t. Capped at hc: V = ∫0^hc s(z)² dz = t·(L³ − s(hc)³)/6.
FRUSTUM_L, FRUSTUM_ANGLE, FRUSTUM_CAP = 24.0, 37.0, 4.5
FRUSTUM_TOE = shapely.box(3, 5, 3 + FRUSTUM_L, 5 + FRUSTUM_L)


def _frustum_exact() -> float:
    tn = math.tan(math.radians(FRUSTUM_ANGLE))
    s_top = FRUSTUM_L - 2 * FRUSTUM_CAP / tn
    return tn * (FRUSTUM_L**3 - s_top**3) / 6


@lru_cache(maxsize=None)
def frustum_pile(cell: float):
    spec = GridSpec.covering(FRUSTUM_TOE.bounds, cell, margin=1)
    return pile_thickness(FRUSTUM_TOE, FRUSTUM_ANGLE, spec, crest_height=FRUSTUM_CAP), spec


def pile_volume(builder, cell: float) -> float:
    return grid_volume(*builder(cell))


BANK_L, BANK_W, BANK_N, BANK_H = 70.0, 9.0, 2.0, 3.5
BANK_ENDS = [(3.0, 2.5), ("vertical", 3.0), ("vertical", "vertical")]


def straight_bank_exact(L, w, n, H, m_start, m_end):
    """Middle: L·(w·H + n·H²) (trapezoid). Each sloping end (slope m): a wedge over the
    crest width, w·m·H²/2, plus two corner pyramids where side and end slopes meet,
    each n·m·H³·∫∫(1 − max(α, β)) dα dβ = n·m·H³/3."""
    end = lambda m: 0.0 if m is None else w * m * H**2 / 2 + 2 * n * m * H**3 / 3  # noqa: E731
    return L * (w * H + n * H**2) + end(m_start) + end(m_end)


@lru_cache(maxsize=None)
def straight_bank(cell: float, ends: tuple):
    a = math.radians(27.0)  # an oblique line, so no cell edge follows it
    line = shapely.LineString([(10, 20), (10 + BANK_L * math.cos(a), 20 + BANK_L * math.sin(a))])
    spec = GridSpec.covering(line.bounds, cell, margin=25)
    t = embankment_thickness(line, spec, crest_width=BANK_W, side_slope=BANK_N, heights=BANK_H,
                             start_slope=ends[0], end_slope=ends[1])
    return t, spec


def straight_bank_volume(cell: float, ends: tuple) -> float:
    return grid_volume(*straight_bank(cell, ends))


# Vertical ends: V = ∫ (w·H(s) + n·H(s)²) ds, integrated by scipy.integrate.quad.
VARY_W, VARY_N = 6.0, 1.5
VARY_PROFILE = [(1000.0, 1.0), (1030.0, 4.0), (1060.0, 2.0)]


def varying_bank_volume(cell: float) -> float:
    line = shapely.LineString([(0, 0), (60, 0)])
    spec = GridSpec.covering(line.bounds, cell, margin=12)
    t = embankment_thickness(line, spec, crest_width=VARY_W, side_slope=VARY_N,
                             heights=VARY_PROFILE, start_chainage=1000.0,
                             start_slope="vertical", end_slope="vertical")
    return grid_volume(t, spec)


def _varying_exact() -> float:
    ch, hs = np.array(VARY_PROFILE).T - [[1000.0], [0.0]]
    area = lambda s: VARY_W * np.interp(s, ch, hs) + VARY_N * np.interp(s, ch, hs) ** 2  # noqa: E731
    return quad_value(area, 0, 60, points=[30.0])


def quad_value(f, a, b, **kw) -> float:
    return integrate.quad(f, a, b, **kw)[0]


# Quarter-circle centreline, radius 60 m, vertical ends: with the nearest-station
# rule each section is normal to the arc, and Pappus gives V = arc length × section
# area (the section is symmetric about the centreline). The polyline arc adds small
# fans at its outer vertices, well below 0.5 %.
ARC_R, ARC_W, ARC_N, ARC_H = 60.0, 8.0, 2.0, 3.0


def curved_bank_volume(cell: float) -> float:
    th = np.linspace(0, math.pi / 2, 181)
    arc = shapely.LineString(np.c_[ARC_R * np.cos(th), ARC_R * np.sin(th)])
    spec = GridSpec.covering(arc.bounds, cell, margin=20)
    t = embankment_thickness(arc, spec, crest_width=ARC_W, side_slope=ARC_N, heights=ARC_H,
                             start_slope="vertical", end_slope="vertical")
    return grid_volume(t, spec)


def _end_text(e):
    return "vertical" if e == "vertical" else f"1V:{e:g}H"


for _cell in VOLUME_CELLS:
    add(f"volume-prism-cell{_cell:g}", VOLUMES,
        f"prism on a footprint with a hole, h = 3.25 m, cell {_cell:g} m (m³)",
        PRISM_HEIGHT * PRISM_PAD.area, "prism V = A·h (exact whatever the cell size)",
        1e-10, "rel", partial(prism_volume, _cell), derived=True)
    add(f"volume-wedge-cell{_cell:g}", VOLUMES,
        f"sloping-top quadrilateral, thickness linear in x and y, cell {_cell:g} m (m³)",
        _wedge_exact(), "linear thickness: V = A·h(centroid)", 1e-10, "rel",
        partial(wedge_volume, _cell), derived=True)
    add(f"volume-cone-cell{_cell:g}", VOLUMES,
        f"uncapped pile on a regular 96-gon toe, R = 15 m, 34°, cell {_cell:g} m (m³)",
        CONE_TOE.area * CONE_HEIGHT / 3, "pyramid V = A·H/3, H = apothem·tan(angle)",
        5e-3, "rel", partial(pile_volume, cone_pile, _cell), derived=True)
    add(f"volume-frustum-cell{_cell:g}", VOLUMES,
        f"capped pile on a 24 m square toe, 37°, cap 4.5 m, cell {_cell:g} m (m³)",
        _frustum_exact(), "frustum V = ∫ s(z)² dz = tan(a)·(L³ − s(hc)³)/6", 5e-3, "rel",
        partial(pile_volume, frustum_pile, _cell), derived=True)
    for _ends in BANK_ENDS:
        _slopes = [None if e == "vertical" else e for e in _ends]
        add(f"volume-bank-{_end_text(_ends[0])}-{_end_text(_ends[1])}-cell{_cell:g}".replace(
            ":", ""), VOLUMES,
            f"straight embankment 70 m, ends {_end_text(_ends[0])} / {_end_text(_ends[1])}, "
            f"cell {_cell:g} m (m³)",
            straight_bank_exact(BANK_L, BANK_W, BANK_N, BANK_H, *_slopes),
            "trapezoid prism plus end wedges and corner pyramids (elementary solids)", 5e-3,
            "rel", partial(straight_bank_volume, _cell, _ends), derived=True)
    add(f"volume-bank-varying-cell{_cell:g}", VOLUMES,
        f"embankment with varying height, vertical ends, cell {_cell:g} m (m³)",
        _varying_exact(), "V = ∫ (w·H(s) + n·H(s)²) ds by scipy.integrate.quad", 5e-3, "rel",
        partial(varying_bank_volume, _cell), derived=True)
    add(f"volume-bank-curved-cell{_cell:g}", VOLUMES,
        f"quarter-circle embankment, R = 60 m, vertical ends, cell {_cell:g} m (m³)",
        ARC_R * math.pi / 2 * (ARC_W * ARC_H + ARC_N * ARC_H**2),
        "Pappus's centroid theorem: V = arc length × section area", 5e-3, "rel",
        partial(curved_bank_volume, _cell), derived=True)
