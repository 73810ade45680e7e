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

    |r - s|^-k = R^-k Σ_n (|s|/R)^n C_n^(k/2)(cos γ),     |C_n^(k/2)| <= C(n+k-1, k-1)

(A&S 22.14.2), so truncating after order p leaves at most
``A c^(k-2) M_abs R^-k T_p(θ)`` with θ = h/R (h: half-diagonal of the loaded part of the
block, R: 3-D distance from the point to its centre, M_abs = Σ|q|·area) and
``T_p(θ) = Σ_{n>p} C(n+k-1, k-1) θ^n``.  The per-block bounds of the accepted blocks are
summed for every point; a point whose sum exceeds ``tol · max(|Δσz|, floor · max|p|)`` is
walked again with a stricter acceptance threshold (at worst everything is summed
exactly), so the returned values carry that guarantee.
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
_FIRST_SHARE = 1.0 / 64.0  # first acceptance threshold as a share of the point's error budget


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
    weights: np.ndarray  # (n_blocks, n_terms)
    cell_weights: np.ndarray
    terms: np.ndarray

    @property
    def levels(self) -> int:
        return int(self.nbx.size)

    @property
    def nbytes(self) -> int:
        return int(self.centre.nbytes + self.half_diag.nbytes + self.mass_abs.nbytes
                   + self.weights.nbytes)


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


def _to_weights(moments: np.ndarray, terms: np.ndarray, factors: np.ndarray,
                idx: np.ndarray) -> np.ndarray:
    """Expansion weights W_t = factor_t · Σ_l C(m,l) M[i+2l, b+2m-2l] of each block."""
    out = np.zeros((moments.shape[0], len(terms)))
    for t, (i, b, m) in enumerate(terms):
        for l in range(m + 1):
            out[:, t] += math.comb(m, l) * moments[:, idx[i + 2 * l, b + 2 * m - 2 * l]]
        out[:, t] *= factors[t]
    return out


