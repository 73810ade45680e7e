"""Receptors (buildings, pipes, boreholes, plan grids) sampled into labelled stress points.

Every sampler returns a :class:`pandas.DataFrame` with the columns of :data:`POINT_COLUMNS`:
``receptor_kind``, ``receptor_id``, ``point_id`` (unique, e.g. ``"B1-c3"``), ``role``,
``x``, ``y`` (m, site CRS), ``depth`` (m below the existing ground, >= 0) and ``chainage``
(m from the start of a pipe; NaN for other kinds). Values are SI; the writers in
:mod:`fillstress.io` convert them on output.
"""
from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Callable

import numpy as np
import shapely
from shapely.geometry import LineString, Point, Polygon

from .. import crs as crsmod
from .._validate import depths_array, finite, finite_array, positive
from ..errors import InputError
from ..io.vectors import Layer, layer_and_site_crs, read_layer, read_vector, source_name

if TYPE_CHECKING:                  # pandas is loaded where the point tables are made
    import pandas as pd


POINT_COLUMNS = ["receptor_kind", "receptor_id", "point_id", "role", "x", "y", "depth", "chainage"]
KINDS = ("building", "pipe", "borehole")
# Two sample points closer than this (m) are the same point.
_SAME_POINT_M = 1e-6


def _frame(kind, receptor_id, prefix_roles, xs, ys, depths, chainages=None) -> pd.DataFrame:
    """Assemble the standard point table; `prefix_roles` is a list of (id suffix, role)."""
    import pandas as pd
    n = len(prefix_roles)
    return pd.DataFrame({
        "receptor_kind": [kind] * n,
        "receptor_id": [receptor_id] * n,
        "point_id": [f"{receptor_id}-{suffix}" for suffix, _ in prefix_roles],
        "role": [str(role) for _, role in prefix_roles],
        "x": np.asarray(xs, dtype=float),
        "y": np.asarray(ys, dtype=float),
        "depth": np.asarray(depths, dtype=float),
        "chainage": np.full(n, np.nan) if chainages is None else np.asarray(chainages, float),
    }, columns=POINT_COLUMNS)


def _receptor_id(value, name: str = "receptor_id") -> str:
    rid = str(value).strip() if value is not None else ""
    if not rid or any(c.isspace() for c in rid):
        raise InputError(f"must be a non-empty id without spaces, got {value!r}", argument=name)
    return rid


def _depth(value, name: str) -> float:
    d = finite(value, name)
    if d < 0:
        raise InputError(f"must be >= 0 m below the ground, got {value!r}", argument=name)
    return d


# --- buildings -------------------------------------------------------------------------
def _ring_vertices(footprint: Polygon) -> np.ndarray:
    """Exterior ring vertices without the closing repeat or consecutive duplicates."""
    xy = np.asarray(footprint.exterior.coords)[:-1, :2]
    step = np.linalg.norm(xy - np.roll(xy, 1, axis=0), axis=1)
    return xy[step > _SAME_POINT_M]


def _interior_grid(footprint: Polygon, spacing: float) -> np.ndarray:
    """A square lattice of pitch `spacing`, centred on the footprint's bounding box, keeping
    the nodes strictly inside the footprint (holes excluded)."""
    xmin, ymin, xmax, ymax = footprint.bounds

    def axis(lo, hi):
        n = max(1, int(math.floor((hi - lo) / spacing + 1e-9)))
        return 0.5 * (lo + hi) + (np.arange(n) - 0.5 * (n - 1)) * spacing

    gx, gy = np.meshgrid(axis(xmin, xmax), axis(ymin, ymax))
    gx, gy = gx.ravel(), gy.ravel()
    inside = shapely.contains_xy(footprint, gx, gy)
    # Nodes on the boundary are already covered by corners/edges or add nothing inside.
    near_edge = shapely.distance(footprint.boundary, shapely.points(gx, gy)) <= _SAME_POINT_M
    keep = inside & ~near_edge
    return np.column_stack([gx[keep], gy[keep]])


