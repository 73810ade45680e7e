"""Embankments (road, rail, levee) built along a centreline.

Construction (the nearest-station rule)
---------------------------------------
A plan point P is referred to its nearest point on the centreline: the station ``s``
(chainage along the line) and the offset ``d`` (plan distance to the line). Beside the
line the fill thickness is::

    h = H(s) − max(0, d − w/2) / n

with ``H(s)`` the crest height interpolated linearly in the (chainage, height) profile,
``w`` the crest width and ``n`` the side slope (H:V). Because every point takes one
station, curves and corners never double count: on the inside of a bend the side slopes
of neighbouring stations meet along the bisector, and on the outside of a corner vertex
the slope turns round as a cone.

Beyond an end (nearest point = the end vertex) the point is measured in the end's own
frame: ``u`` beyond the end along the end tangent and ``v`` across it. A sloping end
(``m`` H:V) gives ``h = H_end − max(max(0, |v| − w/2)/n, u/m)`` — end slope and side
slopes meet in hip lines, as where two planar slopes intersect. A vertical end (fill
against a structure, abutment or wall) stops the fill at the end plane: h = 0 beyond.
The result is never negative.

Cell averages come from :func:`~fillstress.shapes.coverage.cell_average` over a plan
region that holds the whole embankment and whose boundary follows each vertical end.
"""
from __future__ import annotations

import numpy as np
import shapely

from .._validate import finite, positive
from ..errors import InputError
from ..grid import GridSpec
from .coverage import cell_average, check_spec
from .stockpile import nearest_on_segments

#: Centrelines of up to this many segments are projected on by a numpy loop (N × S work;
#: several times faster than shapely for a few segments), longer ones by shapely.
LOOP_SEGMENTS = 64

VERTICAL = "vertical"


def _check_centreline(centreline) -> shapely.LineString:
    if not isinstance(centreline, shapely.LineString) or centreline.is_empty:
        raise InputError(f"must be a non-empty shapely LineString, got "
                         f"{type(centreline).__name__}", argument="centreline")
    if not np.all(np.isfinite(shapely.get_coordinates(centreline))):
        raise InputError("has NaN or infinite coordinates", argument="centreline")
    if centreline.length <= 0:
        raise InputError("has zero length", argument="centreline")
    if not centreline.is_simple:
        raise InputError("crosses itself; split it into separate embankments",
                         argument="centreline")
    return shapely.force_2d(centreline)


def height_profile(heights, length: float, start_chainage: float = 0.0):
    """Return (chainage from the line start, crest height) arrays covering 0…length.

    `heights` is one number (constant crest height) or (chainage, height) pairs with
    strictly increasing chainage, measured from `start_chainage` at the line start.

    Examples
    --------
    >>> height_profile([(100, 2.0), (150, 4.0)], 50.0, start_chainage=100)
    (array([ 0., 50.]), array([2., 4.]))
    """
    if np.ndim(heights) == 0:
        h = finite(heights, "heights")
        table = np.array([[0.0, h], [length, h]])
    else:
        try:
            table = np.array(heights, dtype=float)
        except (TypeError, ValueError):
            raise InputError("must be a number or (chainage, height) pairs",
                             argument="heights") from None
        if table.ndim != 2 or table.shape[1] != 2 or len(table) < 1:
            raise InputError(f"must be (chainage, height) pairs, got shape {table.shape}",
                             argument="heights")
        table = table - [start_chainage, 0.0]
    ch, h = table[:, 0], table[:, 1]
    if not np.all(np.isfinite(table)):
        raise InputError("contains NaN or infinite values", argument="heights")
    if np.any(h < 0):
        raise InputError(f"crest heights must be >= 0 m, got minimum {h.min():g}",
                         argument="heights")
    if len(ch) > 1 and np.any(np.diff(ch) <= 0):
        raise InputError("chainages must increase strictly", argument="heights")
    # 10 ppm: chainages in feet along a centreline in US survey feet differ by 2 ppm
    tol = 1e-5 * max(length, 1.0)
    if ch[0] > tol or ch[-1] < length - tol:
        raise InputError(f"profile covers chainage {ch[0] + start_chainage:g}…"
                         f"{ch[-1] + start_chainage:g} but the centreline runs "
                         f"{start_chainage:g}…{start_chainage + length:g}", argument="heights")
    return ch, h


def _end_slope(value, argument: str):
    if value is None:
        raise InputError(f"state the end: a slope H:V (number) or {VERTICAL!r}",
                         argument=argument)
    if isinstance(value, str):
        if value.lower() != VERTICAL:
            raise InputError(f"must be a slope H:V (number) or {VERTICAL!r}, got {value!r}",
                             argument=argument)
        return None
    return positive(value, argument)


def _end_frame(line: shapely.LineString, at_start: bool):
    """End vertex and unit tangent pointing out of the line, beyond the end."""
    xy = shapely.get_coordinates(line)
    xy = xy[np.r_[True, np.any(np.diff(xy, axis=0) != 0, axis=1)]]  # drop repeated vertices
    tip, prev = (xy[0], xy[1]) if at_start else (xy[-1], xy[-2])
    t = tip - prev
    return tip, t / np.hypot(*t)


