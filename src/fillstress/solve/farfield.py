"""Δσz at arbitrary points by a hierarchical far-field method with a certified error bound.

The load grid is aggregated into a pyramid of grids (2×2 cells per level, in the spirit
of the Barnes & Hut 1986 tree code).  For each point the pyramid is walked from the top:
a block far enough away is replaced by a moment expansion of the point-load kernel, a
block too close is opened, and a single cell too close is summed exactly with the
rectangle solution of :mod:`fillstress.kernels`.

The expansion and its bound (derivation in ``docs/method-farfield.md``).  Both kernels
have the form ``K = A c^(k-2) / |r - s|^k`` with r = (d, c) the offset of the point from
the block centre (c = z for Boussinesq, c = ηz for Westergaard), s the plan offset of a
source inside the block, (A, k) = (3/2π, 5) or (1/2π, 3).  The generating function of the
Gegenbauer polynomials (Abramowitz & Stegun 1964, 22.9.3) gives::

    |r - s|^-k = R^-k Σ_n (|s|/R)^n C_n^(k/2)(cos γ)

and the value keeps n <= p.  The terms of orders p+1 and p+2 are summed exactly, with
their signs, into the bound; the remainder after them is bounded per block by its radial
moment ∫|q||s|^(p+3) times the smaller of the series tail (|C_n| <= C(n+k-1, k-1),
A&S 22.14.2) and the Lagrange form of Taylor's remainder (nearest distance from the
point to the block, and the largest |C_(p+3)| over the directions the block subtends).
A point whose bound exceeds ``tol · max(|Δσz|, floor · max|p|)`` is walked again with a
stricter acceptance threshold (at worst everything is summed exactly), so the returned
values carry that guarantee.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import NamedTuple

import numba
import numpy as np

from .._validate import points_array, positive
from ..errors import InputError
from ..grid import LoadGrid
from ..kernels import KernelSpec, resolve_method
from ..kernels.corner import shared_rectangle
from .._validate import whole_number
from ._checks import DEFAULT_ORDER, checked_grid
_MAX_RETRIES = 6
_FIRST_SHARE = 1.0 / 16.0  # first acceptance threshold as a share of the point's error budget
#: Orders above p whose terms are summed exactly into the error bound (not into the value).
BOUND_ORDERS = 2


# --- expansion tables ----------------------------------------------------------------
def _kernel_power(spec: KernelSpec) -> tuple[float, int]:
    """(A, k) of the point-load kernel ``A c^(k-2) / R^k``."""
    if spec.method == "boussinesq":
        return 3.0 / (2.0 * math.pi), 5
    return 1.0 / (2.0 * math.pi), 3


def tail_bound(theta, order: int, power: int):
    """Upper bound of ``T_p(θ) = Σ_{n>p} C(n+k-1, k-1) θ^n`` (k = `power`, p = `order`).

    The ratio of consecutive terms, θ(n+k)/(n+1), falls with n, so the tail is at most
    its first term over ``1 - θ(p+1+k)/(p+2)``; +inf where that is not positive.

    Examples
    --------
    >>> round(float(tail_bound(0.1, 2, 5)), 6)    # 35·0.001 / (1 - 0.1·8/4)
    0.04375
    >>> float(tail_bound(0.6, 2, 5))
    inf
    """
    theta = np.asarray(theta, dtype=float)
    first = math.comb(order + power, power - 1) * theta ** (order + 1)
    ratio = 1.0 - theta * (order + 1 + power) / (order + 2)
    with np.errstate(divide="ignore"):
        return np.where(ratio > 0, first / np.where(ratio > 0, ratio, 1.0), np.inf)[()]


def theta_limit(order: int, power: int) -> float:
    """Largest θ a block may have to be expanded: 0.8 of the tail-bound radius, at most 0.5."""
    return min(0.5, 0.8 * (order + 2) / (order + 1 + power))


_GEGENBAUER_NODES = 256     # table of max |C_n^λ| on [-τ, τ] at τ = i / nodes
_GEGENBAUER_SAMPLES = 4096  # samples between two nodes


def gegenbauer(n: int, lam: float, t):
    """C_n^λ(t) by the three-term recurrence (Abramowitz & Stegun 1964, 22.7.3).

    Examples
    --------
    >>> float(gegenbauer(2, 1.5, 1.0))    # C(n + 2λ - 1, n) at t = 1: C(4, 2)
    6.0
    """
    t = np.asarray(t, dtype=float)
    prev, cur = np.ones_like(t), 2.0 * lam * t
    if n == 0:
        return prev[()]
    for m in range(2, n + 1):
        prev, cur = cur, (2.0 * t * (m + lam - 1.0) * cur - (m + 2.0 * lam - 2.0) * prev) / m
    return cur[()]


def gegenbauer_max_table(n: int, power: int) -> np.ndarray:
    """Upper bounds of ``max |C_n^(k/2)(t)|`` over ``|t| <= i / 256``, i = 0..256 (k = `power`).

    The maximum over samples spaced Δ is raised by the Markov inequality
    (max|P'| <= n²/τ · max|P| on [-τ, τ] for a polynomial of degree n), so each entry is a
    rigorous bound, and it never exceeds C_n(1) = C(n + k - 1, k - 1) (A&S 22.14.2).

    Examples
    --------
    >>> tab = gegenbauer_max_table(6, 5)
    >>> float(tab[-1]) == math.comb(10, 4), bool(tab[0] < tab[-1] / 10)
    (True, True)
    """
    lam = power / 2.0
    nodes, per = _GEGENBAUER_NODES, _GEGENBAUER_SAMPLES
    t = np.linspace(0.0, 1.0, nodes * per + 1)
    running = np.maximum.accumulate(np.abs(gegenbauer(n, lam, t)))[::per]
    tau = np.arange(nodes + 1) / nodes
    step = 1.0 / (nodes * per)
    with np.errstate(divide="ignore"):
        margin = 1.0 - step * n * n / np.where(tau > 0, 2.0 * tau, 1.0)
    table = np.where(tau > 0, running / margin, abs(float(gegenbauer(n, lam, 0.0))))
    return np.minimum(table, math.comb(n + power - 1, power - 1))


def _term_table(order: int, power: int):
    """Terms (i, b, m) of the truncated expansion and their constant factors.

    Order-n term of ``R^k |r - s|^-k`` is ``Σ_m g_nm (2 d·s / R²)^j (|s|²/R²)^m`` with
    j = n - 2m and ``g_nm = (-1)^m (λ)_(n-m) / (m! j!)``, λ = k/2 (the explicit form of
    C_n^λ, A&S 22.3.4).  Expanding (d·s)^j gives monomials d_x^i d_y^b (i + b = j).
    """
    lam = power / 2.0
    terms, factors = [], []
    for n in range(order + 1):
        for m in range(n // 2 + 1):
            j = n - 2 * m
            poch = math.gamma(lam + n - m) / math.gamma(lam)
            g = (-1) ** m * poch / (math.factorial(m) * math.factorial(j))
            for i in range(j + 1):
                terms.append((i, j - i, m))
                factors.append(g * 2.0 ** j * math.comb(j, i))
    return np.asarray(terms, np.int64), np.asarray(factors)


def _moment_index(order: int) -> np.ndarray:
    """idx[a, b] of the raw moment ∫ q s_x^a s_y^b in a flat array (-1 when a + b > p)."""
    idx = -np.ones((order + 1, order + 1), np.int64)
    k = 0
    for a in range(order + 1):
        for b in range(order + 1 - a):
            idx[a, b] = k
            k += 1
    return idx


def _cell_moments(order: int, dx: float, dy: float) -> np.ndarray:
    """Raw moments of a unit-pressure dx × dy cell about its centre."""
    def line(a, width):
        return 0.0 if a % 2 else width * (width / 2.0) ** a / (a + 1)
    idx = _moment_index(order)
    out = np.zeros(int(idx.max()) + 1)
    for a in range(order + 1):
        for b in range(order + 1 - a):
            out[idx[a, b]] = line(a, dx) * line(b, dy)
    return out


# --- the pyramid -------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class Pyramid:
    """Aggregated blocks of a LoadGrid for the far-field walk (built by :func:`build_pyramid`).

    Level 0 is the grid itself; level L >= 1 holds blocks of 2^L × 2^L cells, stored flat
    from ``offset[L]`` as rows of ``nbx[L]`` blocks.  Per block: centre and half-diagonal
    of the loaded part, Σ|q|·area and the expansion weights.  Plain arrays, so a pyramid
    pickles cheaply to Dask workers.
    """

    grid: LoadGrid
    spec: KernelSpec
    order: int
    nbx: np.ndarray
    nby: np.ndarray
    offset: np.ndarray
    centre: np.ndarray   # (n_blocks, 2)
    half_diag: np.ndarray
    mass_abs: np.ndarray
    radial: np.ndarray   # Σ|q|·area·max|s|^(p+3) per block, bounding ∫|q||s|^(p+3)
    weights: np.ndarray  # (n_blocks, n_terms): orders 0..p+2 (above p only for the bound)
    cell_weights: np.ndarray
    terms: np.ndarray

    @property
    def levels(self) -> int:
        return int(self.nbx.size)

    @property
    def nbytes(self) -> int:
        return int(self.centre.nbytes + self.half_diag.nbytes + self.mass_abs.nbytes
                   + self.radial.nbytes + self.weights.nbytes)


def pyramid_blocks(nx: int, ny: int) -> int:
    """Number of aggregated blocks (levels >= 1) a grid of nx × ny cells needs.

    Examples
    --------
    >>> pyramid_blocks(4, 4)     # 2×2 + 1×1
    5
    """
    total, bx, by = 0, int(nx), int(ny)
    while bx > 1 or by > 1:
        bx, by = (bx + 1) // 2, (by + 1) // 2
        total += bx * by
    return total


def _level_shapes(nx: int, ny: int):
    shapes, bx, by = [(nx, ny)], nx, ny
    while bx > 1 or by > 1:
        bx, by = (bx + 1) // 2, (by + 1) // 2
        shapes.append((bx, by))
    return shapes


@numba.njit(cache=True)
def _shift_add(src, dst, ddx, ddy, idx, binom, order):
    # dst += moments of src moved by (ddx, ddy): s' = s + δ (binomial expansion)
    pxw = np.empty(order + 1)
    pyw = np.empty(order + 1)
    pxw[0] = 1.0
    pyw[0] = 1.0
    for t in range(1, order + 1):
        pxw[t] = pxw[t - 1] * ddx
        pyw[t] = pyw[t - 1] * ddy
    for a in range(order + 1):
        for b in range(order + 1 - a):
            acc = 0.0
            for i in range(a + 1):
                for j in range(b + 1):
                    acc += binom[a, i] * binom[b, j] * pxw[a - i] * pyw[b - j] * src[idx[i, j]]
            dst[idx[a, b]] += acc


@numba.njit(cache=True)
def _aggregate(child_lo, child_hi, child_m, child_abs, cnx, cny, pnx, pny,
               idx, binom, order, par_lo, par_hi, par_m, par_abs):
    # one pyramid level from the level below: bounding box of loaded children, moments
    for pj in range(pny):
        for pi in range(pnx):
            p = pj * pnx + pi
            x_lo, y_lo, x_hi, y_hi, mass = np.inf, np.inf, -np.inf, -np.inf, 0.0
            for cj in range(2 * pj, min(2 * pj + 2, cny)):
                for ci in range(2 * pi, min(2 * pi + 2, cnx)):
                    c = cj * cnx + ci
                    if child_abs[c] > 0.0:
                        x_lo = min(x_lo, child_lo[c, 0])
                        y_lo = min(y_lo, child_lo[c, 1])
                        x_hi = max(x_hi, child_hi[c, 0])
                        y_hi = max(y_hi, child_hi[c, 1])
                        mass += child_abs[c]
            par_abs[p] = mass
            par_m[p, :] = 0.0
            if mass == 0.0:
                continue
            par_lo[p, 0], par_lo[p, 1], par_hi[p, 0], par_hi[p, 1] = x_lo, y_lo, x_hi, y_hi
            mx, my = 0.5 * (x_lo + x_hi), 0.5 * (y_lo + y_hi)
            for cj in range(2 * pj, min(2 * pj + 2, cny)):
                for ci in range(2 * pi, min(2 * pi + 2, cnx)):
                    c = cj * cnx + ci
                    if child_abs[c] > 0.0:
                        cx = 0.5 * (child_lo[c, 0] + child_hi[c, 0])
                        cy = 0.5 * (child_lo[c, 1] + child_hi[c, 1])
                        _shift_add(child_m[c], par_m[p], cx - mx, cy - my, idx, binom, order)


@numba.njit(cache=True)
def _aggregate_cells(pressure, x0, y0, dx, dy, unit_cell, idx, binom, order, pnx, pny,
                     par_lo, par_hi, par_m, par_abs):
    # level 1 straight from the cells (no level-0 arrays): box of loaded cells, Σ|q|·area,
    # moments of each uniform cell moved to the block centre
    ny, nx = pressure.shape
    area = dx * dy
    moved = np.empty(unit_cell.size)
    for pj in range(pny):
        for pi in range(pnx):
            p = pj * pnx + pi
            x_lo, y_lo, x_hi, y_hi, mass = np.inf, np.inf, -np.inf, -np.inf, 0.0
            for j in range(2 * pj, min(2 * pj + 2, ny)):
                for i in range(2 * pi, min(2 * pi + 2, nx)):
                    if pressure[j, i] != 0.0:
                        x_lo = min(x_lo, x0 + i * dx)
                        y_lo = min(y_lo, y0 + j * dy)
                        x_hi = max(x_hi, x0 + (i + 1) * dx)
                        y_hi = max(y_hi, y0 + (j + 1) * dy)
                        mass += abs(pressure[j, i]) * area
            par_abs[p] = mass
            par_m[p, :] = 0.0
            if mass == 0.0:
                continue
            par_lo[p, 0], par_lo[p, 1], par_hi[p, 0], par_hi[p, 1] = x_lo, y_lo, x_hi, y_hi
            mx, my = 0.5 * (x_lo + x_hi), 0.5 * (y_lo + y_hi)
            for j in range(2 * pj, min(2 * pj + 2, ny)):
                for i in range(2 * pi, min(2 * pi + 2, nx)):
                    q = pressure[j, i]
                    if q != 0.0:
                        for u in range(unit_cell.size):
                            moved[u] = q * unit_cell[u]
                        _shift_add(moved, par_m[p], x0 + (i + 0.5) * dx - mx,
                                   y0 + (j + 0.5) * dy - my, idx, binom, order)


def _weight_recipe(terms: np.ndarray, factors: np.ndarray, idx: np.ndarray):
    """W_t = factor_t · Σ_l C(m,l) M[i+2l, b+2m-2l] as flat (start, moment, coefficient)."""
    start, moment, coef = [0], [], []
    for t, (i, b, m) in enumerate(terms):
        for l in range(m + 1):
            moment.append(idx[i + 2 * l, b + 2 * m - 2 * l])
            coef.append(factors[t] * math.comb(m, l))
        start.append(len(moment))
    return np.asarray(start, np.int64), np.asarray(moment, np.int64), np.asarray(coef)


@numba.njit(cache=True)
def _apply_recipe(moments, start, moment, coef, out):
    for blk in range(moments.shape[0]):
        for t in range(start.size - 1):
            acc = 0.0
            for u in range(start[t], start[t + 1]):
                acc += coef[u] * moments[blk, moment[u]]
            out[blk, t] = acc


def _to_weights(moments: np.ndarray, terms: np.ndarray, factors: np.ndarray,
                idx: np.ndarray) -> np.ndarray:
    """Expansion weights W_t = factor_t · Σ_l C(m,l) M[i+2l, b+2m-2l] of each block."""
    out = np.empty((moments.shape[0], len(terms)))
    _apply_recipe(np.ascontiguousarray(moments), *_weight_recipe(terms, factors, idx), out)
    return out


@numba.njit(cache=True)
def _radial_moments(pressure, x0, y0, dx, dy, centre, offset, nbx, power, out):
    # out[b] = Σ |q|·area·(max over the cell of |s|)^power over the cells of block b, s the
    # offset from the block centre: an upper bound of ∫|q| |s|^power over the block
    ny, nx = pressure.shape
    area = dx * dy
    for lev in range(1, nbx.size):
        for j in range(ny):
            for i in range(nx):
                q = pressure[j, i]
                if q == 0.0:
                    continue
                b = offset[lev] + (j >> lev) * nbx[lev] + (i >> lev)
                ox = abs(x0 + (i + 0.5) * dx - centre[b, 0]) + 0.5 * dx
                oy = abs(y0 + (j + 0.5) * dy - centre[b, 1]) + 0.5 * dy
                out[b] += abs(q) * area * math.sqrt(ox * ox + oy * oy) ** power


def build_pyramid(grid, method="boussinesq", poisson=None, *, order: int = DEFAULT_ORDER) -> Pyramid:
    """Aggregate a LoadGrid into the block pyramid used by :func:`vertical_stress_far`.

    Parameters
    ----------
    grid : LoadGrid
        Surface pressures (kPa).
    method, poisson
        Stress distribution, as in :func:`fillstress.solve.vertical_stress`.
    order : int
        Order p of the moment expansion, 0–8 (default 4).  Moments are kept to order
        p + BOUND_ORDERS: the terms above p are not added to the value, they are the
        exact leading part of its error bound.

    Examples
    --------
    >>> g = LoadGrid(np.ones((4, 4)), 0.0, 0.0, 1.0, 1.0)
    >>> pyr = build_pyramid(g)
    >>> pyr.levels, pyr.centre[-1].tolist(), float(pyr.mass_abs[-1])
    (3, [2.0, 2.0], 16.0)
    """
    grid = checked_grid(grid)
    spec = resolve_method(method, poisson)
    order = whole_number(order, "order", minimum=0, maximum=8)
    _, power = _kernel_power(spec)
    kept = order + BOUND_ORDERS
    terms, factors = _term_table(kept, power)
    idx = _moment_index(kept)
    binom = np.array([[math.comb(a, i) for i in range(kept + 1)] for a in range(kept + 1)], float)
    unit_cell = _cell_moments(kept, grid.dx, grid.dy)
    ny, nx = grid.shape
    shapes = _level_shapes(nx, ny)
    counts = [bx * by for bx, by in shapes]
    offset = np.concatenate([[0, 0], np.cumsum(counts[1:])]).astype(np.int64)[:len(shapes)]
    nbx = np.array([s[0] for s in shapes], np.int64)
    total = int(sum(counts[1:]))
    centre, half, mass_abs = np.zeros((total, 2)), np.zeros(total), np.zeros(total)
    weights = np.empty((total, len(terms)))
    recipe = _weight_recipe(terms, factors, idx)
    lo = hi = moments = None
    for lev, (cnx, cny), (pnx, pny) in zip(range(1, len(shapes)), shapes[:-1], shapes[1:]):
        part = slice(int(offset[lev]), int(offset[lev]) + pnx * pny)
        plo, phi = np.zeros((pnx * pny, 2)), np.zeros((pnx * pny, 2))
        pm = np.zeros((pnx * pny, unit_cell.size))
        if lev == 1:
            _aggregate_cells(grid.pressure, float(grid.x0), float(grid.y0), float(grid.dx),
                             float(grid.dy), unit_cell, idx, binom, kept, pnx, pny,
                             plo, phi, pm, mass_abs[part])
        else:
            _aggregate(lo, hi, moments, mass_abs[offset[lev - 1]:part.start], cnx, cny,
                       pnx, pny, idx, binom, kept, plo, phi, pm, mass_abs[part])
        centre[part] = 0.5 * (plo + phi)
        half[part] = 0.5 * np.hypot(phi[:, 0] - plo[:, 0], phi[:, 1] - plo[:, 1])
        _apply_recipe(pm, *recipe, weights[part])
        lo, hi, moments = plo, phi, pm
    radial = np.zeros(centre.shape[0])
    _radial_moments(grid.pressure, float(grid.x0), float(grid.y0), float(grid.dx),
                    float(grid.dy), centre, offset, nbx, kept + 1, radial)
    return Pyramid(grid, spec, order, nbx, np.array([s[1] for s in shapes], np.int64),
                   offset, centre, half, mass_abs, radial, weights,
                   _to_weights(unit_cell[None, :], terms, factors, idx)[0], terms)


# --- the walk --------------------------------------------------------------------------
@numba.njit(cache=True)
def _expansion(dxp, dyp, r2, w_row, e_pow, f_pow, w_pow, order, kept):
    # (Σ_t W_t e^i f^b w^m over orders n <= p, the same sum over orders p < n <= kept)
    # with e = d_x/R², f = d_y/R², w = 1/R²; terms in the order of _term_table(kept)
    inv = 1.0 / r2
    e, f = dxp * inv, dyp * inv
    e_pow[0], f_pow[0], w_pow[0] = 1.0, 1.0, 1.0
    for t in range(1, kept + 1):
        e_pow[t] = e_pow[t - 1] * e
        f_pow[t] = f_pow[t - 1] * f
        w_pow[t] = w_pow[t - 1] * inv
    total, last = 0.0, 0.0
    t = 0
    for n in range(kept + 1):
        for m in range(n // 2 + 1):
            j = n - 2 * m
            part = 0.0
            for i in range(j + 1):
                part += w_row[t] * e_pow[i] * f_pow[j - i]
                t += 1
            if n <= order:
                total += part * w_pow[m]
            else:
                last += part * w_pow[m]
    return total, last


class FarTables(NamedTuple):
    """Everything the compiled walk reads, in one argument (numba takes named tuples)."""

    pressure: np.ndarray
    x0: float
    y0: float
    dx: float
    dy: float
    nbx: np.ndarray
    nby: np.ndarray
    offset: np.ndarray
    centre: np.ndarray
    half_diag: np.ndarray
    mass_abs: np.ndarray
    radial: np.ndarray
    weights: np.ndarray
    cell_weights: np.ndarray
    order: int
    kept: int
    power: int
    amp: float
    depth_scale: float
    second_term: float
    theta_max: float
    first_coef: float
    ratio_coef: float
    gegenbauer_max: np.ndarray


class _Scratch(NamedTuple):
    """Per-thread work arrays of the walk: the block stack, powers and counters."""

    st_level: np.ndarray
    st_j: np.ndarray
    st_i: np.ndarray
    e_pow: np.ndarray
    f_pow: np.ndarray
    w_pow: np.ndarray
    counts: np.ndarray


def far_tables(pyramid: "Pyramid") -> FarTables:
    """The :class:`FarTables` of a pyramid (arrays shared, not copied).

    The remainder after order `kept` (p + BOUND_ORDERS) is bounded with `first_coef`,
    `ratio_coef` (the series tail of :func:`tail_bound` at order `kept`) and
    `gegenbauer_max` (the Lagrange form, :func:`gegenbauer_max_table` at n = kept + 1).
    """
    grid, spec = pyramid.grid, pyramid.spec
    amp, power = _kernel_power(spec)
    kept = pyramid.order + BOUND_ORDERS
    return FarTables(grid.pressure, float(grid.x0), float(grid.y0), float(grid.dx),
                     float(grid.dy), pyramid.nbx, pyramid.nby, pyramid.offset, pyramid.centre,
                     pyramid.half_diag, pyramid.mass_abs, pyramid.radial, pyramid.weights,
                     pyramid.cell_weights, int(pyramid.order), kept, int(power), float(amp),
                     float(spec.depth_scale), float(spec.second_term),
                     float(theta_limit(pyramid.order, power)),
                     float(math.comb(kept + power, power - 1)),
                     (kept + 1 + power) / (kept + 2),
                     gegenbauer_max_table(kept + 1, power))


@numba.njit(cache=True)
def _remainder_factor(r2, h, c, rho, t):
    # max over the sources of a block of |remainder after order kept| / |s|^(kept+1) (times
    # A c^(k-2)): the smaller of the series tail and the Lagrange form (docs/method-farfield.md)
    n = t.kept + 1 + t.power
    r = math.sqrt(r2)
    theta = h / r
    series = math.inf
    ratio = 1.0 - theta * t.ratio_coef
    if ratio > 0.0:
        series = t.first_coef / (ratio * r ** n)
    near = max(rho - h, 0.0)
    r_min2 = near * near + c * c
    if r_min2 <= 0.0:
        return series
    wide = rho + h
    tau = wide / math.sqrt(wide * wide + c * c)
    nodes = t.gegenbauer_max.size - 1
    k = min(nodes, int(math.ceil(tau * nodes)))
    lagrange = t.gegenbauer_max[k] / math.sqrt(r_min2) ** n
    return min(series, lagrange)


@numba.njit(cache=True)
def _walk(px, py, z, delta, t, s):
    """One walk for one point: (Δσz, certified error bound) with acceptance threshold delta
    (t: the :class:`FarTables`, s: the :class:`_Scratch` arrays).  The bound is
    |Σ terms of orders p+1..kept| + Σ bounds of the remainders after them, over accepted
    blocks."""
    pressure, x0, y0, dx, dy = t.pressure, t.x0, t.y0, t.dx, t.dy
    nbx, nby, offset, order, power, amp = t.nbx, t.nby, t.offset, t.order, t.power, t.amp
    st_level, st_j, st_i, counts = s.st_level, s.st_j, s.st_i, s.counts
    depth_scale, theta_max = t.depth_scale, t.theta_max
    c = depth_scale * z
    c_pow = c if power == 3 else c * c * c  # c^(k-2)
    cell_half = 0.5 * math.hypot(dx, dy)
    cell_radial = cell_half ** (t.kept + 1) * dx * dy
    top = nbx.size - 1
    st_level[0], st_j[0], st_i[0] = top, 0, 0
    n = 1
    value, leading, rest = 0.0, 0.0, 0.0
    while n > 0:
        n -= 1
        lev, bj, bi = st_level[n], st_j[n], st_i[n]
        counts[2] += 1
        q, b = 0.0, 0
        if lev == 0:
            q = pressure[bj, bi]
            if q == 0.0:
                continue
            cx = x0 + (bi + 0.5) * dx
            cy = y0 + (bj + 0.5) * dy
            h, radial = cell_half, abs(q) * cell_radial
        else:
            b = offset[lev] + bj * nbx[lev] + bi
            if t.mass_abs[b] == 0.0:
                continue
            cx, cy, h, radial = t.centre[b, 0], t.centre[b, 1], t.half_diag[b], t.radial[b]
        dxp, dyp = px - cx, py - cy
        rho2 = dxp * dxp + dyp * dyp
        r2 = rho2 + c * c
        if h * h <= theta_max * theta_max * r2 and r2 > 0.0:
            err = amp * c_pow * radial * _remainder_factor(r2, h, c, math.sqrt(rho2), t)
            if err <= delta:
                w_row = t.cell_weights if lev == 0 else t.weights[b]
                series, last = _expansion(dxp, dyp, r2, w_row, s.e_pow, s.f_pow, s.w_pow,
                                          order, t.kept)
                r = math.sqrt(r2)
                scale = amp * c_pow / (r * r2 if power == 3 else r * r2 * r2)  # A c^(k-2)/R^k
                if lev == 0:
                    scale *= q
                if abs(scale * last) + err <= delta:
                    value += scale * series
                    leading += scale * last
                    rest += err
                    counts[1] += 1
                    continue
        if lev == 0:
            x1, x2 = x0 + bi * dx - px, x0 + (bi + 1) * dx - px
            y1, y2 = y0 + bj * dy - py, y0 + (bj + 1) * dy - py
            value += q * shared_rectangle(x1, x2, y1, y2, z, depth_scale, t.second_term)
            counts[0] += 1
            continue
        cnx, cny = nbx[lev - 1], nby[lev - 1]
        for cj in range(2 * bj, min(2 * bj + 2, cny)):
            for ci in range(2 * bi, min(2 * bi + 2, cnx)):
                st_level[n], st_j[n], st_i[n] = lev - 1, cj, ci
                n += 1
    return value, abs(leading) + rest


@numba.njit(parallel=True, cache=True)
def _far_kernel(points, t, tol, abs_floor, n_chunks, out, out_bound, out_work):
    n_points = points.shape[0]
    n_chunks = max(1, min(n_points, n_chunks))
    depth = 4 * t.nbx.size + 8
    for chunk in numba.prange(n_chunks):
        counts = np.zeros(3, np.int64)
        s = _Scratch(np.empty(depth, np.int64), np.empty(depth, np.int64),
                     np.empty(depth, np.int64), np.empty(t.kept + 1), np.empty(t.kept + 1),
                     np.empty(t.kept + 1), counts)
        for p in range(chunk * n_points // n_chunks, (chunk + 1) * n_points // n_chunks):
            px, py, z = points[p, 0], points[p, 1], abs(points[p, 2])
            counts[:] = 0
            delta = math.inf  # first walk: only the θ limit, gives the size of the answer
            for attempt in range(_MAX_RETRIES + 2):
                value, bound = _walk(px, py, z, delta, t, s)
                budget = tol * max(abs(value) - bound, abs_floor)
                if bound <= budget:
                    break
                if attempt == 0:
                    delta = _FIRST_SHARE * budget
                elif attempt < _MAX_RETRIES:
                    delta *= 0.5 * min(1.0, budget / bound)
                else:
                    delta = -1.0  # last resort: every cell summed exactly
            out[p] = value
            out_bound[p] = bound
            out_work[p, 0] = counts[0]
            out_work[p, 1] = counts[1]
            out_work[p, 2] = counts[2]


def _accuracy(tol, floor) -> tuple[float, float]:
    tol = positive(tol, "tol")
    if tol >= 1.0:
        raise InputError(f"must be below 1 (a relative error), got {tol!r}", argument="tol")
    floor = positive(floor, "floor")
    return tol, floor


def evaluate_pyramid(pyramid: Pyramid, points, *, tol: float = 1e-3, floor: float = 0.01,
                     return_bound: bool = False, return_work: bool = False):
    """Δσz (kPa) at points from a prebuilt :class:`Pyramid` (see :func:`vertical_stress_far`).

    With `return_work`, returns (values, bounds, work) where ``work[:, 0]`` counts the
    cells summed exactly and ``work[:, 1]`` the expanded blocks per point (all walks).

    Examples
    --------
    >>> pyr = build_pyramid(LoadGrid(np.full((8, 8), 50.0), 0.0, 0.0, 1.0, 1.0))
    >>> evaluate_pyramid(pyr, [[4.0, 4.0, 0.0]]).round(6).tolist()
    [50.0]
    """
    pts = points_array(points)
    tol, floor = _accuracy(tol, floor)
    abs_floor = floor * float(np.abs(pyramid.grid.pressure).max())
    out, bound = np.zeros(pts.shape[0]), np.zeros(pts.shape[0])
    work = np.zeros((pts.shape[0], 3), np.int64)
    if pts.shape[0]:
        _far_kernel(pts, far_tables(pyramid), tol, abs_floor, 8 * numba.get_num_threads(),
                    out, bound, work)
    if return_work:
        return out, bound, work
    return (out, bound) if return_bound else out


def vertical_stress_far(grid, points, method="boussinesq", poisson=None, *, tol: float = 1e-3,
                        floor: float = 0.01, order: int = DEFAULT_ORDER,
                        return_bound: bool = False):
    """Vertical stress increase Δσz (kPa) at points by the far-field method.

    Every returned value satisfies ``|error| <= tol · max(|Δσz|, floor · max|p|)``
    against exact summation (up to round-off), where max|p| is the largest absolute cell
    pressure: the relative error is at most `tol` wherever |Δσz| >= floor · max|p|.

    Parameters
    ----------
    grid : LoadGrid
        Surface pressure per cell (kPa), any sign.
    points : array_like, shape (N, 3) or (3,)
        x (m, east), y (m, north), depth (m, >= 0).
    method, poisson
        Stress distribution, as in :func:`fillstress.solve.vertical_stress`.
    tol : float
        Relative error allowed where |Δσz| >= floor · max|p| (default 1e-3).
    floor : float
        Fraction of the largest pressure below which `tol` is taken of that floor
        instead of Δσz (default 0.01).
    order : int
        Order of the moment expansion of far blocks (default 4).
    return_bound : bool
        Also return the certified bound of the error at each point (kPa).

    Returns
    -------
    numpy.ndarray, shape (N,), or (values, bounds)

    Examples
    --------
    >>> g = LoadGrid(np.full((16, 16), 100.0), 0.0, 0.0, 1.0, 1.0)
    >>> v, b = vertical_stress_far(g, [[8.0, 8.0, 4.0], [60.0, 8.0, 4.0]], return_bound=True)
    >>> bool(np.all(b <= 1e-3 * np.maximum(np.abs(v), 1.0)))
    True
    """
    return evaluate_pyramid(build_pyramid(grid, method, poisson, order=order), points,
                            tol=tol, floor=floor, return_bound=return_bound)


__all__ = ["Pyramid", "build_pyramid", "evaluate_pyramid", "vertical_stress_far",
           "tail_bound", "gegenbauer", "gegenbauer_max_table", "theta_limit", "pyramid_blocks", "DEFAULT_ORDER"]