def _checked_footprint(footprint) -> Polygon:
    if not isinstance(footprint, Polygon):
        raise InputError(f"must be a shapely Polygon, got {type(footprint).__name__}",
                         argument="footprint")
    if footprint.is_empty or footprint.area <= 0:
        raise InputError("must have a positive area", argument="footprint")
    if not footprint.is_valid:
        raise InputError(f"is not a valid polygon ({shapely.is_valid_reason(footprint)})",
                         argument="footprint")
    return footprint


def _wall_points(corners: np.ndarray, spacing: float | None) -> np.ndarray:
    """Points along each exterior edge, corners excluded: the midpoint, or with `spacing`
    the edge divided into equal steps no longer than it (wall lines for distortion)."""
    out = []
    for a, b in zip(corners, np.roll(corners, -1, axis=0)):
        steps = 2 if spacing is None else max(1, int(math.ceil(np.hypot(*(b - a)) / spacing - 1e-9)))
        f = np.arange(1, steps) / steps
        out.append(a + f[:, None] * (b - a))
    return np.vstack(out) if out else np.empty((0, 2))


def building_points(receptor_id, footprint: Polygon, foundation_depth: float, *,
                    interior_spacing: float | None = None, profile_depths=(),
                    wall_spacing: float | None = None) -> pd.DataFrame:
    """Sample a building footprint into stress points at its foundation level.

    Points, in this order: the exterior-ring vertices (role ``corner``, ids ``-c1…``), points
    along every exterior edge (``edge``, ``-e1…``: the midpoint, or with `wall_spacing`
    equal steps no longer than it, for the wall lines of the distortion check), the centroid (``centroid``, ``-m``;
    a representative interior point when the centroid falls outside the footprint), an
    interior lattice of pitch `interior_spacing` centred on the bounding box and clipped to
    the footprint (``interior``, ``-i1…``; nodes on the boundary or at the centroid are
    dropped as duplicates), and a vertical profile below the centroid at `profile_depths`
    (``profile``, ``-p1…``).

    Parameters
    ----------
    receptor_id : str
        Building id, no spaces.
    footprint : shapely.geometry.Polygon
        Valid plan outline in site coordinates (m); holes are allowed.
    foundation_depth : float
        Depth of the foundation level below the existing ground (m, >= 0).
    interior_spacing : float, optional
        Pitch (m) of the interior lattice; no interior points when omitted.
    profile_depths : sequence of float, optional
        Depths (m below ground) of the profile points; each must be >= `foundation_depth`.
    wall_spacing : float, optional
        Largest step (m) between points along each wall; default one midpoint per edge.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`POINT_COLUMNS`; ``chainage`` is NaN.

    Examples
    --------
    >>> from shapely.geometry import box
    >>> pts = building_points("B1", box(0, 0, 10, 10), 1.5, interior_spacing=5,
    ...                       profile_depths=[3, 6])
    >>> pts["role"].value_counts().to_dict()
    {'corner': 4, 'edge': 4, 'interior': 4, 'profile': 2, 'centroid': 1}
    >>> pts.loc[pts.role == "profile", ["point_id", "x", "y", "depth"]].values.tolist()
    [['B1-p1', 5.0, 5.0, 3.0], ['B1-p2', 5.0, 5.0, 6.0]]
    >>> int((building_points("B1", box(0, 0, 10, 10), 1.5, wall_spacing=2).role == "edge").sum())
    16
    """
    rid = _receptor_id(receptor_id)
    poly = _checked_footprint(footprint)
    base = _depth(foundation_depth, "foundation_depth")
    corners = _ring_vertices(poly)
    mids = _wall_points(corners, None if wall_spacing is None else positive(wall_spacing, "wall_spacing"))
    centre = poly.centroid if poly.contains(poly.centroid) else poly.representative_point()
    centre_xy = np.array([[centre.x, centre.y]])
    interior = np.empty((0, 2))
    if interior_spacing is not None:
        interior = _interior_grid(poly, positive(interior_spacing, "interior_spacing"))
        interior = interior[np.hypot(*(interior - centre_xy).T) > _SAME_POINT_M]
    profile = np.empty(0)
    if len(np.atleast_1d(profile_depths)):
        profile = depths_array(profile_depths, "profile_depths")
        if np.any(profile < base - 1e-9):
            raise InputError(f"every profile depth must be >= the foundation depth {base:g} m, "
                             f"got minimum {profile.min():g}", argument="profile_depths")
    labels = ([(f"c{k + 1}", "corner") for k in range(len(corners))]
              + [(f"e{k + 1}", "edge") for k in range(len(mids))] + [("m", "centroid")]
              + [(f"i{k + 1}", "interior") for k in range(len(interior))]
              + [(f"p{k + 1}", "profile") for k in range(len(profile))])
    plan = np.vstack([corners, mids, centre_xy, interior])
    xs = np.concatenate([plan[:, 0], np.full(len(profile), centre.x)])
    ys = np.concatenate([plan[:, 1], np.full(len(profile), centre.y)])
    depths = np.concatenate([np.full(len(plan), base), profile])
    return _frame("building", rid, labels, xs, ys, depths)


