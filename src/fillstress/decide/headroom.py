"""Headroom maps: the largest multiple of a template load that may be placed centred on each
plan cell before the first limit is reached.

Reciprocity makes the map exact and fast for stress limits. The Δσz at a receptor from the
template placed on cell c depends only on the offset between them, so one exact FFT slice
of the template itself (``solve.slices.SlicePlan``: the template correlated with the
unit-cell influence field) at the receptor's depth, on a lattice wide enough to hold every
offset, gives that receptor's Δσz from the template placed on every cell at once. Receptors
sharing a depth and a position within their cell share one FFT. The multiple at a cell is

    m(c) = min over receptors r with T_r(c) > 0 of (limit_r − current_r) / T_r(c)

with T_r(c) the template's Δσz at r. Settlement limits use a stated linearisation about the
current state (:func:`settlement_sensitivity`), and :func:`recheck_settlement` re-checks
chosen cells on the full nonlinear model.

Conventions: the template is an array of cell pressures (kPa) on the map's cell size;
"placed on cell c" means its cell ``[ty // 2, tx // 2]`` lies on c (for odd sizes the
template's centre is the centre of c). A multiple is inf where the template adds no stress
(below ``1e-12`` of its largest pressure, i.e. round-off) at any receptor, and 0 where it
loads a receptor already at or over its limit; the map never holds NaN.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Iterator

import numpy as np

from .._validate import finite_array, points_array, positive, whole_number
from ..errors import InputError
from ..grid import GridSpec, LoadGrid
from ..settlement import sublayer_settlement
from ..shapes.stockpile import pile_thickness
from ..solve import SlicePlan, vertical_stress
from .max_height import scale_at_limit, settlement_utilisation

_NO_STRESS = 1e-12          # template stress below this share of its peak pressure is round-off
_SENSITIVITY_STEP_KPA = 1e-3


@dataclass(frozen=True)
class HeadroomMap:
    """Largest multiple of the template at each plan cell, shape (ny, nx), row 0 south.

    ``governing`` is the index of the receptor that limits each cell (-1 where the multiple
    is inf); ``x``, ``y`` the cell centres (m).
    """

    multiple: np.ndarray
    governing: np.ndarray
    x: np.ndarray
    y: np.ndarray


def rectangle_template(size_x: float, size_y: float, pressure: float, dx: float, dy: float
                       ) -> np.ndarray:
    """Cell pressures (kPa) of a uniform rectangle `size_x` × `size_y` (m) centred on the
    centre cell of an odd-sized array of `dx` × `dy` cells; edge cells carry the covered
    share of `pressure` (the cell average, as bodies are put on the lattice).

    Examples
    --------
    >>> rectangle_template(3.0, 1.0, 100.0, 1.0, 1.0).tolist()
    [[100.0, 100.0, 100.0]]
    >>> rectangle_template(2.0, 1.0, 100.0, 1.0, 1.0).tolist()    # half cells at the ends
    [[50.0, 100.0, 50.0]]
    """
    size_x, size_y = positive(size_x, "size_x"), positive(size_y, "size_y")
    q, dx, dy = positive(pressure, "pressure"), positive(dx, "dx"), positive(dy, "dy")

    def covered(size, step):
        half = int(math.ceil(round((size / step - 1.0) / 2.0, 9)))
        lo = (np.arange(-half, half + 1) - 0.5) * step
        return np.clip(np.minimum(lo + step, size / 2) - np.maximum(lo, -size / 2), 0, None) / step

    return q * np.outer(covered(size_y, dy), covered(size_x, dx))


def pile_template(toe, repose_angle_deg: float, height: float, unit_weight: float,
                  dx: float, dy: float) -> np.ndarray:
    """Cell pressures (kPa) of a stockpile on `toe` (a polygon about the origin, m): sides at
    the repose angle from the toe (:func:`fillstress.shapes.stockpile.pile_thickness`),
    flat-topped at `height` (m), times `unit_weight` (kN/m³); on an odd-sized array of
    `dx` × `dy` cells whose centre cell is centred on the origin.

    Examples
    --------
    A 45° cone on a 6 m circle, capped at 2 m: about π·(3² + 3·1 + 1²)·2/3 = 27.2 m³.

    >>> import shapely
    >>> t = pile_template(shapely.Point(0, 0).buffer(3.0, quad_segs=64), 45.0, 2.0, 20.0,
    ...                   0.5, 0.5)
    >>> t.shape, round(float(t.sum()) * 0.25 / 20.0, 1)
    ((13, 13), 27.2)
    """
    dx, dy = positive(dx, "dx"), positive(dy, "dy")
    x0, y0, x1, y1 = toe.bounds
    nx = 2 * int(math.ceil(round(max(-x0, x1) / dx - 0.5, 9))) + 1
    ny = 2 * int(math.ceil(round(max(-y0, y1) / dy - 0.5, 9))) + 1
    spec = GridSpec(-nx * dx / 2, -ny * dy / 2, dx, dy, nx, ny)
    thickness = pile_thickness(toe, repose_angle_deg, spec, crest_height=height)
    return positive(unit_weight, "unit_weight") * thickness


def placed_template(template, spec, cell) -> LoadGrid:
    """The template as a LoadGrid placed on map cell ``cell = (row, col)`` of `spec`.

    Examples
    --------
    >>> s = GridSpec(0.0, 0.0, 2.0, 2.0, 10, 10)
    >>> g = placed_template(np.ones((3, 3)), s, (4, 6))
    >>> g.x0, g.y0, g.shape
    (10.0, 6.0, (3, 3))
    """
    t = _template(template)
    j, i = (int(v) for v in cell)
    return LoadGrid(t, spec.x0 + (i - t.shape[1] // 2) * spec.dx,
                    spec.y0 + (j - t.shape[0] // 2) * spec.dy, spec.dx, spec.dy,
                    getattr(spec, "crs", None))


def _template(template) -> np.ndarray:
    t = finite_array(template, "template", ndim=2)
    if t.size == 0 or np.any(t < 0) or not np.any(t > 0):
        raise InputError("must be a non-empty array of pressures >= 0 kPa, not all zero",
                         argument="template")
    return t


def _lattice(spec):
    if not isinstance(spec, (GridSpec, LoadGrid)):
        raise InputError(f"must be a GridSpec or LoadGrid, got {type(spec).__name__}",
                         argument="spec")
    return spec


def template_influence(template, spec, points, method="boussinesq", poisson=None, *,
                       workers=None) -> Iterator[tuple[int, np.ndarray]]:
    """Δσz (kPa) at each point from the template placed on every cell of `spec`.

    Yields ``(point index, field)`` with field of shape ``spec.shape`` (a read-only view);
    points sharing a depth and a position within their cell share one exact FFT slice.

    Parameters
    ----------
    template : array_like, shape (ty, tx)
        Cell pressures (kPa, >= 0) on the cell size of `spec`.
    spec : GridSpec or LoadGrid
        The map lattice.
    points : array_like, shape (N, 3)
        Receptor x, y (m) and depth (m, >= 0).
    method, poisson, workers
        As for :func:`fillstress.solve.stress_slices`.

    Examples
    --------
    >>> s = GridSpec(0.0, 0.0, 1.0, 1.0, 3, 1)
    >>> [f.round(6).tolist() for _, f in template_influence([[10.0]], s, [[0.5, 0.5, 0.0]])]
    [[[10.0, 0.0, 0.0]]]
    """
    t = _template(template)
    spec = _lattice(spec)
    pts = points_array(points)
    ny, nx = spec.shape
    ty, tx = t.shape
    col = np.floor((pts[:, 0] - spec.x0) / spec.dx).astype(np.int64)
    row = np.floor((pts[:, 1] - spec.y0) / spec.dy).astype(np.int64)
    offset = np.column_stack([pts[:, 0] - (spec.x0 + (col + 0.5) * spec.dx),
                              pts[:, 1] - (spec.y0 + (row + 0.5) * spec.dy)])
    # pad so that every (receptor − cell) offset of the map lies on the sample lattice
    pad_x = int(max(0, nx - 1 - col.min() - tx // 2, col.max() + tx // 2 - tx + 1))
    pad_y = int(max(0, ny - 1 - row.min() - ty // 2, row.max() + ty // 2 - ty + 1))
    keys = np.round(offset, 9)
    for key in np.unique(keys, axis=0):
        members = np.flatnonzero(np.all(keys == key, axis=1))
        plan = SlicePlan(t, spec.dx, spec.dy, method, poisson, offset=tuple(offset[members[0]]),
                         pad_cells=(pad_x, pad_y), workers=workers)
        depths = pts[members, 2]
        for depth in np.unique(depths):
            sliced = plan.at_depth(depth)
            sliced.flags.writeable = False
            for p in members[depths == depth]:
                l0, k0 = row[p] + ty // 2 + pad_y, col[p] + tx // 2 + pad_x
                yield int(p), sliced[l0 - ny + 1:l0 + 1, k0 - nx + 1:k0 + 1][::-1, ::-1]


def _least_multiple(shape, allowance, responses, peak) -> tuple[np.ndarray, np.ndarray]:
    """Running minimum over receptors of allowance / response where the response is real."""
    best = np.full(shape, np.inf)
    who = np.full(shape, -1, dtype=np.int64)
    ratio = np.empty(shape)
    for p, response in responses:
        loaded = response > _NO_STRESS * peak
        ratio.fill(np.inf)
        np.divide(max(allowance[p], 0.0), response, out=ratio, where=loaded)
        better = ratio < best
        best[better] = ratio[better]
        who[better] = p
    return best, who


def _receptor_arrays(limit, current, n, what):
    lim = np.broadcast_to(finite_array(limit, f"limit_{what}"), (n,))
    cur = np.broadcast_to(finite_array(current, f"current_{what}"), (n,))
    if np.any(lim <= 0):
        raise InputError("must be > 0 at every receptor", argument=f"limit_{what}")
    return lim - cur


def _map(spec, best, who) -> HeadroomMap:
    return HeadroomMap(best, who, spec.x_centres, spec.y_centres)


def headroom_map(template, spec, points, limit_kpa, current_kpa=0.0, method="boussinesq",
                 poisson=None, *, workers=None) -> HeadroomMap:
    """Largest multiple of `template` placeable on each cell before a Δσz limit is reached.

    Exact (elastic superposition; FFT slices exact to round-off). A stress-ratio limit
    Δσz/σ'v0 <= r is the Δσz limit ``r·σ'v0`` at that point.

    Parameters
    ----------
    template, spec, points, method, poisson, workers
        As for :func:`template_influence`.
    limit_kpa : float or array_like, shape (N,)
        Largest Δσz (kPa, > 0) allowed at each point.
    current_kpa : float or array_like, shape (N,)
        Δσz (kPa) from the loads already in place.

    Returns
    -------
    HeadroomMap

    Examples
    --------
    A 10 kPa cell beside a receptor limited to 5 kPa at the surface: on the receptor's own
    cell half the template may go (q inside the loaded cell), elsewhere any multiple.

    >>> s = GridSpec(0.0, 0.0, 1.0, 1.0, 3, 1)
    >>> headroom_map([[10.0]], s, [[0.5, 0.5, 0.0]], 5.0).multiple.tolist()
    [[0.5, inf, inf]]
    """
    t = _template(template)
    spec = _lattice(spec)
    pts = points_array(points)
    allowance = _receptor_arrays(limit_kpa, current_kpa, pts.shape[0], "kpa")
    fields = template_influence(t, spec, pts, method, poisson, workers=workers)
    return _map(spec, *_least_multiple(spec.shape, allowance, fields, t.max()))


def settlement_sensitivity(profile, z_mid, h, dsz_current, step_kpa=_SENSITIVITY_STEP_KPA
                           ) -> np.ndarray:
    """Settlement per unit added stress (m/kPa) of each sublayer about the current state.

    The loading-side derivative of the full model (``settlement.sublayer_settlement``) by a
    forward difference of `step_kpa` (default 1e-3 kPa, the tangent): Cr or
    Cc·h/((1+e0)·ln10·σ') on the e–log σ' law, mv·h or h/M on linear layers. A larger step
    gives the secant over that added stress instead (closer to the full model for added
    stresses of about that size, e.g. past σ'p; still a linearisation). This is the linearisation used by
    :func:`settlement_headroom_map`; it is exact for linear layers and, because the log law
    is concave, overestimates the settlement of a further load on the virgin branch (a safe
    map there) but underestimates it where the load carries a sublayer past σ'p from the
    recompression branch — re-check such places with :func:`recheck_settlement`.

    Parameters
    ----------
    profile : SoilProfile
    z_mid, h : array_like, shape (K,)
    dsz_current : array_like, shape (N, K)
        Δσz (kPa) of the loads in place at each receptor point and sublayer.
    step_kpa : float
        Added stress of the forward difference (> 0).

    Returns
    -------
    numpy.ndarray, shape (N, K)

    Examples
    --------
    >>> from fillstress.soil import SoilLayer, SoilProfile
    >>> p = SoilProfile([SoilLayer("silt", 0, 4, 19.0, mv_per_kpa=2e-4)], water_table_m=10)
    >>> settlement_sensitivity(p, [1.0, 3.0], [2.0, 2.0], [[50.0, 30.0]]).round(9).tolist()
    [[0.0004, 0.0004]]
    """
    now = np.atleast_2d(finite_array(dsz_current, "dsz_current"))
    step = positive(step_kpa, "step_kpa")
    base = sublayer_settlement(profile, z_mid, h, now)
    return (sublayer_settlement(profile, z_mid, h, now + step) - base) / step


def settlement_response(template, spec, xy, z_mid, sensitivity, method="boussinesq",
                        poisson=None, *, workers=None) -> np.ndarray:
    """Linearised settlement (m) of each receptor point from the template placed on every
    cell, shape (N, ny, nx): ``Σ_k sensitivity[n, k]·T_nk(c)`` with T_nk(c) the template's
    Δσz at the point's sublayer k (exact, by reciprocity).

    Parameters are as for :func:`settlement_headroom_map`.

    Examples
    --------
    >>> s = GridSpec(0.0, 0.0, 1.0, 1.0, 2, 1)
    >>> settlement_response([[10.0]], s, [[0.5, 0.5]], [0.0], [[1e-3]]).round(9).tolist()
    [[[0.01, 0.0]]]
    """
    t = _template(template)
    spec = _lattice(spec)
    plan_xy = finite_array(xy, "xy", ndim=2)
    z = np.atleast_1d(finite_array(z_mid, "z_mid"))
    sens = finite_array(sensitivity, "sensitivity", ndim=2)
    n, k = plan_xy.shape[0], z.size
    if plan_xy.shape[1] != 2 or sens.shape != (n, k):
        raise InputError(f"need xy (N, 2) and sensitivity (N, K) with K = {k} sublayers; got "
                         f"{plan_xy.shape} and {sens.shape}", argument="sensitivity")
    pts = np.column_stack([np.repeat(plan_xy, k, axis=0), np.tile(z, n)])
    total = np.zeros((n,) + spec.shape)
    for p, field in template_influence(t, spec, pts, method, poisson, workers=workers):
        total[p // k] += sens[p // k, p % k] * field
    return total


def settlement_headroom_map(template, spec, xy, z_mid, sensitivity, limit_m, current_m=0.0,
                            method="boussinesq", poisson=None, *, workers=None) -> HeadroomMap:
    """Linearised largest multiple of `template` on each cell before a settlement limit.

    The template's settlement at receptor n is taken as ``Σ_k sensitivity[n, k]·T_nk(c)``
    with T_nk(c) its Δσz at the receptor's sublayer k (exact, by reciprocity;
    :func:`settlement_response`); the multiple is ``(limit_n − current_n) / that``, least
    over receptors. A documented linearisation about the current state: see
    :func:`settlement_sensitivity`, and re-check with :func:`recheck_settlement`.

    Parameters
    ----------
    template, spec, method, poisson, workers
        As for :func:`template_influence`.
    xy : array_like, shape (N, 2)
        Plan position (m) of each settlement receptor point.
    z_mid : array_like, shape (K,)
        Sublayer mid-depths (m).
    sensitivity : array_like, shape (N, K)
        From :func:`settlement_sensitivity` (m/kPa).
    limit_m, current_m : float or array_like, shape (N,)
        Settlement limit (m, > 0) and present settlement (m) at each point.

    Examples
    --------
    >>> s = GridSpec(0.0, 0.0, 1.0, 1.0, 2, 1)
    >>> m = settlement_headroom_map([[10.0]], s, [[0.5, 0.5]], [0.0], [[1e-3]], 0.05)
    >>> m.multiple.round(9).tolist()        # 10 kPa · 1e-3 m/kPa = 10 mm per template
    [[5.0, inf]]
    """
    response = settlement_response(template, spec, xy, z_mid, sensitivity, method, poisson,
                                   workers=workers)
    return response_headroom_map(_lattice(spec), response, limit_m, current_m)


def response_headroom_map(spec, response, limit, current=0.0, *, two_sided=False
                          ) -> HeadroomMap:
    """Largest multiple on each cell before ``current_e + m·response_e(c)`` reaches `limit`
    for some e (one-sided), or ``|current_e + m·response_e(c)|`` does (`two_sided`, e.g. a
    relative rotation, which may turn either way); `governing` is that e.

    Examples
    --------
    >>> s = GridSpec(0.0, 0.0, 1.0, 1.0, 2, 1)
    >>> r = np.array([[[2.0, -1.0]]])
    >>> response_headroom_map(s, r, 1.0, 0.5).multiple.tolist()
    [[0.25, inf]]
    >>> response_headroom_map(s, r, 1.0, 0.5, two_sided=True).multiple.tolist()
    [[0.25, 1.5]]
    """
    spec = _lattice(spec)
    values = finite_array(response, "response", ndim=3)
    n = values.shape[0]
    if values.shape[1:] != spec.shape:
        raise InputError(f"must have shape (N, {spec.shape[0]}, {spec.shape[1]}), got "
                         f"{values.shape}", argument="response")
    lim = np.broadcast_to(finite_array(limit, "limit"), (n,))
    now = np.broadcast_to(finite_array(current, "current"), (n,))
    if np.any(lim <= 0):
        raise InputError("must be > 0 for every entry", argument="limit")
    peak = float(np.max(np.abs(values))) if values.size else 0.0
    if not two_sided:
        return _map(spec, *_least_multiple(spec.shape, lim - now, enumerate(values), peak))
    over = np.abs(now) >= lim                # already reached: no room either way
    rising = _least_multiple(spec.shape, np.where(over, 0.0, lim - now), enumerate(values), peak)
    falling = _least_multiple(spec.shape, np.where(over, 0.0, lim + now), enumerate(-values),
                              peak)
    better = falling[0] < rising[0]
    return _map(spec, np.where(better, falling[0], rising[0]),
                np.where(better, falling[1], rising[1]))


def norm_headroom_map(spec, response, limit: float, current=0.0) -> HeadroomMap:
    """Largest multiple on each cell before the length ``|current + m·response(c)|`` of a
    vector quantity linear in the load (e.g. a tilt plane's gradient, shape (D,)) reaches
    `limit`: the positive root of ``|r|²m² + 2(c·r)m + |c|² − limit² = 0``. 0 where
    ``|current| >= limit``, inf where the response is nil; `governing` is 0 (-1 where inf).

    Examples
    --------
    >>> s = GridSpec(0.0, 0.0, 1.0, 1.0, 2, 1)
    >>> r = np.array([[[3.0, 0.0]], [[4.0, 0.0]]])          # |r| = 5 on the first cell
    >>> norm_headroom_map(s, r, 10.0).multiple.tolist()
    [[2.0, inf]]
    >>> norm_headroom_map(s, r, 10.0, [0.0, 6.0]).multiple.round(6).tolist()  # 25m² + 48m = 64
    [[0.905905, inf]]
    """
    spec = _lattice(spec)
    values = finite_array(response, "response", ndim=3)
    if values.shape[1:] != spec.shape:
        raise InputError(f"must have shape (D, {spec.shape[0]}, {spec.shape[1]}), got "
                         f"{values.shape}", argument="response")
    lim = positive(limit, "limit")
    now = np.broadcast_to(finite_array(current, "current"), values.shape[:1])
    a = np.einsum("dyx,dyx->yx", values, values)
    b = np.einsum("d,dyx->yx", now, values)
    c = float(now @ now) - lim * lim
    peak = float(np.max(np.abs(values))) if values.size else 0.0
    moving = a > (_NO_STRESS * peak) ** 2
    multiple = np.full(spec.shape, np.inf)
    with np.errstate(invalid="ignore", divide="ignore"):
        root = (-b + np.sqrt(np.maximum(b * b - a * c, 0.0))) / a
    multiple[moving] = 0.0 if c >= 0 else root[moving]
    return _map(spec, multiple, np.where(np.isfinite(multiple), 0, -1))


def sparse_rows(operator: np.ndarray):
    """An operator from point values to a quantity's rows as a CSR matrix: its rows hold
    two or three non-zeros (a pair difference, an edge's β, a curvature), so applying it
    costs those terms, not every point of the receptor, per row.

    Examples
    --------
    >>> sparse_rows(np.array([[1.0, 0.0, -1.0]])).nnz
    2
    """
    from scipy.sparse import csr_array
    return csr_array(np.asarray(operator, float))


def apply_rows(rows, values: np.ndarray) -> np.ndarray:
    """``rows @ values`` over the leading axis of `values` (N, ...): shape (E, ...); equal
    to ``np.einsum("en,n...->e...", dense rows, values)`` to round-off.

    Examples
    --------
    >>> apply_rows(sparse_rows(np.array([[1.0, -1.0]])), np.array([[[3.0]], [[1.0]]])).tolist()
    [[[2.0]]]
    """
    flat = values.reshape(values.shape[0], -1)
    return np.asarray(rows @ flat).reshape((rows.shape[0],) + values.shape[1:])


def combination_headroom_map(spec, operator, response, current, limit: float, *,
                             norm: bool = False, cells_per_chunk: int = 4_000_000
                             ) -> HeadroomMap:
    """Largest multiple on each cell before a quantity linear in point values reaches `limit`:
    ``q = operator @ (current + m·response(c))``, with |q_e| <= limit for every row e
    (e.g. pair differences, a pipe's curvature; `governing` is that row) or, with `norm`,
    ``|q| <= limit`` (a tilt plane's gradient). Rows are taken in chunks of about
    `cells_per_chunk` values so that many rows (every pair of a large building) fit in memory.

    Parameters
    ----------
    spec : GridSpec or LoadGrid
    operator : array_like, shape (E, N)
    response : array_like, shape (N, ny, nx)
        Each point's value per unit multiple of the template placed on each cell.
    current : array_like, shape (N,)
        Each point's present value.
    limit : float
        Largest |q_e| (or |q|), > 0.

    Examples
    --------
    >>> s = GridSpec(0.0, 0.0, 1.0, 1.0, 2, 1)
    >>> r = np.array([[[0.01, 0.0]], [[0.0, 0.0]]])     # the first point settles 10 mm
    >>> m = combination_headroom_map(s, [[1.0, -1.0]], r, [0.0, 0.004], 0.02)
    >>> m.multiple.tolist(), m.governing.tolist()       # (20 + 4) / 10: s1 − s2 from −4 mm
    ([[2.4, inf]], [[0, -1]])
    """
    spec = _lattice(spec)
    op = sparse_rows(finite_array(operator, "operator", ndim=2))
    values = finite_array(response, "response", ndim=3)
    now = op @ np.broadcast_to(finite_array(current, "current"), values.shape[:1])
    if norm:
        return norm_headroom_map(spec, apply_rows(op, values), limit, now)
    step = max(1, cells_per_chunk // max(1, values[0].size))
    best, who = np.full(spec.shape, np.inf), np.full(spec.shape, -1, dtype=np.int64)
    for first in range(0, op.shape[0], step):
        part = slice(first, first + step)
        m = response_headroom_map(spec, apply_rows(op[part], values), limit,
                                  now[part], two_sided=True)
        better = m.multiple < best
        best[better], who[better] = m.multiple[better], m.governing[better] + first
    return _map(spec, best, who)


def lowest_cells(headroom: HeadroomMap, count: int = 5) -> np.ndarray:
    """(row, col) of the `count` cells with the smallest finite multiples, smallest first.

    Examples
    --------
    >>> m = HeadroomMap(np.array([[3.0, np.inf], [1.0, 2.0]]), None, None, None)
    >>> lowest_cells(m, 2).tolist()
    [[1, 0], [1, 1]]
    """
    count = whole_number(count, "count", minimum=1)
    flat = headroom.multiple.ravel()
    order = np.argsort(flat, kind="stable")[:count]
    order = order[np.isfinite(flat[order])]
    return np.column_stack(np.unravel_index(order, headroom.multiple.shape))


def recheck_cells(multiple, count: int, ceiling: float = np.inf) -> tuple[np.ndarray, np.ndarray]:
    """The cells of a (linearised) map to re-check on the full model: the lowest ⌈2·count/3⌉
    (the governing locations) and the rest spread evenly in rank over the other finite
    cells whose multiple is at most `ceiling` (so that the worst full/linearised ratio is
    also sampled away from the lowest cells).

    Returns ``(cells, lowest)``: (row, col) of each cell, shape (C, 2), and whether it is
    one of the lowest (True) or a spread cell (False); lowest first, then by multiple.

    Examples
    --------
    >>> m = np.array([[1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, np.inf]])
    >>> cells, lowest = recheck_cells(m, 3)
    >>> cells[:, 1].tolist(), lowest.tolist()      # 2 lowest, 1 spread up to the largest
    ([0, 1, 6], [True, True, False])
    >>> recheck_cells(m, 3, ceiling=4.0)[0][:, 1].tolist()
    [0, 1, 3]
    """
    count = whole_number(count, "count", minimum=0)
    values = np.asarray(multiple, dtype=float)
    flat = values.ravel()
    order = np.argsort(flat, kind="stable")
    order = order[np.isfinite(flat[order])]
    n_low = min(len(order), -(-2 * count // 3))
    rest = order[n_low:]
    rest = rest[flat[rest] <= ceiling]
    n_spread = min(len(rest), count - n_low)
    # evenly in rank above the lowest, up to the largest (rest is in ascending order)
    ranks = np.unique(np.round(np.arange(1, n_spread + 1) / max(n_spread, 1)
                               * (len(rest) - 1)).astype(int))
    chosen = np.concatenate([order[:n_low], rest[ranks] if n_spread else rest[:0]])
    cells = np.column_stack(np.unravel_index(chosen, values.shape)).reshape(-1, 2)
    return cells, np.arange(len(chosen)) < n_low


def scaled_by_rechecks(linearised, cells, full, tolerance: float = 0.01
                       ) -> tuple[np.ndarray, float, float]:
    """A settlement map made safe by its re-checks: where the full model allows less than
    the linearisation at some re-checked cell by more than `tolerance` (relative), every
    cell is scaled by the worst ratio full / linearised found, and each re-checked cell
    takes its full-model value.

    Returns ``(map, factor, worst)``: the map, the factor applied (1.0 when none) and the
    worst ratio among the re-checks (nan when none is finite). The scaling is a correction,
    not a bound: a cell between re-checks may still be worse than the worst re-checked one.

    Examples
    --------
    >>> lin = np.array([[2.0, 4.0, 8.0]])
    >>> m, factor, worst = scaled_by_rechecks(lin, [[0, 0], [0, 2]], [1.5, 8.8])
    >>> m.tolist(), factor, worst
    ([[1.5, 3.0, 8.8]], 0.75, 0.75)
    >>> scaled_by_rechecks(lin, [[0, 0]], [2.01])[1:]      # safe: no scaling
    (1.0, 1.005)
    """
    lin = np.asarray(linearised, dtype=float)
    rows = np.asarray(cells, dtype=np.int64).reshape(-1, 2)
    at = (rows[:, 0], rows[:, 1])
    full = np.asarray(full, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.where(np.isfinite(lin[at]) & np.isfinite(full) & (lin[at] > 0),
                         full / lin[at], np.nan)
    worst = float(np.nanmin(ratio)) if np.isfinite(ratio).any() else math.nan
    factor = worst if worst < 1.0 - tolerance else 1.0
    out = lin * factor
    out[at] = np.where(np.isfinite(full), full, out[at])
    return out, factor, worst


def recheck_settlement(template, spec, cells, xy, profile, z_mid, h, dsz_current, limit_m,
                       method="boussinesq", poisson=None, *, rtol=1e-6) -> np.ndarray:
    """Full-model multiple of `template` at chosen cells: the template is placed for real
    (direct solver at every receptor sublayer) and the multiple at which the first point
    reaches its settlement limit is found on the nonlinear settlement
    (:func:`fillstress.decide.max_height.scale_at_limit`).

    Parameters
    ----------
    cells : array_like of int, shape (C, 2)
        (row, col) of the map cells, e.g. from :func:`lowest_cells`.
    xy, z_mid, h, dsz_current, limit_m
        Receptor plan points (N, 2), sublayers (K,), the Δσz in place (N, K) and the
        settlement limits (N,), as for :func:`settlement_sensitivity`.

    Returns
    -------
    numpy.ndarray, shape (C,)
        The multiple at each cell (inf when the limit is never reached).

    Examples
    --------
    On a linear (mv) layer the linearisation is exact, so both answers agree:

    >>> from fillstress.soil import SoilLayer, SoilProfile
    >>> p = SoilProfile([SoilLayer("silt", 0, 4, 19.0, mv_per_kpa=2e-4)], water_table_m=10)
    >>> s, xy, z, h = GridSpec(0.0, 0.0, 1.0, 1.0, 4, 1), [[0.5, 0.5]], [1.0, 3.0], [2.0, 2.0]
    >>> sens = settlement_sensitivity(p, z, h, [[0.0, 0.0]])
    >>> lin = settlement_headroom_map([[10.0]], s, xy, z, sens, 0.002).multiple[0, :2]
    >>> full = recheck_settlement([[10.0]], s, [[0, 0], [0, 1]], xy, p, z, h, [[0.0, 0.0]],
    ...                           0.002, rtol=1e-12)
    >>> np.allclose(lin, full, rtol=1e-6), bool(lin[0] < lin[1])
    (True, True)
    """
    t = _template(template)
    spec = _lattice(spec)
    plan_xy = finite_array(xy, "xy", ndim=2)
    z = np.atleast_1d(finite_array(z_mid, "z_mid"))
    pts = np.column_stack([np.repeat(plan_xy, z.size, axis=0), np.tile(z, plan_xy.shape[0])])
    cell_rows = np.asarray(cells, dtype=np.int64).reshape(-1, 2)
    out = np.empty(cell_rows.shape[0])
    for c, cell in enumerate(cell_rows):
        added = vertical_stress(placed_template(t, spec, cell), pts, method, poisson)
        f = settlement_utilisation(profile, z, h, added.reshape(plan_xy.shape[0], z.size),
                                   limit_m, dsz_current)
        out[c] = scale_at_limit(f, rtol=rtol).scale
    return out