class _Embankment:
    """The height function h(x, y) of one embankment (see module docstring)."""

    def __init__(self, line, ch, hts, crest_width, side_slope, start_slope, end_slope):
        self.line, self.ch, self.hts = line, ch, hts
        self.half_w, self.n = crest_width / 2.0, side_slope
        self.ends = [(_end_frame(line, True), start_slope, float(np.interp(0.0, ch, hts))),
                     (_end_frame(line, False), end_slope,
                      float(np.interp(line.length, ch, hts)))]

    def project(self, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Chainage (m along the line) of the nearest point of the line and the distance
        to it: by a numpy loop over up to LOOP_SEGMENTS segments, else by shapely."""
        xy = shapely.get_coordinates(self.line)
        if len(xy) - 1 > LOOP_SEGMENTS:
            pts = shapely.points(x, y)
            return shapely.line_locate_point(self.line, pts), shapely.distance(self.line, pts)
        along = np.diff(xy, axis=0)
        lengths = np.hypot(along[:, 0], along[:, 1])
        d_sq, k, t = nearest_on_segments(xy[:-1], along, x, y, where=True)
        return np.concatenate([[0.0], np.cumsum(lengths)])[k] + t * lengths[k], np.sqrt(d_sq)

    def side_drop(self, offset):
        return np.maximum(0.0, np.abs(offset) - self.half_w) / self.n

    def __call__(self, x, y):
        px, py = np.ravel(x), np.ravel(y)
        s, d = self.project(px, py)
        h = np.interp(s, self.ch, self.hts) - self.side_drop(d)
        for ((tip, t), slope, h_end), at in zip(self.ends, (0.0, self.line.length)):
            u = (px - tip[0]) * t[0] + (py - tip[1]) * t[1]
            beyond = (np.abs(s - at) <= 1e-9 * max(self.line.length, 1.0)) & (u > 0)
            if slope is None:
                h[beyond] = 0.0
                continue
            v = -(px - tip[0]) * t[1] + (py - tip[1]) * t[0]
            h_b = h_end - np.maximum(self.side_drop(v[beyond]), u[beyond] / slope)
            h[beyond] = h_b
        return np.maximum(h, 0.0).reshape(np.shape(x))

    def region(self) -> shapely.Geometry:
        """A plan polygon holding the embankment, cut square at each vertical end."""
        xy = shapely.get_coordinates(self.line)
        (tip0, t0), s0, h0 = self.ends[0]
        (tip1, t1), s1, h1 = self.ends[1]
        grow0 = 0.0 if s0 is None else s0 * h0
        grow1 = 0.0 if s1 is None else s1 * h1
        # the slope ends reach s·H beyond the tips; a margin keeps the toe strictly inside
        margin = 1e-6 * max(self.line.length, 1.0)
        xy = np.vstack([tip0 + t0 * (grow0 + margin * bool(s0)), xy[1:-1],
                        tip1 + t1 * (grow1 + margin * bool(s1))])
        reach = self.half_w + self.n * float(self.hts.max()) + margin
        return shapely.LineString(xy).buffer(reach, cap_style="flat", join_style="round",
                                             quad_segs=16)


def embankment_thickness(centreline, spec: GridSpec, *, crest_width: float,
                         side_slope: float, heights, start_slope, end_slope,
                         chainages=None, start_chainage: float = 0.0,
                         samples: int = 4) -> np.ndarray:
    """Cell-average thickness (m) of an embankment along a centreline.

    Parameters
    ----------
    centreline : shapely.LineString
        Plan centreline (m), straight or curved (a polyline); must not cross itself.
    spec : GridSpec
        The analysis lattice; the whole embankment must lie inside it.
    crest_width : float
        Crest width w (m), >= 0.
    side_slope : float
        Side slopes n, horizontal per vertical (H:V), > 0.
    heights : float, sequence of (chainage, height), or sequence of heights
        Crest height (m): constant, or piecewise linear in chainage (m). With
        `chainages` given, `heights` is the matching list of heights.
    start_slope, end_slope : float or "vertical"
        End at the line's first / last vertex: a slope (H:V, > 0) or ``"vertical"``
        for a fill stopped by a structure. Both must be stated.
    chainages : sequence of float, optional
        Chainages (m) of `heights` when they are given as two separate lists.
    start_chainage : float
        Chainage of the first vertex, the origin of the profile chainages.
    samples : int
        Sub-samples per cell side.

    Returns
    -------
    numpy.ndarray, shape ``spec.shape``
        Cell-average embankment thickness, m (row 0 south).

    Examples
    --------
    A 20 m long bank, 4 m crest, 2 m high, 1:1 sides, vertical ends: section
    w·H + n·H² = 12 m², volume 240 m³.

    >>> import shapely
    >>> spec = GridSpec(-2.0, -5.0, 0.5, 0.5, 48, 20)
    >>> t = embankment_thickness(shapely.LineString([(0, 0), (20, 0)]), spec,
    ...                          crest_width=4.0, side_slope=1.0, heights=2.0,
    ...                          start_slope="vertical", end_slope="vertical")
    >>> round(float(t.sum() * spec.cell_area), 6)
    240.0
    """
    check_spec(spec)
    line = _check_centreline(centreline)
    w = finite(crest_width, "crest_width")
    if w < 0:
        raise InputError(f"must be >= 0 m, got {crest_width!r}", argument="crest_width")
    n = positive(side_slope, "side_slope")
    if chainages is not None:
        if np.ndim(chainages) != 1 or np.shape(heights) != np.shape(chainages):
            raise InputError("chainages and heights must be lists of the same length",
                             argument="chainages")
        heights = list(zip(chainages, heights))
    ch, hts = height_profile(heights, line.length, finite(start_chainage, "start_chainage"))
    if hts.max() <= 0:
        raise InputError("crest height is zero everywhere", argument="heights")
    start = _end_slope(start_slope, "start_slope")
    end = _end_slope(end_slope, "end_slope")
    body = _Embankment(line, ch, hts, w, n, start, end)
    return cell_average(body.region(), body, spec, samples=samples, argument="centreline")
