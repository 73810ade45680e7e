"""What settlement means for buildings and pipes: tilt, relative rotation (angular
distortion) and deflection ratio as defined by Burland & Wroth (1974), checked against the
limits of Bjerrum (1963) and Skempton & MacDonald (1956); differential settlement, angular
change and curvature along pipes.

Definitions (Burland & Wroth 1974), settlement s positive down:

- tilt ω: the rigid-body rotation of the whole building, here the slope of the least-squares
  plane through its settlement points (reported apart, not a distortion);
- rotation θ of the line joining two points, and the relative rotation (angular distortion)
  β = θ − ω, the rotation of that line relative to the tilt; along a wall with the plane's
  slope ω_w in the wall's direction, β_i = (s_j − s_i)/L_ij − ω_w for neighbouring points;
- relative deflection Δ: the largest displacement of the wall's settlement profile from the
  straight line joining its ends (positive: sagging, the middle settles more), and the
  deflection ratio Δ/L with L the wall length.

Inputs are plain arrays in SI units (m, kPa) with one value per sample point; results are
frozen dataclasses with an ``as_row()`` giving a flat dict (column names carry SI unit
suffixes) for CSV writers.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._validate import finite_array, positive
from .errors import InputError

# Bjerrum (1963), limiting angular distortions, as reproduced in standard foundation texts.
BJERRUM_1963_LIMITS = {
    "no_cracking": 1.0 / 500.0,          # safe limit where no cracking is acceptable
    "panel_wall_cracking": 1.0 / 300.0,  # first cracking of panel walls expected
    "structural_damage": 1.0 / 150.0,    # structural damage of general buildings expected
}
# Skempton & MacDonald (1956), angular distortion limits from observed damage (as reproduced
# in standard foundation texts; recalled from memory).
SKEMPTON_MACDONALD_1956_LIMITS = {
    "sm_cracking": 1.0 / 300.0,          # cracking of panel walls and partitions
    "sm_structural_damage": 1.0 / 150.0,  # structural damage
}
DEFAULT_LIMITS = {**BJERRUM_1963_LIMITS, **SKEMPTON_MACDONALD_1956_LIMITS}
_COLLINEAR_RATIO = 1e-9
_ON_WALL_M = 1e-6


# --- adjacency ------------------------------------------------------------------------
def _plan_points(xy) -> np.ndarray:
    arr = finite_array(xy, "xy")
    if arr.ndim != 2 or arr.shape[1] != 2 or arr.shape[0] == 0:
        raise InputError(f"must have shape (N, 2) for plan x, y with N >= 1, got {arr.shape}",
                         argument="xy")
    return arr


def _is_collinear(xy: np.ndarray) -> bool:
    centred = xy - xy.mean(axis=0)
    sv = np.linalg.svd(centred, compute_uv=False)
    return sv.size < 2 or sv[1] <= _COLLINEAR_RATIO * max(sv[0], 1e-300)


def adjacent_pairs(xy) -> np.ndarray:
    """Index pairs of neighbouring plan points: the edges of their Delaunay triangulation.

    Points on one line are joined in order along it; one point has no pairs.

    Parameters
    ----------
    xy : array_like, shape (N, 2)

    Returns
    -------
    ndarray of int, shape (P, 2), each row ``i < j``, rows sorted.

    Examples
    --------
    >>> adjacent_pairs([[0, 0], [1, 0], [0, 1]]).tolist()
    [[0, 1], [0, 2], [1, 2]]
    >>> adjacent_pairs([[2, 2], [0, 0], [1, 1]]).tolist()    # collinear: along the line
    [[0, 2], [1, 2]]
    """
    pts = _plan_points(xy)
    n = pts.shape[0]
    if n < 2:
        return np.zeros((0, 2), dtype=int)
    if n == 2 or _is_collinear(pts):
        centred = pts - pts.mean(axis=0)
        axis = np.linalg.svd(centred, full_matrices=False)[2][0]
        order = np.argsort(centred @ axis, kind="stable")
        edges = np.column_stack([order[:-1], order[1:]])
    else:
        from scipy.spatial import Delaunay
        tri = Delaunay(pts - pts.min(axis=0)).simplices   # local origin: state-plane digits
        edges = np.concatenate([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [0, 2]]])
    edges = np.sort(edges, axis=1)
    return np.unique(edges, axis=0)


def _check_pairs(pairs, n: int) -> np.ndarray:
    arr = np.asarray(pairs)
    if arr.size == 0:
        return np.zeros((0, 2), dtype=int)
    if arr.ndim != 2 or arr.shape[1] != 2 or not np.issubdtype(arr.dtype, np.integer):
        raise InputError(f"must be integer index pairs of shape (P, 2), got {arr.dtype} {arr.shape}",
                         argument="pairs")
    if arr.min() < 0 or arr.max() >= n:
        raise InputError(f"indices must lie in 0 … {n - 1}, got {arr.min()} … {arr.max()}",
                         argument="pairs")
    if np.any(arr[:, 0] == arr[:, 1]):
        raise InputError("a pair joins a point to itself", argument="pairs")
    return arr


# --- buildings ------------------------------------------------------------------------
@dataclass(frozen=True)
class WallDistortion:
    """Burland & Wroth (1974) measures along one wall line (SI units; ratios dimensionless).

    ``tilt_along`` is the building's tilt ω in the wall's direction (start → end);
    ``relative_rotation`` the largest |β| between neighbouring points, between
    ``rotation_points``; ``relative_deflection_m`` Δ (positive sagging, negative hogging)
    and ``deflection_ratio`` Δ/L.
    """

    wall: str
    length_m: float
    n_points: int
    tilt_along: float
    relative_rotation: float
    rotation_points: tuple[str, str] | None
    relative_deflection_m: float
    deflection_ratio: float

    def as_row(self) -> dict:
        a, b = self.rotation_points or ("", "")
        return {"wall": self.wall, "length_m": self.length_m, "n_points": self.n_points,
                "tilt_along": self.tilt_along, "relative_rotation": self.relative_rotation,
                "rotation_point_a": a, "rotation_point_b": b,
                "relative_deflection_m": self.relative_deflection_m,
                "deflection_ratio": self.deflection_ratio}


@dataclass(frozen=True)
class BuildingSettlement:
    """Settlement summary of one building (SI units: m; distortions are dimensionless).

    ``angular_distortion`` is the largest relative rotation β (Burland & Wroth 1974: the
    rotation between neighbouring points less the rigid-body tilt), found between
    ``distortion_points`` ``distortion_span_m`` apart: along the wall lines when ``walls``
    are given, else over neighbouring point pairs. ``tilt`` is the slope of the best-fit
    plane (rigid-body tilt ω), reported apart. ``deflection_ratio`` is the largest |Δ/L| over
    the walls (signed: + sagging). ``exceeded`` lists the limits reached (β >= limit), most
    severe first, ``worst_limit`` the most severe (largest) of them ("" when none);
    ``limits_checked`` names every limit tried.
    """

    receptor_id: str
    n_points: int
    settlement_max_m: float
    settlement_min_m: float
    differential_m: float
    angular_distortion: float
    distortion_points: tuple[str, str] | None
    distortion_span_m: float
    tilt: float
    exceeded: tuple[str, ...]
    worst_limit: str
    limits_checked: tuple[str, ...] = ()
    walls: tuple[WallDistortion, ...] = ()
    deflection_ratio: float = float("nan")

    def as_row(self) -> dict:
        """A flat dict for one CSV row; limits appear as ``exceeds_<name>`` booleans."""
        a, b = self.distortion_points or ("", "")
        row = {"receptor_id": self.receptor_id, "n_points": self.n_points,
               "settlement_max_m": self.settlement_max_m, "settlement_min_m": self.settlement_min_m,
               "differential_m": self.differential_m, "angular_distortion": self.angular_distortion,
               "distortion_point_a": a, "distortion_point_b": b,
               "distortion_span_m": self.distortion_span_m, "tilt": self.tilt,
               "deflection_ratio": self.deflection_ratio, "worst_limit": self.worst_limit}
        row.update({f"exceeds_{name}": name in self.exceeded for name in self.limits_checked})
        return row


def _plane_design(xy: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Design matrix of the least-squares tilt plane through the points (a line for
    collinear points, a constant for one point) and the plan directions of its slopes."""
    n = xy.shape[0]
    if n < 2:
        return np.ones((n, 1)), np.zeros((0, 2))
    centred = xy - xy.mean(axis=0)
    if _is_collinear(xy):
        axis = np.linalg.svd(centred, full_matrices=False)[2][0]
        return np.column_stack([np.ones(n), centred @ axis]), axis[None, :]
    return np.column_stack([np.ones(n), centred]), np.eye(2)