def build_pyramid(grid, method="boussinesq", poisson=None, *, order: int = DEFAULT_ORDER) -> Pyramid:
    """Aggregate a LoadGrid into the block pyramid used by :func:`vertical_stress_far`.

    Parameters
    ----------
    grid : LoadGrid
        Surface pressures (kPa).
    method, poisson
        Stress distribution, as in :func:`fillstress.solve.vertical_stress`.
    order : int
        Order p of the moment expansion, 0–8 (default 4).

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
    terms, factors = _term_table(order, power)
    idx = _moment_index(order)
    binom = np.array([[math.comb(a, i) for i in range(order + 1)] for a in range(order + 1)], float)
    unit_cell = _cell_moments(order, grid.dx, grid.dy)
    ny, nx = grid.shape
    # level 0 as flat arrays: cell boxes, masses and moments about each cell centre
    jj, ii = np.meshgrid(np.arange(ny), np.arange(nx), indexing="ij")
    lo = np.stack([grid.x0 + ii.ravel() * grid.dx, grid.y0 + jj.ravel() * grid.dy], axis=1)
    hi = lo + np.array([grid.dx, grid.dy])
    q = grid.pressure.ravel()
    mass = np.abs(q) * grid.cell_area
    moments = q[:, None] * unit_cell[None, :]
    shapes = _level_shapes(nx, ny)
    centres, halves, masses, weights = [], [], [], []
    for (cnx, cny), (pnx, pny) in zip(shapes[:-1], shapes[1:]):
        n = pnx * pny
        plo, phi = np.zeros((n, 2)), np.zeros((n, 2))
        pm, pabs = np.zeros((n, unit_cell.size)), np.zeros(n)
        _aggregate(lo, hi, moments, mass, cnx, cny, pnx, pny, idx, binom, order,
                   plo, phi, pm, pabs)
        centres.append(0.5 * (plo + phi))
        halves.append(0.5 * np.hypot(phi[:, 0] - plo[:, 0], phi[:, 1] - plo[:, 1]))
        masses.append(pabs)
        weights.append(_to_weights(pm, terms, factors, idx))
        lo, hi, moments, mass = plo, phi, pm, pabs
    counts = [bx * by for bx, by in shapes]
    offset = np.concatenate([[0, 0], np.cumsum(counts[1:])]).astype(np.int64)[:len(shapes)]
    cat = (lambda parts, width: np.concatenate(parts) if parts else np.zeros((0,) + width))
    return Pyramid(grid, spec, order,
                   np.array([s[0] for s in shapes], np.int64), np.array([s[1] for s in shapes], np.int64),
                   offset, cat(centres, (2,)), cat(halves, ()), cat(masses, ()),
                   cat(weights, (len(terms),)),
                   _to_weights(unit_cell[None, :], terms, factors, idx)[0], terms)


# --- the walk --------------------------------------------------------------------------
@numba.njit(cache=True)
def _tail(theta, order, first_coef, ratio_coef):
    # tail_bound in the walk: first_coef = C(p+k, k-1), ratio_coef = (p+1+k)/(p+2)
    ratio = 1.0 - theta * ratio_coef
    if ratio <= 0.0:
        return math.inf
    lead = theta
    for _ in range(order):
        lead *= theta
    return first_coef * lead / ratio


@numba.njit(cache=True)
def _expansion(dxp, dyp, r2, w_row, terms, e_pow, f_pow, w_pow, order):
    # Σ_t W_t e^i f^b w^m with e = d_x/R², f = d_y/R², w = 1/R²
    inv = 1.0 / r2
    e, f = dxp * inv, dyp * inv
    e_pow[0], f_pow[0], w_pow[0] = 1.0, 1.0, 1.0
    for t in range(1, order + 1):
        e_pow[t] = e_pow[t - 1] * e
        f_pow[t] = f_pow[t - 1] * f
        w_pow[t] = w_pow[t - 1] * inv
    total = 0.0
    t = 0
    for n in range(order + 1):  # same order as _term_table
        for m in range(n // 2 + 1):
            j = n - 2 * m
            part = 0.0
            for i in range(j + 1):
                part += w_row[t] * e_pow[i] * f_pow[j - i]
                t += 1
            total += part * w_pow[m]
    return total


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
    weights: np.ndarray
    cell_weights: np.ndarray
    terms: np.ndarray
    order: int
    power: int
    amp: float
    depth_scale: float
    second_term: float
    theta_max: float
    first_coef: float
    ratio_coef: float


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
    """The :class:`FarTables` of a pyramid (arrays shared, not copied)."""
    grid, spec = pyramid.grid, pyramid.spec
    amp, power = _kernel_power(spec)
    return FarTables(grid.pressure, float(grid.x0), float(grid.y0), float(grid.dx),
                     float(grid.dy), pyramid.nbx, pyramid.nby, pyramid.offset, pyramid.centre,
                     pyramid.half_diag, pyramid.mass_abs, pyramid.weights, pyramid.cell_weights,
                     pyramid.terms, int(pyramid.order), int(power), float(amp),
                     float(spec.depth_scale), float(spec.second_term),
                     float(theta_limit(pyramid.order, power)),
                     float(math.comb(pyramid.order + power, power - 1)),
                     (pyramid.order + 1 + power) / (pyramid.order + 2))


@numba.njit(cache=True)
def _walk(px, py, z, delta, t, s):
    """One walk for one point: (Δσz, summed error bound) with acceptance threshold delta
    (t: the :class:`FarTables`, s: the :class:`_Scratch` arrays)."""
    pressure, x0, y0, dx, dy = t.pressure, t.x0, t.y0, t.dx, t.dy
    nbx, nby, offset, order, power, amp = t.nbx, t.nby, t.offset, t.order, t.power, t.amp
    st_level, st_j, st_i, counts = s.st_level, s.st_j, s.st_i, s.counts
    depth_scale, theta_max = t.depth_scale, t.theta_max
    c = depth_scale * z
    c_pow = c if power == 3 else c * c * c  # c^(k-2)
    cell_half = 0.5 * math.hypot(dx, dy)
    top = nbx.size - 1
    st_level[0], st_j[0], st_i[0] = top, 0, 0
    n = 1
    value, bound = 0.0, 0.0
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
            h, m_abs = cell_half, abs(q) * dx * dy
        else:
            b = offset[lev] + bj * nbx[lev] + bi
            m_abs = t.mass_abs[b]
            if m_abs == 0.0:
                continue
            cx, cy, h = t.centre[b, 0], t.centre[b, 1], t.half_diag[b]
        dxp, dyp = px - cx, py - cy
        r2 = dxp * dxp + dyp * dyp + c * c
        if h * h <= theta_max * theta_max * r2 and r2 > 0.0:
            r = math.sqrt(r2)
            theta = h / r
            rk = r * r2 if power == 3 else r * r2 * r2  # R^k for k = 3 or 5
            err = amp * c_pow * m_abs / rk * _tail(theta, order, t.first_coef, t.ratio_coef)
            if err <= delta:
                w_row = t.cell_weights if lev == 0 else t.weights[b]
                series = _expansion(dxp, dyp, r2, w_row, t.terms, s.e_pow, s.f_pow, s.w_pow,
                                    order)
                if lev == 0:
                    series *= q
                value += amp * c_pow / rk * series
                bound += err
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
    return value, bound


@numba.njit(parallel=True, cache=True)
def _far_kernel(points, t, tol, abs_floor, n_chunks, out, out_bound, out_work):
    n_points = points.shape[0]
    n_chunks = max(1, min(n_points, n_chunks))
    depth = 4 * t.nbx.size + 8
    for chunk in numba.prange(n_chunks):
        counts = np.zeros(3, np.int64)
        s = _Scratch(np.empty(depth, np.int64), np.empty(depth, np.int64),
                     np.empty(depth, np.int64), np.empty(t.order + 1), np.empty(t.order + 1),
                     np.empty(t.order + 1), counts)
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
           "tail_bound", "theta_limit", "pyramid_blocks", "DEFAULT_ORDER"]
