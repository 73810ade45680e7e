"""Fill from two surfaces: thickness = design surface − existing ground.

A *surface* is any object with

* ``sample(x, y) -> z``: elevations (m) at internal site coordinates (m), NaN off the
  surface or where it has no data;
* ``bounds``: ``(xmin, ymin, xmax, ymax)`` in internal metres;
* ``crs``: the site CRS the coordinates refer to (pyproj.CRS or None).

Two are provided: :class:`TinSurface` (triangles, linear on each; from survey points or
LandXML) and :class:`RasterSurface` (grid, bilinear between pixel centres; from GeoTIFF).
The readers live in :mod:`fillstress.io` (:func:`fillstress.io.surfaces.read_surface`).

A surface may also offer ``cells_reached(spec)``: a mask of the cells of a lattice where
it may have data (False certain to be off it); both provided surfaces do, from their
triangles' bounding boxes or their raster's extent.

Cell averages are taken by a ``samples × samples`` midpoint rule in every cell. Where
either surface has no data at a sample point there is no fill there (the point counts
as zero thickness), and the points compared are reported. Only the cells the design
reaches are sampled: a curved road's design TIN reaches a few per cent of the rectangle
around it, and the rest has no fill whatever is sampled there.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .. import crs as crsmod
from .._validate import finite
from ..errors import InputError
from ..grid import GridSpec
from .coverage import cells_meeting_boxes, check_samples, check_spec

# matplotlib (its triangulation) is imported inside the functions that use it: it is slow to load and
# most commands never need it.

CUT_MODES = ("ignore", "unload")


# --- surfaces ------------------------------------------------------------------------
class TinSurface:
    """A triangulated surface, linear on each triangle, NaN outside the triangles.

    Parameters
    ----------
    points : array_like, shape (N, 3)
        x, y (internal metres) and z (m) of the vertices.
    triangles : array_like of int, shape (T, 3), optional
        Vertex indices of each triangle; when omitted, the surveyed area of the points
        (:func:`survey_triangles`: Delaunay, less the outer triangles that bridge gaps).
    crs : pyproj.CRS, optional
        Site CRS of the coordinates.
    source : str, optional
        File name, for error messages.

    Examples
    --------
    >>> s = TinSurface([(0, 0, 10.0), (10, 0, 12.0), (0, 10, 10.0), (10, 10, 12.0)])
    >>> s.sample(np.array([5.0, 20.0]), np.array([5.0, 5.0])).tolist()
    [11.0, nan]
    >>> s.bounds
    (0.0, 0.0, 10.0, 10.0)
    """

    def __init__(self, points, triangles=None, crs=None, source=None):
        from matplotlib.tri import Triangulation
        pts = np.asarray(points, dtype=float)
        where = {"file": source} if source else {"argument": "points"}
        if pts.ndim != 2 or pts.shape[1] != 3 or len(pts) < 3:
            raise InputError(f"needs at least 3 points (x, y, z), got shape {pts.shape}", **where)
        if not np.all(np.isfinite(pts)):
            raise InputError("has NaN or infinite coordinates", **where)
        # Triangulate and locate in coordinates relative to a local origin: at state-plane
        # magnitudes (1e6-1e7) the absolute values leave too few digits for the
        # orientation tests of the triangulation and the point location.
        self.origin = (float(pts[:, 0].min()), float(pts[:, 1].min()))
        local = pts - [self.origin[0], self.origin[1], 0.0]
        tri = survey_triangles(local, where) if triangles is None \
            else np.asarray(triangles, dtype=int)
        if tri.ndim != 2 or tri.shape[1] != 3 or len(tri) == 0:
            raise InputError(f"needs at least one triangle, got shape {tri.shape}", **where)
        if tri.min() < 0 or tri.max() >= len(pts):
            raise InputError("a triangle refers to a point that does not exist", **where)
        if np.any((tri[:, 0] == tri[:, 1]) | (tri[:, 1] == tri[:, 2]) | (tri[:, 0] == tri[:, 2])):
            raise InputError("a triangle uses the same point twice", **where)
        try:
            self._tri = Triangulation(local[:, 0], local[:, 1], tri)
            # a, b, c of z = a·x + b·y + c per triangle, one contiguous row each
            self._planes = np.ascontiguousarray(
                self._tri.calculate_plane_coefficients(local[:, 2]).T)
            self._finder = self._tri.get_trifinder()
        except (ValueError, RuntimeError) as exc:
            raise InputError(f"is not a valid triangulation ({exc})", **where) from None
        used = pts[np.unique(tri)]
        self.points, self.triangles, self.crs, self.source = pts, tri, crs, source
        self.moved_m = 0.0      # near-miss CRS shift on reading (crs.near_miss_shift)
        self.bounds = (float(used[:, 0].min()), float(used[:, 1].min()),
                       float(used[:, 0].max()), float(used[:, 1].max()))

    @classmethod
    def from_points(cls, points, crs=None, source=None) -> "TinSurface":
        """A TIN of scattered survey points over their surveyed area (`survey_triangles`)."""
        return cls(points, None, crs, source)

    def cells_reached(self, spec: GridSpec) -> np.ndarray:
        """Which cells of `spec` may hold a point of the surface (shape ``spec.shape``):
        False is certain to be off it (outside every triangle's bounding box), so a
        caller can skip sampling there. A long curved ribbon reaches few of the cells
        of the rectangle around it."""
        corners = self.points[self.triangles][:, :, :2]
        return cells_meeting_boxes(np.c_[corners.min(axis=1), corners.max(axis=1)], spec)

    def sample(self, x, y) -> np.ndarray:
        """Elevation (m) at (x, y), NaN off the surface."""
        return self.sample_with(None, x, y)[0]

    def same_plan(self, other) -> bool:
        """Whether `other` is a TIN on the same vertices (x, y) and triangles, with other
        elevations (lifts cut from one model): a point lies on the same triangle of both."""
        return isinstance(other, TinSurface) and (other is self or (
            np.array_equal(other.triangles, self.triangles)
            and np.array_equal(other.points[:, :2], self.points[:, :2])))

    def sample_with(self, other, x, y) -> tuple:
        """Elevations (m) at (x, y) of this surface and of `other` (None, or a TIN of the
        same plan, :meth:`same_plan`), the points located once; NaN off the surface."""
        x = np.asarray(x, dtype=float)
        xl = x.ravel() - self.origin[0]
        yl = np.asarray(y, dtype=float).ravel() - self.origin[1]
        # matplotlib's linear interpolation (a·x + b·y + c on the triangle found), without
        # its masked-array round trip
        found = self._finder(xl, yl)
        t, off = np.maximum(found, 0), found < 0
        out = []
        for tin in (self,) if other is None else (self, other):
            a, b, c = (coefficient.take(t) for coefficient in tin._planes)
            z = a * xl + b * yl + c
            z[off] = np.nan
            out.append(z.reshape(x.shape))
        return tuple(out)


#: A boundary triangle whose longest edge exceeds this multiple of the median edge of the
#: Delaunay triangulation bridges a gap outside the survey and is dropped (common practice
#: for concave outlines; the multiple is this project's choice).
GAP_EDGE_FACTOR = 5.0


def survey_triangles(pts, where=None) -> np.ndarray:
    """Triangles over the surveyed area of scattered points (coordinates near the origin).

    The Delaunay triangulation (scipy, Qhull) covers the convex hull; along a curved
    strip that includes the land inside the curve, which nobody surveyed. Rule: triangles
    of no area are dropped, then, repeatedly from the outside in, every triangle on the
    boundary whose longest edge is more than ``GAP_EDGE_FACTOR`` (5) times the median
    edge length. Gaps inside the survey (a triangle with no boundary edge) stay filled.

    Examples
    --------
    >>> import numpy as np
    >>> arc = np.linspace(0, np.pi / 2, 100)       # a quarter ring 20 wide, radius 1000
    >>> pts = np.r_[np.c_[1000 * np.cos(arc), 1000 * np.sin(arc)],
    ...             np.c_[1020 * np.cos(arc), 1020 * np.sin(arc)]]
    >>> tri = survey_triangles(np.c_[pts, np.zeros(200)])
    >>> bool(np.all(np.hypot(*pts[tri].mean(axis=1).T) > 990))   # none inside the curve
    True
    """
    where = where or {"argument": "points"}
    xy = np.asarray(pts, dtype=float)[:, :2]
    if len(np.unique(xy, axis=0)) < len(xy):
        raise InputError("has two points at the same x, y", **where)
    from scipy.spatial import Delaunay, QhullError   # scipy.spatial: only for survey points
    try:
        dt = Delaunay(xy)
    except QhullError:
        raise InputError("points are all on one line; they do not span a surface",
                         **where) from None
    tri, neighbours = dt.simplices, dt.neighbors
    corners = xy[tri]
    edges = np.linalg.norm(corners - np.roll(corners, -1, axis=1), axis=2)   # (T, 3)
    longest = edges.max(axis=1)
    a, b, c = corners[:, 0], corners[:, 1], corners[:, 2]
    area = 0.5 * np.abs((b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1])
                        - (c[:, 0] - a[:, 0]) * (b[:, 1] - a[:, 1]))
    keep = area > 1e-10 * longest**2
    too_long = longest > GAP_EDGE_FACTOR * np.median(edges)
    while True:
        gone = np.r_[keep, False][neighbours] == False  # noqa: E712 (index -1 = outside)
        drop = keep & too_long & gone.any(axis=1)
        if not drop.any():
            break
        keep &= ~drop
    if not keep.any():
        raise InputError("points do not span a surface (every triangle is degenerate or "
                         "bridges a gap)", **where)
    return tri[keep]


class RasterSurface:
    """A north-up grid of elevations, bilinear between pixel centres.

    Within half a pixel of the edge the value is the nearest edge pixel's (the raster
    covers its full extent); beyond it, NaN. A sample that needs a nodata pixel is NaN.

    Parameters
    ----------
    z : array_like, shape (rows, cols)
        Elevations (m), row 0 the northern row; NaN for no data.
    x0, y_top : float
        Internal coordinates (m) of the north-west corner of the raster.
    dx, dy : float
        Pixel size (m), positive.
    crs : pyproj.CRS, optional
        Site CRS.
    to_raster : callable, optional
        ``(x, y) -> (x', y')``: internal metres to the raster's own coordinates when
        the raster is in another CRS than the site; None when it is the site frame.
    source : str, optional
        File name.

    Examples
    --------
    >>> r = RasterSurface([[2.0, 4.0], [0.0, 2.0]], 0.0, 2.0, 1.0, 1.0)
    >>> r.sample(np.array([1.0, 0.2, 3.0]), np.array([1.0, 1.8, 1.0])).tolist()
    [2.0, 2.0, nan]
    """

    def __init__(self, z, x0, y_top, dx, dy, crs=None, to_raster=None, source=None,
                 bounds=None):
        self.z = np.asarray(z, dtype=float)
        self.x0, self.y_top, self.dx, self.dy = float(x0), float(y_top), float(dx), float(dy)
        self.crs, self.to_raster, self.source = crs, to_raster, source
        self.moved_m = 0.0      # near-miss CRS shift on reading (crs.near_miss_shift)
        rows, cols = self.z.shape
        self.bounds = bounds or (self.x0, self.y_top - rows * self.dy,
                                 self.x0 + cols * self.dx, self.y_top)

    def cells_reached(self, spec: GridSpec) -> np.ndarray:
        """Which cells of `spec` may hold a point of the raster (False: certainly off it).
        A raster in another CRS than the site's reaches every cell: its outline in the
        site frame is not exactly its bounds."""
        if self.to_raster is not None:
            return np.ones(spec.shape, bool)
        rows, cols = self.z.shape
        extent = (self.x0, self.y_top - rows * self.dy, self.x0 + cols * self.dx, self.y_top)
        return cells_meeting_boxes([extent], spec)

    def sample(self, x, y) -> np.ndarray:
        """Bilinear elevation (m) at (x, y), NaN off the raster or next to nodata."""
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        if self.to_raster is not None:
            x, y = self.to_raster(x, y)
        rows, cols = self.z.shape
        fc = (x - self.x0) / self.dx - 0.5
        fr = (self.y_top - y) / self.dy - 0.5
        off = (fc < -0.5) | (fc > cols - 0.5) | (fr < -0.5) | (fr > rows - 0.5) \
            | ~np.isfinite(fc) | ~np.isfinite(fr)
        c0, wc = _cell_and_weight(fc, cols)
        r0, wr = _cell_and_weight(fr, rows)
        c1, r1 = np.minimum(c0 + 1, cols - 1), np.minimum(r0 + 1, rows - 1)
        top = _lerp(self.z[r0, c0], self.z[r0, c1], wc)
        bottom = _lerp(self.z[r1, c0], self.z[r1, c1], wc)
        out = _lerp(top, bottom, wr)
        out[off] = np.nan
        return out


def _cell_and_weight(f, n):
    """Lower neighbour index and weight towards the upper one, clamped to the edge."""
    f = np.clip(np.nan_to_num(f), 0.0, n - 1)
    i0 = np.minimum(np.floor(f).astype(int), max(n - 2, 0))
    return i0, f - i0


def _lerp(a, b, w):
    """Linear blend that ignores a neighbour whose weight is zero (so its NaN does not leak)."""
    with np.errstate(invalid="ignore"):
        return np.where(w <= 0, a, np.where(w >= 1, b, a + w * (b - a)))


# --- fill from surfaces --------------------------------------------------------------
@dataclass(frozen=True)
class CutReport:
    """Where the design is above (fill) or below (cut) the existing ground.

    Volumes in m³ and areas in m², from the sub-cell samples; ``area_compared`` is where
    both surfaces have data inside the grid, ``area_design_only`` where the design has
    data and the existing ground has none (no fill is counted there); ``missing_at`` is
    one such sample point (x, y), or None.
    """

    volume_fill: float
    volume_cut: float
    area_fill: float
    area_cut: float
    area_compared: float
    cut: str
    area_design_only: float = 0.0
    missing_at: tuple | None = None


class FunctionSurface:
    """A surface given by a function ``z(x, y)`` everywhere (e.g. a flat ground).

    Examples
    --------
    >>> FunctionSurface(lambda x, y: 0 * x + 5.0).sample(np.array([1.0]), np.array([2.0]))
    array([5.])
    """

    def __init__(self, func, crs=None):
        self.func, self.crs = func, crs
        self.bounds = (-np.inf, -np.inf, np.inf, np.inf)

    def sample(self, x, y) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        return np.broadcast_to(np.asarray(self.func(x, np.asarray(y, dtype=float)),
                                          dtype=float), x.shape)


def check_surface(surface, argument: str):
    """A surface object as it is, a plain callable ``z(x, y)`` wrapped; refuse the rest."""
    if callable(getattr(surface, "sample", None)) and hasattr(surface, "bounds") \
            and hasattr(surface, "crs"):
        return surface
    if callable(surface):
        return FunctionSurface(surface)
    raise InputError("must be a surface with sample(x, y), bounds and crs, or a "
                     "callable z(x, y)", argument=argument)


def _comparable(crs_like):
    """CRS in metre form, so a foot site CRS and its metre twin compare equal."""
    c = crsmod.as_crs(crs_like)
    try:
        return crsmod.metric_twin(c)
    except InputError:
        return c


def _check_same_crs(design, existing, spec) -> None:
    named = [(n, c) for n, c in (("design", design.crs), ("existing", existing.crs),
                                  ("spec", spec.crs)) if c is not None]
    for (n1, c1), (n2, c2) in zip(named, named[1:]):
        if c1 is c2 or c1 == c2:      # the usual case, without pyproj's slow lookups
            continue
        a, b = _comparable(c1), _comparable(c2)
        if not a.equals(b):
            raise InputError(f"{n1} is in {a.name!r} but {n2} is in {b.name!r}; read both "
                             "into the site CRS", argument=n2)


def _overlap(a, b):
    box = (max(a[0], b[0]), max(a[1], b[1]), min(a[2], b[2]), min(a[3], b[3]))
    return box if box[0] < box[2] and box[1] < box[3] else None


#: Sample points evaluated at once (bounds memory).
_CHUNK_POINTS = 1 << 20


def _cells_reached(surface, spec: GridSpec) -> np.ndarray:
    """Flat indices (row-major) of the cells where `surface` may have data: those its
    ``cells_reached(spec)`` names, every cell for a surface without one."""
    reach = getattr(surface, "cells_reached", None)
    return np.flatnonzero(reach(spec) if callable(reach) else np.ones(spec.shape, bool))


def _chunks(cells: np.ndarray, samples: int):
    step = max(1, _CHUNK_POINTS // samples**2)
    return (cells[k:k + step] for k in range(0, len(cells), step))


def _cell_samples(spec: GridSpec, cells: np.ndarray, samples: int):
    """x, y of the ``samples × samples`` midpoints of each of `cells` (flat indices),
    shape (cells, samples, samples): [cell, sub-row (y), sub-column (x)]."""
    offs = (np.arange(samples) + 0.5) / samples
    j, i = np.divmod(cells, spec.nx)
    x = spec.x0 + (i[:, None, None] + offs[None, None, :]) * spec.dx
    y = spec.y0 + (j[:, None, None] + offs[None, :, None]) * spec.dy
    shape = (len(cells), samples, samples)
    return np.broadcast_to(x, shape).copy(), np.broadcast_to(y, shape).copy()


def _first_gap(spec, cells, gap, x, y, samples):
    """(scan key, x, y) of the southernmost, then westernmost, sample in `gap`: the one
    a scan of the sample rows, south to north and west to east, meets first."""
    c, k, m = np.nonzero(gap)
    j, i = np.divmod(cells[c], spec.nx)
    key = ((j * samples + k) * spec.nx + i) * samples + m
    n = int(np.argmin(key))
    return int(key[n]), float(x[c[n], k[n], m[n]]), float(y[c[n], k[n], m[n]])


def fill_from_surfaces(design, existing, spec: GridSpec, *, cut: str = "ignore",
                       samples: int = 4, tolerance: float = 0.0) -> tuple[np.ndarray, CutReport]:
    """Cell-average fill thickness (m) = design surface − existing ground.

    Parameters
    ----------
    design, existing : surface or callable z(x, y)
        Top of the fill and the existing ground (see the module docstring), same CRS.
    spec : GridSpec
        The analysis lattice.
    cut : {"ignore", "unload"}
        Where the design is below the ground: "ignore" (default) gives no load there;
        "unload" keeps the negative thickness (soil removed, negative load).
    samples : int
        Sample points per cell side.
    tolerance : float
        Differences between the surfaces smaller than this (m) are numerical noise of two
        surveys of the same ground: neither loaded nor counted as fill or cut.

    Returns
    -------
    thickness : numpy.ndarray, shape ``spec.shape``
        Cell-average fill thickness between the surfaces, m (row 0 south).
    report : CutReport
        Where the design surface lies below the existing one, and how it was treated.

    Examples
    --------
    >>> ground = TinSurface([(0, 0, 10.0), (8, 0, 10.0), (0, 8, 10.0), (8, 8, 10.0)])
    >>> top = TinSurface([(0, 0, 9.0), (8, 0, 13.0), (0, 8, 9.0), (8, 8, 13.0)])
    >>> t, rep = fill_from_surfaces(top, ground, GridSpec(0.0, 0.0, 2.0, 2.0, 4, 4))
    >>> t[0].tolist(), rep.volume_fill, rep.volume_cut
    ([0.0, 0.5, 1.5, 2.5], 72.0, 8.0)
    """
    design = check_surface(design, "design")
    existing = check_surface(existing, "existing")
    check_spec(spec)
    samples = check_samples(samples)
    if cut not in CUT_MODES:
        raise InputError(f"must be one of {CUT_MODES}, got {cut!r}", argument="cut")
    _check_same_crs(design, existing, spec)
    both = _overlap(design.bounds, existing.bounds)
    if both is None:
        raise InputError(f"design surface {tuple(design.bounds)} and existing ground "
                         f"{tuple(existing.bounds)} do not overlap", argument="existing")
    if _overlap(both, spec.extent) is None:
        raise InputError("the surfaces do not overlap the analysis grid", argument="spec")
    noise = finite(tolerance, "tolerance")
    if noise < 0:
        raise InputError(f"must be >= 0 m, got {noise:g}", argument="tolerance")
    noise = max(noise, 1e-9)
    thickness = spec.zeros()
    sums = np.zeros(5)  # fill volume, cut volume, fill count, cut count, compared count
    sub_area = spec.cell_area / samples**2
    design_only, first_gap = 0, None     # first_gap: (scan key, x, y)
    # only the cells the design can reach: elsewhere it has no data, so no fill (zero)
    for cells in _chunks(_cells_reached(design, spec), samples):
        x, y = _cell_samples(spec, cells, samples)
        top, base = _both_at(design, existing, x, y)
        on_design = np.isfinite(top)
        diff = top - base
        valid = np.isfinite(diff)
        gap = on_design & ~np.isfinite(base)
        if gap.any():
            design_only += gap.sum()
            found = _first_gap(spec, cells, gap, x, y, samples)
            first_gap = found if first_gap is None else min(first_gap, found)
        diff = np.where(valid, diff, 0.0)
        diff[np.abs(diff) < noise] = 0.0
        load = diff if cut == "unload" else np.maximum(diff, 0.0)
        thickness.flat[cells] = load.reshape(len(cells), -1).mean(axis=1)
        sums += [np.maximum(diff, 0).sum() * sub_area, np.maximum(-diff, 0).sum() * sub_area,
                 (diff > 0).sum(), (diff < 0).sum(), valid.sum()]
    if sums[4] == 0:
        raise InputError("there is no point inside the grid where both surfaces have data",
                         argument="existing")
    report = CutReport(float(sums[0]), float(sums[1]), float(sums[2] * sub_area),
                       float(sums[3] * sub_area), float(sums[4] * sub_area), cut,
                       float(design_only * sub_area),
                       None if first_gap is None else first_gap[1:])
    return thickness, report


def _both_at(design, existing, x, y):
    """Design and existing surface at the samples; the existing only where the design has
    data (elsewhere nothing is filled, whatever the ground), located once when the two are
    TINs of one plan (lifts cut from one model)."""
    if isinstance(design, TinSurface) and design.same_plan(existing):
        return design.sample_with(existing, x, y)
    top = design.sample(x, y)
    base = np.full(top.shape, np.nan)
    on_design = np.isfinite(top)
    if on_design.any():
        base[on_design] = existing.sample(x[on_design], y[on_design])
    return top, base


def resample_to_grid(surface, spec: GridSpec, *, samples: int = 4) -> np.ndarray:
    """Cell-mean elevation (m) of one surface over the valid sample points of each cell.

    Meant for maps of the ground (e.g. ``ground_elevation.tif``): a cell with no valid
    sample is NaN, which marks "no data" there, never a load.

    Examples
    --------
    >>> s = TinSurface([(0, 0, 1.0), (4, 0, 5.0), (0, 4, 1.0), (4, 4, 5.0)])
    >>> resample_to_grid(s, GridSpec(0.0, 0.0, 2.0, 2.0, 3, 1)).tolist()
    [[2.0, 4.0, nan]]
    """
    surface = check_surface(surface, "surface")
    check_spec(spec)
    samples = check_samples(samples)
    out = np.full(spec.shape, np.nan)
    for cells in _chunks(_cells_reached(surface, spec), samples):
        x, y = _cell_samples(spec, cells, samples)
        z = surface.sample(x, y).reshape(len(cells), -1)
        n = np.isfinite(z).sum(axis=1)
        total = np.where(np.isfinite(z), z, 0.0).sum(axis=1)
        out.flat[cells] = np.where(n > 0, total / np.maximum(n, 1), np.nan)
    return out


def elevation_at_centres(ground, spec: GridSpec) -> np.ndarray:
    """Elevation (m) at every cell centre, NaN where `ground` has no data.

    Only the cells the surface can reach are sampled (a survey strip along a curved road
    reaches few of the cells of the rectangle around it); `ground` may be a surface, its
    own ``sample`` method or any callable ``z(x, y)``.

    Examples
    --------
    >>> s = TinSurface([(0, 0, 1.0), (4, 0, 5.0), (0, 4, 1.0), (4, 4, 5.0)])
    >>> elevation_at_centres(s.sample, GridSpec(0.0, 0.0, 2.0, 2.0, 3, 1)).tolist()
    [[2.0, 4.0, nan]]
    """
    surface = _surface_of(ground)
    check_spec(spec)
    out = np.full(spec.shape, np.nan)
    for cells in _chunks(_cells_reached(surface, spec), 1):
        j, i = np.divmod(cells, spec.nx)
        out.flat[cells] = surface.sample(spec.x_centres[i], spec.y_centres[j])
    return out


def _surface_of(func):
    """The surface whose own ``sample`` method `func` is; else `func` as a surface."""
    owner = getattr(func, "__self__", None)
    if owner is not None and getattr(owner, "sample", None) == func:
        func = owner
    return check_surface(func, "ground")