def _best_fit_slope(xy: np.ndarray, s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Residuals of `s` from its least-squares plane (a line for collinear points), and the
    plane's gradient (ds/dx, ds/dy)."""
    design, directions = _plane_design(xy)
    coef = np.linalg.lstsq(design, s, rcond=None)[0]
    return s - design @ coef, coef[1:] @ directions if len(directions) else np.zeros(2)


def _distortion_edges(pts: np.ndarray, n: int, pairs=None, outline=None):
    """(edges for β, the wall lines): along each wall line of `outline` (Burland & Wroth
    1974), else the given `pairs` or the Delaunay edges."""
    if outline is not None:
        lines = [w for w in wall_lines(outline, pts) if w.size >= 2]
        edges = np.array([(a, b) for w in lines for a, b in zip(w[:-1], w[1:])],
                         dtype=int).reshape(-1, 2)
        return edges, lines
    return (adjacent_pairs(pts) if pairs is None else _check_pairs(pairs, n)), []


def distortion_operator(xy, pairs=None, outline=None) -> tuple[np.ndarray, np.ndarray]:
    """The linear map from settlements to the relative rotation of each edge: ``R @ s``
    (shape (E,)) is β of every edge of :func:`building_settlement` (the residuals from the
    tilt plane differenced along the edge, over its length), so its angular distortion is
    ``max |R @ s|``. Returns ``(R, edges)`` with R of shape (E, N).

    Examples
    --------
    >>> xy = [[0, 0], [10, 0], [20, 0]]
    >>> R, edges = distortion_operator(xy)
    >>> float(np.abs(R @ [0.02, 0.03, 0.02]).max())      # 10 mm sag over 10 m: 1/1000
    0.001
    """
    pts = _plan_points(xy)
    n = pts.shape[0]
    edges, _ = _distortion_edges(pts, n, pairs, outline)
    design, _ = _plane_design(pts)
    residual = np.eye(n) - design @ np.linalg.pinv(design)
    length = np.hypot(*(pts[edges[:, 1]] - pts[edges[:, 0]]).T)
    if np.any(length <= 0):
        raise InputError("two points share one plan position; remove duplicates", argument="xy")
    return (residual[edges[:, 1]] - residual[edges[:, 0]]) / length[:, None], edges


def tilt_operator(xy) -> np.ndarray:
    """The linear map from settlements to the tilt plane's gradient (ds/dx, ds/dy): ``G @ s``
    (shape (2,)) is the gradient :func:`building_settlement` fits, so its tilt ω is
    ``|G @ s|``. Returns G of shape (2, N) (zeros for one point).

    Examples
    --------
    >>> G = tilt_operator([[0, 0], [20, 0], [20, 10], [0, 10]])
    >>> float(np.hypot(*(G @ [0.01, 0.06, 0.06, 0.01])))      # 50 mm over 20 m: 1/400
    0.0025
    """
    pts = _plan_points(xy)
    design, directions = _plane_design(pts)
    if not len(directions):
        return np.zeros((2, pts.shape[0]))
    return directions.T @ np.linalg.pinv(design)[1:]


def _limits(limits) -> dict[str, float]:
    if limits is None:
        return dict(DEFAULT_LIMITS)
    if not isinstance(limits, dict) or not limits:
        raise InputError("must be a non-empty dict of name → angular distortion limit", argument="limits")
    return {str(k): positive(v, f"limits[{k!r}]") for k, v in limits.items()}


def wall_lines(outline, xy) -> list[np.ndarray]:
    """Indices of the points on each edge of a footprint outline, in order along the edge.

    Parameters
    ----------
    outline : array_like, shape (V, 2)
        Exterior ring vertices in order (the closing repeat optional).
    xy : array_like, shape (N, 2)
        Sample points; those within a micrometre of an edge belong to it (corners to both).

    Examples
    --------
    >>> wall_lines([[0, 0], [10, 0], [10, 5], [0, 5]],
    ...            [[0, 0], [10, 0], [10, 5], [0, 5], [5, 0], [5, 2]])[0].tolist()
    [0, 4, 1]
    """
    ring = _plan_points(outline)
    if len(ring) > 1 and np.allclose(ring[0], ring[-1]):
        ring = ring[:-1]
    pts = _plan_points(xy)
    walls = []
    for a, b in zip(ring, np.roll(ring, -1, axis=0)):
        edge = b - a
        length = float(np.hypot(*edge))
        if length <= _ON_WALL_M:
            continue
        along = (pts - a) @ edge / length
        off = np.abs((pts - a) @ np.array([-edge[1], edge[0]]) / length)
        on = np.nonzero((off <= _ON_WALL_M) & (along >= -_ON_WALL_M) & (along <= length + _ON_WALL_M))[0]
        walls.append(on[np.argsort(along[on], kind="stable")])
    return walls


def wall_distortion(name, xy, settlement, gradient, point_ids=None) -> WallDistortion:
    """Tilt along, relative rotation β and deflection ratio Δ/L of one wall line.

    Parameters
    ----------
    name : str
    xy : array_like, shape (N, 2), N >= 2
        Points in order along the wall (first and last are its ends).
    settlement : array_like, shape (N,)
    gradient : array_like, shape (2,)
        (ds/dx, ds/dy) of the building's best-fit plane (its rigid-body tilt).

    Examples
    --------
    A 20 m wall sagging 10 mm in the middle on an untilted building: Δ/L = 1/2000,
    β = 0.01/10 = 1/1000 on each half.

    >>> w = wall_distortion("north", [[0, 0], [10, 0], [20, 0]], [0.02, 0.03, 0.02], [0, 0])
    >>> round(1 / w.relative_rotation), round(1 / w.deflection_ratio)
    (1000, 2000)
    """
    pts = _plan_points(xy)
    s = np.atleast_1d(finite_array(settlement, "settlement"))
    if pts.shape[0] < 2 or s.shape != (pts.shape[0],):
        raise InputError(f"a wall needs >= 2 points with one settlement each, got {pts.shape[0]} "
                         f"points and {s.size} values", argument="settlement")
    ids = [str(i) for i in range(s.size)] if point_ids is None else [str(p) for p in point_ids]
    g = np.asarray(gradient, dtype=float)
    chord = pts[-1] - pts[0]
    length = float(np.hypot(*chord))
    if length <= 0:
        raise InputError(f"wall {name!r} has zero length", argument="xy")
    step = np.diff(pts, axis=0)
    span = np.hypot(*step.T)
    if np.any(span <= 0):
        raise InputError(f"wall {name!r} has two points at one position", argument="xy")
    beta = np.diff(s) / span - step @ g / span
    k = int(np.argmax(np.abs(beta)))
    along = (pts - pts[0]) @ chord / length
    deviation = s - (s[0] + (s[-1] - s[0]) * along / length)
    j = int(np.argmax(np.abs(deviation)))
    return WallDistortion(
        wall=str(name), length_m=length, n_points=int(s.size),
        tilt_along=float(chord @ g / length), relative_rotation=float(abs(beta[k])),
        rotation_points=(ids[k], ids[k + 1]), relative_deflection_m=float(deviation[j]),
        deflection_ratio=float(deviation[j] / length))


def building_settlement(receptor_id, xy, settlement, point_ids=None, pairs=None,
                        limits: dict | None = None, outline=None) -> BuildingSettlement:
    """Settlement range, tilt, relative rotation (angular distortion) and deflection ratio.

    Parameters
    ----------
    receptor_id : str
        The building's id, carried into the result and its table rows.
    xy : array_like, shape (N, 2)
        Plan positions (m) of the building's sample points.
    settlement : array_like, shape (N,)
        Settlement (m, positive down) at each point.
    point_ids : sequence of str, optional
        Names of the points for the report; default "0", "1", …
    pairs : array_like of int, shape (P, 2), optional
        Neighbouring point pairs for β when no `outline` is given; default the Delaunay edges
        (`adjacent_pairs`).
    limits : dict, optional
        Name → limiting angular distortion; default Bjerrum (1963) and Skempton & MacDonald
        (1956), `DEFAULT_LIMITS`.
    outline : array_like, shape (V, 2), optional
        Footprint exterior ring: β and Δ/L are then taken along each wall line (the points
        on each edge, `wall_lines`), as Burland & Wroth (1974) define them.

    Returns
    -------
    BuildingSettlement
        Largest and smallest settlement, differential settlement, tilt, angular
        distortion β with the pair that gives it, deflection ratio and the limits each
        exceeds.

    Examples
    --------
    A rigidly tilting building has no distortion, only tilt (1/400 here):

    >>> r = building_settlement("shed", [[0, 0], [20, 0], [20, 10], [0, 10]],
    ...                         [0.01, 0.06, 0.06, 0.01])
    >>> round(r.angular_distortion, 12), round(1 / r.tilt)
    (0.0, 400)
    """
    pts = _plan_points(xy)
    s = np.atleast_1d(finite_array(settlement, "settlement"))
    if s.shape != (pts.shape[0],):
        raise InputError(f"must have one value per point ({pts.shape[0]}), got shape {s.shape}",
                         argument="settlement")
    ids = [str(i) for i in range(s.size)] if point_ids is None else [str(p) for p in point_ids]
    if len(ids) != s.size:
        raise InputError(f"must name each of the {s.size} points, got {len(ids)}", argument="point_ids")
    lim = _limits(limits)
    residual, gradient = _best_fit_slope(pts, s)
    edges, lines = _distortion_edges(pts, s.size, pairs, outline)
    walls = tuple(wall_distortion(f"{ids[w[0]]}–{ids[w[-1]]}", pts[w], s[w], gradient,
                                  [ids[i] for i in w]) for w in lines)
    distortion, worst_pair, span = _largest_distortion(pts, residual, edges)
    exceeded = tuple(name for name, v in sorted(lim.items(), key=lambda kv: kv[1], reverse=True)
                     if distortion >= v * (1 - 1e-12))      # reached, allowing for rounding
    worst = max(exceeded, key=lambda name: lim[name]) if exceeded else ""
    deflection = max((w.deflection_ratio for w in walls), key=abs, default=float("nan"))
    return BuildingSettlement(
        receptor_id=str(receptor_id), n_points=int(s.size),
        settlement_max_m=float(s.max()), settlement_min_m=float(s.min()),
        differential_m=float(s.max() - s.min()), angular_distortion=distortion,
        distortion_points=None if worst_pair is None else (ids[worst_pair[0]], ids[worst_pair[1]]),
        distortion_span_m=span, tilt=float(np.hypot(*gradient)),
        exceeded=exceeded, worst_limit=worst, limits_checked=tuple(lim), walls=walls,
        deflection_ratio=float(deflection))


def _largest_distortion(pts, values, edges):
    """Largest |Δ residual| / distance over `edges`: the relative rotation β = θ − ω, since
    the residuals from the tilt plane differ from s by exactly ω's share of each pair."""
    if edges.shape[0] == 0:
        return 0.0, None, 0.0
    length = np.hypot(*(pts[edges[:, 1]] - pts[edges[:, 0]]).T)
    if np.any(length <= 0):
        i, j = edges[np.argmax(length <= 0)]
        raise InputError(f"points {i} and {j} share one plan position; remove duplicates",
                         argument="xy")
    ratio = np.abs(values[edges[:, 1]] - values[edges[:, 0]]) / length
    k = int(np.argmax(ratio))
    return float(ratio[k]), (int(edges[k, 0]), int(edges[k, 1])), float(length[k])


# --- pipes ----------------------------------------------------------------------------
@dataclass(frozen=True)
class PipeSettlement:
    """Settlement profile and summary of one pipe (SI: m, kPa).

    ``chainage_m`` and ``settlement_m`` are the profile sorted by chainage.
    ``differential_max_m`` is the largest |s_i − s_j| over point pairs at most
    ``differential_length_m`` apart in chainage, between chainages ``differential_between_m``.
    ``gradient_max`` is the largest |Δs| / Δchainage between consecutive points;
    ``angular_change_max`` the largest change of that slope at a point (rad), and
    ``curvature_max_per_m`` the largest |d²s/dx²| (second difference on the chainages), at
    ``chainage_at_curvature_max_m`` (NaN for fewer than three points).
    """

    receptor_id: str
    n_points: int
    chainage_m: np.ndarray
    settlement_m: np.ndarray
    settlement_max_m: float
    chainage_at_max_m: float
    settlement_min_m: float
    differential_length_m: float
    differential_max_m: float
    differential_between_m: tuple[float, float] | None
    gradient_max: float
    dsz_crown_max_kpa: float
    chainage_at_dsz_max_m: float
    angular_change_max: float = float("nan")
    curvature_max_per_m: float = float("nan")
    chainage_at_curvature_max_m: float = float("nan")

    def as_row(self) -> dict:
        """A flat dict for one CSV row (the profile arrays left out)."""
        a, b = self.differential_between_m or (float("nan"), float("nan"))
        return {"receptor_id": self.receptor_id, "n_points": self.n_points,
                "settlement_max_m": self.settlement_max_m, "chainage_at_max_m": self.chainage_at_max_m,
                "settlement_min_m": self.settlement_min_m,
                "differential_length_m": self.differential_length_m,
                "differential_max_m": self.differential_max_m,
                "differential_from_chainage_m": a, "differential_to_chainage_m": b,
                "gradient_max": self.gradient_max, "dsz_crown_max_kPa": self.dsz_crown_max_kpa,
                "chainage_at_dsz_max_m": self.chainage_at_dsz_max_m,
                "angular_change_max": self.angular_change_max,
                "curvature_max_per_m": self.curvature_max_per_m,
                "chainage_at_curvature_max_m": self.chainage_at_curvature_max_m,
                "curvature_radius_min_m": (1.0 / self.curvature_max_per_m
                                           if self.curvature_max_per_m > 0 else float("inf"))}

    def profile_rows(self) -> list[dict]:
        """One dict per point along the pipe: chainage and settlement."""
        return [{"receptor_id": self.receptor_id, "chainage_m": float(c), "settlement_m": float(s)}
                for c, s in zip(self.chainage_m, self.settlement_m)]


def largest_differential_within(chainage, settlement, length_m) -> tuple[float, tuple[int, int] | None]:
    """Largest |s_i − s_j| over pairs with |chainage_i − chainage_j| <= `length_m`.

    Parameters
    ----------
    chainage : array_like, shape (N,), strictly increasing
    settlement : array_like, shape (N,)
    length_m : float

    Returns
    -------
    (float, (i, j) or None)
        The differential (m) and the indices of the pair, i < j.

    Examples
    --------
    >>> largest_differential_within([0, 5, 10, 15], [0.00, 0.01, 0.05, 0.06], 5.0)
    (0.04, (1, 2))
    """
    ch = np.atleast_1d(finite_array(chainage, "chainage"))
    s = np.atleast_1d(finite_array(settlement, "settlement"))
    length = positive(length_m, "length_m")
    if ch.ndim != 1 or s.shape != ch.shape:
        raise InputError(f"chainage {ch.shape} and settlement {s.shape} must be matching 1-D arrays",
                         argument="settlement")
    if np.any(np.diff(ch) <= 0):
        raise InputError("chainage must be strictly increasing", argument="chainage")
    ends = np.searchsorted(ch, ch + _reach(length), side="right")
    # the window of point i is s[i:ends[i]] (ends[i] > i): its spread by reduceat over the
    # bounds (i, ends[i]) interleaved, one padding value so that ends[i] = N is a valid index
    bounds = np.column_stack([np.arange(ch.size), ends]).ravel()
    padded = np.append(s, 0.0)
    spread = (np.maximum.reduceat(padded, bounds)[::2]
              - np.minimum.reduceat(padded, bounds)[::2])
    i = int(np.argmax(spread))                     # the first window with the largest spread
    if spread[i] <= 0.0:
        return 0.0, None
    window = s[i:ends[i]]
    hi, lo = int(np.argmax(window)), int(np.argmin(window))
    return float(window[hi] - window[lo]), tuple(sorted((i + hi, i + lo)))


def pipe_settlement(receptor_id, chainage, settlement, dsz_crown, length_m) -> PipeSettlement:
    """Settlement profile, largest differential over `length_m`, and crown stress increase.

    Parameters
    ----------
    receptor_id : str
        The pipe's id, carried into the result and its table rows.
    chainage : array_like, shape (N,)
        Distance (m) along the pipe of each sample point; distinct values, any order.
    settlement : array_like, shape (N,)
        Settlement (m) at each point (at the crown depth or of the pipe bed).
    dsz_crown : array_like, shape (N,)
        Vertical stress increase (kPa) at the crown.
    length_m : float
        Length over which differential settlement is judged (e.g. a pipe section or
        joint spacing).

    Returns
    -------
    PipeSettlement
        The settlement profile sorted by chainage, the largest differential over
        `length_m`, the largest curvature and the largest crown Δσz.

    Examples
    --------
    >>> r = pipe_settlement("main", [10, 0, 5], [0.03, 0.01, 0.02], [40, 10, 25], 5.0)
    >>> r.chainage_m.tolist(), round(r.differential_max_m, 3), r.dsz_crown_max_kpa
    ([0.0, 5.0, 10.0], 0.01, 40.0)
    >>> r.curvature_max_per_m                       # a straight settlement profile
    0.0
    """
    ch = np.atleast_1d(finite_array(chainage, "chainage"))
    s = np.atleast_1d(finite_array(settlement, "settlement"))
    q = np.atleast_1d(finite_array(dsz_crown, "dsz_crown"))
    if ch.ndim != 1 or ch.size == 0:
        raise InputError(f"must be a non-empty 1-D array, got shape {ch.shape}", argument="chainage")
    for name, arr in (("settlement", s), ("dsz_crown", q)):
        if arr.shape != ch.shape:
            raise InputError(f"must have one value per chainage ({ch.size}), got shape {arr.shape}",
                             argument=name)
    order = np.argsort(ch, kind="stable")
    ch, s, q = ch[order], s[order], q[order]
    if np.any(np.diff(ch) <= 0):
        k = int(np.argmax(np.diff(ch) <= 0))
        raise InputError(f"chainage {ch[k]:g} m appears more than once", argument="chainage")
    length = positive(length_m, "length_m")
    diff, pair = largest_differential_within(ch, s, length) if ch.size > 1 else (0.0, None)
    gradient = float(np.max(np.abs(np.diff(s)) / np.diff(ch))) if ch.size > 1 else 0.0
    k_max, k_q = int(np.argmax(s)), int(np.argmax(q))
    bend = _bending(ch, s)
    return PipeSettlement(
        receptor_id=str(receptor_id), n_points=int(ch.size), chainage_m=ch, settlement_m=s,
        settlement_max_m=float(s[k_max]), chainage_at_max_m=float(ch[k_max]),
        settlement_min_m=float(s.min()), differential_length_m=length,
        differential_max_m=diff,
        differential_between_m=None if pair is None else (float(ch[pair[0]]), float(ch[pair[1]])),
        gradient_max=gradient, dsz_crown_max_kpa=float(q[k_q]), chainage_at_dsz_max_m=float(ch[k_q]),
        **bend)


def _slope_change(ch: np.ndarray, s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(change of slope at each inner point, curvature there: the second difference on the
    chainages) of `s` (N,) or of each column of `s` (N, M)."""
    slope = np.diff(s, axis=0) / np.diff(ch).reshape((-1,) + (1,) * (s.ndim - 1))
    change = np.diff(slope, axis=0)
    return change, 2.0 * change / (ch[2:] - ch[:-2]).reshape((-1,) + (1,) * (s.ndim - 1))


def curvature_operator(chainage) -> np.ndarray:
    """The linear map from settlements at increasing chainages to the curvature at each inner
    point (:func:`pipe_settlement`'s second difference): ``C @ s``, C of shape (N − 2, N), so
    the largest curvature is ``max |C @ s|``.

    Examples
    --------
    >>> C = curvature_operator([0.0, 5.0, 10.0])
    >>> (C @ [0.0, 0.01, 0.0]).round(6).tolist()       # −2·0.01/5² per m
    [-0.0008]
    """
    ch = np.atleast_1d(finite_array(chainage, "chainage"))
    if ch.ndim != 1 or np.any(np.diff(ch) <= 0):
        raise InputError("must be strictly increasing", argument="chainage")
    if ch.size < 3:
        return np.zeros((0, ch.size))
    return _slope_change(ch, np.eye(ch.size))[1]


def pairs_within(chainage, length_m) -> np.ndarray:
    """(i, j), i < j, of the points at increasing chainages at most `length_m` apart (the
    pairs :func:`largest_differential_within` compares), shape (P, 2).

    Examples
    --------
    >>> pairs_within([0.0, 5.0, 10.0, 15.0], 5.0).tolist()
    [[0, 1], [1, 2], [2, 3]]
    """
    ch = np.atleast_1d(finite_array(chainage, "chainage"))
    ends = np.searchsorted(ch, ch + _reach(positive(length_m, "length_m")), side="right")
    pairs = [(i, j) for i in range(ch.size) for j in range(i + 1, ends[i])]
    return np.array(pairs, dtype=np.int64).reshape(-1, 2)


def _reach(length: float) -> float:
    """A length with the round-off allowance of chainage comparisons."""
    return length * (1 + 1e-12) + 1e-12


def _bending(ch: np.ndarray, s: np.ndarray) -> dict:
    """Largest angular change between neighbouring segments and the largest curvature."""
    if ch.size < 3:
        return {}
    change, curvature = _slope_change(ch, s)
    k = int(np.argmax(np.abs(curvature)))
    return {"angular_change_max": float(np.max(np.abs(change))),
            "curvature_max_per_m": float(abs(curvature[k])),
            "chainage_at_curvature_max_m": float(ch[k + 1])}