# --- pipes -----------------------------------------------------------------------------
def _line_vertices(line) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(vertices without consecutive repeats, their chainages, index of each kept vertex)."""
    if not isinstance(line, LineString):
        raise InputError(f"must be a shapely LineString, got {type(line).__name__}",
                         argument="line")
    if line.is_empty or line.length <= 0:
        raise InputError("must have a positive length", argument="line")
    xy = np.asarray(line.coords)[:, :2]
    seg = np.hypot(*np.diff(xy, axis=0).T)
    keep = np.concatenate([[True], seg > _SAME_POINT_M])
    chain = np.concatenate([[0.0], np.cumsum(seg)])
    return xy[keep], chain[keep], np.flatnonzero(keep)


def _depth_function(depth_at, n_vertices: int, kept: np.ndarray, vertex_chainage: np.ndarray):
    """Turn a constant, per-vertex list or callable into a function chainage -> depth."""
    if callable(depth_at):
        return lambda ch: finite_array([depth_at(c) for c in ch], "depth_at")
    values = finite_array(depth_at, "depth_at")
    if values.ndim == 0:
        return lambda ch: np.full(len(ch), float(values))
    if values.ndim != 1 or values.size != n_vertices:
        raise InputError(f"must be one number or one depth per line vertex ({n_vertices}), "
                         f"got shape {values.shape}", argument="depth_at")
    for a, b in zip(kept, np.append(kept[1:], n_vertices)):
        if np.ptp(values[a:b]) > 0:  # repeated vertex carrying two different depths
            raise InputError(f"vertices {a}..{b - 1} coincide but have different depths",
                             argument="depth_at")
    return lambda ch: np.interp(ch, vertex_chainage, values[kept])


def _pipe_chainages(length: float, spacing: float, vertex_chainage: np.ndarray) -> np.ndarray:
    regular = np.arange(0.0, length, spacing)
    ch = np.unique(np.concatenate([regular, vertex_chainage, [0.0, length]]))
    return ch[np.concatenate([[True], np.diff(ch) > _SAME_POINT_M])]


def pipe_points(receptor_id, line: LineString, depth_at, *, spacing: float,
                diameter: float | None = None, level: str = "crown") -> pd.DataFrame:
    """Sample a pipe along its line at the crown, the point of the pipe nearest the fill.

    Points sit every `spacing` m of chainage from the start, at every vertex and at both
    ends (roles ``chainage``, ``vertex``, ``end``; ids ``-s1…`` in chainage order).

    Parameters
    ----------
    receptor_id : str
        Pipe id, no spaces.
    line : shapely.geometry.LineString
        Plan route in site coordinates (m); any z values are ignored.
    depth_at : float, sequence of float, or callable
        Depth (m below ground) of the crown or invert (see `level`): one constant, one value
        per vertex of `line` (interpolated linearly by chainage), or a function of chainage.
    spacing : float
        Chainage step (m) between regular points.
    diameter : float, optional
        Outside diameter (m, > 0); needed when `level` is ``"invert"``. With a crown level
        it is only checked (>= 0; 0 means not stated).
    level : {"crown", "invert"}
        What `depth_at` gives. The stress point is the crown: invert depth minus diameter.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`POINT_COLUMNS` with ``chainage`` in m from the first vertex.

    Examples
    --------
    >>> from shapely.geometry import LineString
    >>> pts = pipe_points("P1", LineString([(0, 0), (6, 0), (6, 3)]), [3.0, 3.0, 1.5],
    ...                   spacing=4, diameter=0.5, level="invert")
    >>> pts[["point_id", "role", "chainage", "depth"]].values.tolist()
    [['P1-s1', 'end', 0.0, 2.5], ['P1-s2', 'chainage', 4.0, 2.5], ['P1-s3', 'vertex', 6.0, 2.5], ['P1-s4', 'chainage', 8.0, 1.5], ['P1-s5', 'end', 9.0, 1.0]]
    """
    rid = _receptor_id(receptor_id)
    if level not in ("crown", "invert"):
        raise InputError(f"must be 'crown' or 'invert', got {level!r}", argument="level")
    step = positive(spacing, "spacing")
    vertices, vertex_ch, kept = _line_vertices(line)
    depth_of = _depth_function(depth_at, len(line.coords), kept, vertex_ch)
    route = LineString(vertices)
    ch = _pipe_chainages(route.length, step, vertex_ch)
    depth = depth_of(ch)
    if level == "invert":
        if diameter is None:
            raise InputError("is needed when level='invert'", argument="diameter")
        depth = depth - positive(diameter, "diameter")
    elif diameter is not None and finite(diameter, "diameter") < 0:  # 0 = not stated
        raise InputError(f"must be >= 0 m, got {diameter!r}", argument="diameter")
    if np.any(depth < 0):
        k = int(np.argmin(depth))
        raise InputError(f"pipe {rid}: crown is above the ground at chainage {ch[k]:.3f} m "
                         f"(depth {depth[k]:.3f} m)", argument="depth_at")
    xy = shapely.get_coordinates(shapely.line_interpolate_point(route, ch))
    is_vertex = np.min(np.abs(ch[:, None] - vertex_ch[None, :]), axis=1) <= _SAME_POINT_M
    roles = np.where(is_vertex, "vertex", "chainage")
    roles[[0, -1]] = "end"
    labels = [(f"s{k + 1}", role) for k, role in enumerate(roles)]
    return _frame("pipe", rid, labels, xy[:, 0], xy[:, 1], depth, ch)


# --- boreholes -------------------------------------------------------------------------
def borehole_points(receptor_id, x: float, y: float, top: float, bottom: float,
                    step: float) -> pd.DataFrame:
    """Points down a vertical borehole from `top` to `bottom` (m below ground) every `step`.

    The bottom is always included, so the last interval may be shorter than `step`.
    Role ``borehole``; ids ``-d1…`` from the top down.

    Parameters
    ----------
    receptor_id : str
        The borehole's id.
    x, y : float
        Plan position, m.
    top, bottom : float
        Depth range, m below ground, ``0 <= top <= bottom``.
    step : float
        Spacing of the points, m.

    Returns
    -------
    pandas.DataFrame
        One row per point with the columns of :data:`POINT_COLUMNS`.

    Examples
    --------
    >>> borehole_points("BH1", 10, 20, 1.0, 4.5, 1.0)["depth"].tolist()
    [1.0, 2.0, 3.0, 4.0, 4.5]
    """
    rid = _receptor_id(receptor_id)
    x, y = finite(x, "x"), finite(y, "y")
    top, bottom = _depth(top, "top"), _depth(bottom, "bottom")
    if bottom < top:
        raise InputError(f"must be >= top ({top:g} m), got {bottom:g} m", argument="bottom")
    step = positive(step, "step")
    n = int(math.floor((bottom - top) / step + 1e-9))
    depths = top + np.arange(n + 1) * step
    if bottom - depths[-1] > _SAME_POINT_M:
        depths = np.append(depths, bottom)
    labels = [(f"d{k + 1}", "borehole") for k in range(len(depths))]
    return _frame("borehole", rid, labels, np.full(len(depths), x), np.full(len(depths), y),
                  depths)


# --- plan grids ------------------------------------------------------------------------
_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_-]*$")


@dataclass(frozen=True)
class PlanGrid:
    """A plan lattice of stress nodes at a list of depths (computed elsewhere, by FFT).

    Nodes run from ``xmin`` in steps of ``spacing`` up to ``xmax`` (included when it falls
    on the lattice), likewise in y; all lengths in m.
    """

    name: str
    xmin: float
    ymin: float
    xmax: float
    ymax: float
    spacing: float
    depths: tuple[float, ...]

    @property
    def x(self) -> np.ndarray:
        return self.xmin + np.arange(self.nx) * self.spacing

    @property
    def y(self) -> np.ndarray:
        return self.ymin + np.arange(self.ny) * self.spacing

    @property
    def nx(self) -> int:
        return int(math.floor((self.xmax - self.xmin) / self.spacing + 1e-9)) + 1

    @property
    def ny(self) -> int:
        return int(math.floor((self.ymax - self.ymin) / self.spacing + 1e-9)) + 1


# --- the receptors of a site model (internal metres, SI) -------------------------------
@dataclass(frozen=True)
class Building:
    """A building: its footprint, foundation depth and how it is sampled."""

    id: str
    geometry: Polygon
    depth: float                     # foundation depth below the existing ground (m)
    interior_spacing: float
    profile_step: float
    profile_bottom: float
    wall_spacing: float | None = None  # spacing of the points along each wall (m)

    def points(self) -> pd.DataFrame:
        depths = np.arange(self.depth + self.profile_step, self.profile_bottom + 1e-9,
                           self.profile_step)
        return building_points(self.id, self.geometry, self.depth,
                               interior_spacing=self.interior_spacing, profile_depths=depths,
                               wall_spacing=self.wall_spacing)


@dataclass(frozen=True)
class Pipe:
    """A buried pipe: its route (in chainage order), crown depth and sampling."""

    id: str
    geometry: LineString
    depth: float | list              # crown depth (m): one value or one a vertex
    diameter: float
    spacing: float
    differential_length: float       # length of the largest differential settlement (m)

    def points(self) -> pd.DataFrame:
        return pipe_points(self.id, self.geometry, self.depth, spacing=self.spacing,
                           diameter=self.diameter)


@dataclass(frozen=True)
class Borehole:
    """A vertical profile of points from `top` to `bottom` depth in steps of `step`."""

    id: str
    geometry: Point
    top: float
    bottom: float
    step: float

    @property
    def depth(self) -> float:
        """The shallowest point (for choosing the cell size)."""
        return self.top

    def points(self) -> pd.DataFrame:
        return borehole_points(self.id, self.geometry.x, self.geometry.y, self.top,
                               self.bottom, self.step)


@dataclass(frozen=True)
class Receptors:
    """The receptors of a site, by kind."""

    buildings: tuple[Building, ...] = ()
    pipes: tuple[Pipe, ...] = ()
    boreholes: tuple[Borehole, ...] = ()

    def by_table(self) -> dict[str, tuple]:
        """Site-file table name → its receptors."""
        return {"buildings": self.buildings, "pipes": self.pipes, "boreholes": self.boreholes}

    def __iter__(self):
        for items in self.by_table().values():
            yield from items


def plan_grid(extent, spacing: float, depths, *, name: str = "plan") -> PlanGrid:
    """Validate and describe a plan grid of stress nodes.

    Parameters
    ----------
    extent : (xmin, ymin, xmax, ymax)
        Plan extent in m, with xmax > xmin and ymax > ymin.
    spacing : float
        Node pitch in m.
    depths : sequence of float
        Slice depths, m below ground, >= 0, distinct; stored in increasing order.
    name : str
        Used in output file names (letters, digits, ``_`` and ``-``).

    Returns
    -------
    PlanGrid
        The nodes (``x``, ``y``, ``nx``, ``ny``) and depths of the grid.

    Examples
    --------
    >>> g = plan_grid((0, 0, 20, 10), 5, [4, 1])
    >>> g.depths, g.nx, g.ny, g.x.tolist()
    ((1.0, 4.0), 5, 3, [0.0, 5.0, 10.0, 15.0, 20.0])
    """
    if not isinstance(name, str) or not _NAME.match(name):
        raise InputError(f"must be letters, digits, '_' or '-', got {name!r}", argument="name")
    try:
        xmin, ymin, xmax, ymax = (finite(v, "extent") for v in extent)
    except (TypeError, ValueError) as exc:
        if isinstance(exc, InputError):
            raise
        raise InputError(f"must be (xmin, ymin, xmax, ymax), got {extent!r}",
                         argument="extent") from None
    if not (xmax > xmin and ymax > ymin):
        raise InputError(f"must have xmax > xmin and ymax > ymin, got {tuple(extent)}",
                         argument="extent")
    d = np.sort(depths_array(depths, "depths"))
    if np.any(np.diff(d) <= 0):
        raise InputError("depths must be distinct", argument="depths")
    return PlanGrid(name, xmin, ymin, xmax, ymax, positive(spacing, "spacing"),
                    tuple(float(v) for v in d))


# --- elevations ------------------------------------------------------------------------
def depth_from_elevation(x, y, elevation, ground, *, name: str = "elevation") -> np.ndarray:
    """Depth below the existing ground (m) of points given by elevation.

    Parameters
    ----------
    x, y : float or array_like
        Plan position (m).
    elevation : float or array_like
        Elevation of the point (m, same datum as `ground`).
    ground : float or callable
        Existing ground elevation: a constant, or a function ``ground(x, y)`` taking and
        returning arrays.
    name : str
        What the points are, used in the error message (e.g. ``"pipe P3 invert"``).

    Raises
    ------
    InputError
        When a point lies above the ground surface.

    Examples
    --------
    >>> depth_from_elevation([0, 10], [0, 0], [95.0, 96.5], lambda x, y: 100 - 0.1 * x)
    array([5. , 2.5])
    """
    xa, ya = np.broadcast_arrays(finite_array(x, "x"), finite_array(y, "y"))
    z = finite_array(elevation, name)
    g = finite_array(ground(xa, ya) if callable(ground) else ground, "ground")
    depth = np.broadcast_to(g, np.broadcast_shapes(g.shape, z.shape, xa.shape)) - z
    if np.any(depth < 0):
        k = int(np.argmin(depth))
        raise InputError(f"{name} is above the ground surface by {-depth.flat[k]:.3f} m "
                         f"at point {k}", argument=name)
    return depth


# --- reading receptor layers -----------------------------------------------------------
_GEOMETRY = {"building": "Polygon", "pipe": "LineString", "borehole": "Point"}


def read_receptor_layer(path, kind: str, *, id_field: str = "id", required_fields=(),
                        layer=None, to_site_crs: Callable | None = None, crs=None,
                        target_crs=None):
    """Read buildings, pipes or boreholes from a vector file or a GeoDataFrame.

    Parameters
    ----------
    path : str, path-like, geopandas.GeoDataFrame or geopandas.GeoSeries
        Any vector format GDAL reads (GeoJSON, GeoPackage, shapefile…), or the receptors
        already in memory, checked the same way. A GeoSeries has no attributes: its index
        gives the receptor ids.
    kind : {"building", "pipe", "borehole"}
        Sets the geometry type every feature must have (Polygon, LineString, Point).
    id_field : str
        Attribute holding the receptor id; values must be present and unique.
    required_fields : sequence of str
        Further attributes that must exist and be filled (e.g. a level field).
    layer : str or int, optional
        Layer of a multi-layer file.
    to_site_crs : callable, optional
        ``to_site_crs(frame) -> frame``: reprojects or checks the CRS (the caller decides
        the policy and raises InputError itself when the CRS is unusable).
    crs : CRS-like, optional
        CRS to assume when the layer states none (with `target_crs`).
    target_crs : CRS-like, optional
        The site CRS: the geometry is reprojected to it (pyproj) and returned in internal
        metres with the metre twin of the site CRS (:func:`fillstress.crs.metric_twin`),
        by the rules of :func:`fillstress.read_footprints`. Not with `to_site_crs`.

    Returns
    -------
    geopandas.GeoDataFrame
        The attributes with a ``receptor_id`` string column first and the geometry (in
        the layer's own CRS unless `to_site_crs` or `target_crs` says otherwise).

    Raises
    ------
    InputError
        Naming the file (or the GeoDataFrame) for a wrong geometry, a missing or repeated
        id, a missing field, degrees that cannot be, or a layer and site without a CRS.

    Examples
    --------
    >>> import tempfile, os, geopandas as gpd
    >>> from shapely.geometry import Point
    >>> d = tempfile.mkdtemp()
    >>> f = os.path.join(d, "bh.geojson")
    >>> gpd.GeoDataFrame({"id": ["BH1"]}, geometry=[Point(1, 2)], crs="EPSG:32633").to_file(f)
    >>> read_receptor_layer(f, "borehole")["receptor_id"].tolist()
    ['BH1']
    >>> holes = gpd.GeoSeries([Point(990000, 210000)], index=["BH-7"], crs="EPSG:2263")
    >>> frame = read_receptor_layer(holes, "borehole", target_crs="EPSG:2263")
    >>> frame["receptor_id"].tolist(), round(frame.geometry.iloc[0].x, 3)
    (['BH-7'], 301752.603)
    """
    if kind not in _GEOMETRY:
        raise InputError(f"must be one of {', '.join(KINDS)}, got {kind!r}", argument="kind")
    if to_site_crs is not None and target_crs is not None:
        raise InputError("give to_site_crs or target_crs, not both", argument="target_crs")
    what = f"{kind} receptors"
    # one outline or line a receptor: multi-part features are refused (split them)
    frame = read_vector(path, _GEOMETRY[kind], parts=False, layer=layer, what=what)
    if _is_series(path) and id_field not in frame.columns:
        frame[id_field] = frame.index.astype(str)
    path = Path(path) if isinstance(path, (str, os.PathLike)) else source_name(path, what)
    ids = _checked_ids(Layer.of_frame(frame), id_field, required_fields, path,
                       frame.crs if frame.crs is not None else crs)
    frame = frame.assign(receptor_id=ids)
    frame = frame[["receptor_id"] + [c for c in frame.columns if c != "receptor_id"]]
    if to_site_crs is not None:
        return to_site_crs(frame)
    if target_crs is None:
        return frame
    source, site = layer_and_site_crs(frame, crs, target_crs, path)
    moved = frame.set_geometry(crsmod.to_site(np.asarray(frame.geometry.values, dtype=object),
                                              source, site, file=path), crs=None)
    return moved.set_crs(crsmod.metric_twin(site[0]), allow_override=True)


def receptor_layer(path, kind: str, id_field: str = "id",
                   required_fields=()) -> tuple[Layer, np.ndarray]:
    """The receptor file at `path` as a :class:`~fillstress.io.vectors.Layer` (read without
    pandas where it can be), checked as :func:`read_receptor_layer` checks it, and the
    receptor ids (text, stripped) in feature order.

    Examples
    --------
    >>> import json, tempfile, os
    >>> f = os.path.join(tempfile.mkdtemp(), "bh.geojson")
    >>> with open(f, "w") as out:
    ...     json.dump({"type": "FeatureCollection", "features": [{"type": "Feature",
    ...                "properties": {"id": " BH1 "},
    ...                "geometry": {"type": "Point", "coordinates": [1, 2]}}]}, out)
    >>> layer, ids = receptor_layer(f, "borehole")
    >>> ids.tolist(), layer.geometry[0].x
    (['BH1'], 1.0)
    """
    layer = read_layer(path, _GEOMETRY[kind], parts=False, what=f"{kind} receptors")
    return layer, _checked_ids(layer, id_field, required_fields, Path(path), layer.crs)


def _checked_ids(layer: Layer, id_field: str, required_fields, path, crs) -> np.ndarray:
    """The receptor ids of `layer`, after checking its id and required fields and its
    coordinates against `crs`."""
    for field in (id_field, *required_fields):
        _check_field(layer, field, path)
    ids = np.array([str(v).strip() for v in layer[id_field]], dtype=object)
    seen: set = set()
    dup = next((i for i in ids if i in seen or seen.add(i)), None)
    if dup is not None:
        raise InputError(f"duplicate receptor id {dup!r}", file=path, key=id_field)
    crsmod.check_degrees(layer.geometry, crs, file=path)
    return ids


def _is_series(source) -> bool:
    import geopandas as gpd
    return isinstance(source, gpd.GeoSeries)


def _check_field(layer: Layer, field: str, path: Path) -> None:
    if field not in layer.fields:
        have = ", ".join(c for c in layer.columns if c != "geometry") or "none"
        raise InputError(f"attribute {field!r} is missing (attributes: {have})", file=path,
                         key=field)
    empty = [_blank(v) for v in layer[field]]
    if any(empty):
        raise InputError(f"feature {empty.index(True)} has no value for {field!r}",
                         file=path, key=field)


def _blank(value) -> bool:
    """Missing (None, NaN, NaT, pandas.NA) or empty text."""
    try:
        if value != value:  # noqa: PLR0124 (NaN and NaT are unequal to themselves)
            return True
    except TypeError:                       # pandas.NA has no truth value
        return True
    return value is None or str(value).strip() == ""


# --- summaries -------------------------------------------------------------------------
def summarise(points: pd.DataFrame, value_column: str) -> pd.DataFrame:
    """Per receptor: number of points, the maximum of `value_column` and where it occurs.

    Returns one row per (``receptor_kind``, ``receptor_id``) in first-seen order, with
    ``n_points``, ``<value_column>_max`` and the ``point_id``, ``x``, ``y``, ``depth`` of the
    point holding it (the first such point on ties).

    Examples
    --------
    >>> import pandas as pd
    >>> pts = borehole_points("BH1", 0, 0, 0, 2, 1).assign(dsz=[10.0, 30.0, 20.0])
    >>> summarise(pts, "dsz")[["receptor_id", "n_points", "dsz_max", "depth"]].values.tolist()
    [['BH1', 3, 30.0, 1.0]]
    """
    needed = ["receptor_kind", "receptor_id", "point_id", "x", "y", "depth", value_column]
    missing = [c for c in needed if c not in points.columns]
    if missing:
        raise InputError(f"missing column(s) {', '.join(missing)}", argument="points")
    import pandas as pd
    values = pd.to_numeric(points[value_column], errors="coerce")
    if not np.all(np.isfinite(values.to_numpy(dtype=float))):
        raise InputError(f"column {value_column!r} has missing or non-finite values",
                         argument="points")
    groups = points.assign(_v=values).groupby(["receptor_kind", "receptor_id"], sort=False)
    at_max = points.loc[groups["_v"].idxmax().to_numpy()]
    out = at_max[["receptor_kind", "receptor_id"]].reset_index(drop=True)
    out["n_points"] = groups.size().to_numpy()
    out[f"{value_column}_max"] = at_max[value_column].to_numpy(dtype=float)
    for col in ("point_id", "x", "y", "depth"):
        out[col] = at_max[col].to_numpy()
    return out
