"""The layout engine of ``fillstress design``: a site whose bodies are edited one at a time.

Stress is linear in the load (superposition), so each body keeps its own surface pressure
on the analysis lattice, its exact FFT slice at the chosen depth (solve/slices.py) and its
Δσz at every receptor point (direct summation, solve/auto.py). An edit re-rasterises the
changed body only, recomputes its two contributions and sums. Every edit goes through the
site file's own validation (site/config.py ``validate``), so the messages are the file's.

The working lattice is the one a fresh build would choose, grown by a quarter of its size
on every side so that a body can move without a rebuild; it is snapped to multiples of the
cell as every site lattice is, so a body rasterises to the same cells as in a fresh run.
When an edit changes the cell a fresh build would choose, or leaves the working lattice,
every body is rasterised again on the new one.
"""
from __future__ import annotations

import copy
import math
import time
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import shapely

from ..decide.limits import Limit, check_limits
from ..errors import InputError
from ..grid import GridSpec
from ..site.build import analysis_grid, build_site, place_body, rebuild_body
from ..site.config import read_toml, validate
from ..solve.auto import stress_at_points
from ..solve.slices import SlicePlan

#: Scalar keys of a body the page edits (each validated as in the site file).
EDITABLE_KEYS = ("unit_weight", "stage", "height", "repose_angle", "crest_height",
                 "crest_width", "side_slope", "end_slope")
#: Body kinds whose plan geometry can be moved (inline or converted to inline vertices).
MOVABLE = {"pile": "outline", "footprint": "outline", "embankment": "centreline"}
GROW = 0.25            # working lattice: the fresh one grown by this share of its size


@dataclass
class Contribution:
    """One body's share of the answer: its Body, slice at the current depth, point Δσz."""

    body: object
    slice: np.ndarray
    points: np.ndarray


@dataclass
class EditTiming:
    raster_s: float = 0.0
    slice_s: float = 0.0
    points_s: float = 0.0
    total_s: float = 0.0
    full_rebuild: bool = False
    shifted: bool = False              # a move by whole cells: the cells shifted, not rasterised


@dataclass
class Layout:
    """A site being edited. Build with :func:`open_layout`."""

    path: Path
    doc: dict                          # the site file as parsed (site-file units)
    site: object                       # site.build.Site, bodies replaced as edited
    spec: GridSpec                     # the working lattice
    depth: float                       # of the slice shown (m)
    parts: dict = field(default_factory=dict)      # body name -> Contribution
    history: list = field(default_factory=list)    # earlier `doc["bodies"]`, for undo
    timing: EditTiming = field(default_factory=EditTiming)

    # --- what the page shows -------------------------------------------------------
    @property
    def xyz(self) -> np.ndarray:
        return self.site.points[["x", "y", "depth"]].to_numpy(float)

    def _placed_by(self, stage: int | None):
        return [c for c in self.parts.values() if stage is None or c.body.stage <= stage]

    def slice_total(self, stage: int | None = None) -> np.ndarray:
        """Δσz (kPa) on the slice under the bodies placed by `stage` (default: all)."""
        return sum((c.slice for c in self._placed_by(stage)), np.zeros(self.spec.shape))

    def point_total(self, stage: int | None = None) -> np.ndarray:
        """Δσz (kPa) at the receptor points under the bodies placed by `stage`."""
        return sum((c.points for c in self._placed_by(stage)), np.zeros(len(self.site.points)))

    def bodies_raw(self) -> dict:
        return copy.deepcopy(self.doc["bodies"])

    # --- edits ---------------------------------------------------------------------
    def apply(self, bodies: dict, shift: tuple | None = None) -> EditTiming:
        """Make `bodies` (the site file's [bodies] tables, site-file units) the layout.
        Raises InputError, with the site file's message, and changes nothing when the
        edited file would be refused. `shift` = (name, columns, rows): that body only
        moved by whole cells (see :meth:`move`)."""
        t0 = time.perf_counter()
        doc = {**self.doc, "bodies": bodies}
        cfg = validate(doc, self.path)
        old = self.doc["bodies"]
        changed = [n for n in bodies if bodies[n] != old.get(n)]
        ctx = self.site.context
        saved = (ctx.cfg, dict(ctx.outlines))
        timing = EditTiming()
        try:
            for name in changed:
                place_body(self.site, cfg, name)
            ctx.cfg = cfg
            for name in set(old) - set(bodies):
                ctx.outlines.pop(name)
            spec = self.spec
            fresh = analysis_grid(self.site)
            if not _fits(fresh, spec):
                spec = working_lattice(fresh, self.site.metres_per_unit)
                changed, timing.full_rebuild = list(bodies), True
            t = time.perf_counter()
            moved_only = shift and not timing.full_rebuild and changed == [shift[0]]
            built = {shift[0]: self._shifted(*shift)} if moved_only else {}
            timing.shifted = built.get(shift and shift[0]) is not None
            built = {n: built.get(n) or self._rasterise(n, spec) for n in changed}
            timing.raster_s = time.perf_counter() - t
        except InputError:
            ctx.cfg, ctx.outlines = saved
            raise
        self.history.append(old)
        self.doc, self.spec = doc, spec
        parts = {n: self.parts[n] for n in bodies if n not in built}
        parts.update({n: self._contribution(b, timing) for n, b in built.items()})
        self.parts = {n: parts[n] for n in bodies}          # the file's order
        self.site.bodies = [c.body for c in self.parts.values()]
        self.site.spec = spec
        timing.total_s = time.perf_counter() - t0
        self.timing = timing
        return timing

    def move(self, name: str, dx: float, dy: float) -> EditTiming:
        """Move body `name` by (dx, dy) site-CRS units. By whole cells its cells are shifted
        instead of rasterised again: the same values, since a body's cell averages do not
        change when it moves by whole cells of the lattice."""
        cell = self.spec.dx / self.site.metres_per_unit
        steps = (dx / cell, dy / cell)
        whole = all(abs(k - round(k)) < 1e-9 for k in steps)
        return self.apply(moved(self, name, dx, dy),
                          shift=(name, round(steps[0]), round(steps[1])) if whole else None)

    def _shifted(self, name: str, columns: int, rows: int):
        """The body's thickness moved by whole cells; None when it would leave the lattice."""
        body = self.parts[name].body
        t, (ny, nx) = body.thickness, self.spec.shape
        loaded = np.argwhere(t != 0)
        if not loaded.size:
            return None
        (j0, i0), (j1, i1) = loaded.min(axis=0), loaded.max(axis=0) + 1
        if i0 + columns < 0 or j0 + rows < 0 or i1 + columns > nx or j1 + rows > ny:
            return None
        thickness = self.spec.zeros()
        thickness[j0 + rows:j1 + rows, i0 + columns:i1 + columns] = t[j0:j1, i0:i1]
        return replace(body, thickness=thickness)

    def undo(self) -> EditTiming | None:
        """Back to the layout before the last edit (None when there is none)."""
        if not self.history:
            return None
        previous = self.history.pop()
        timing = self.apply(previous)
        self.history.pop()                   # the undo itself is not an edit to undo
        return timing

    def set_depth(self, depth_m: float) -> EditTiming:
        if not np.isfinite(depth_m) or depth_m < 0:
            raise InputError(f"must be a depth >= 0 below the ground, got {depth_m!r}",
                             argument="depth")
        t0 = time.perf_counter()
        self.depth = float(depth_m)
        timing = EditTiming()
        for c in self.parts.values():
            t = time.perf_counter()
            c.slice = self._slice(c.body)
            timing.slice_s += time.perf_counter() - t
        timing.total_s = time.perf_counter() - t0
        self.timing = timing
        return timing

    # --- the numbers -------------------------------------------------------------------
    def _rasterise(self, name: str, s: GridSpec):
        """Body `name` on lattice `s`, rasterised on the cells around its outline only (the
        same lattice, so the same cell values) and placed in zeros. The outline of the
        build is the grid's estimate of the body's reach (an embankment's ends as discs of
        its reach, where the toe has corners up to √2 times as far), so the window has
        cells to spare, and the whole lattice is taken when the body still reaches beyond."""
        x0, y0, x1, y1 = self.site.context.outlines[name].bounds
        kind = self.site.context.cfg["bodies"][name]["kind"]
        reach = min(x1 - x0, y1 - y0) / 2 if kind == "embankment" else 0.0
        spare = 4 + int(np.ceil(0.5 * reach / s.dx))
        i0 = min(max(0, int(np.floor((x0 - s.x0) / s.dx)) - spare), s.nx - 1)
        j0 = min(max(0, int(np.floor((y0 - s.y0) / s.dy)) - spare), s.ny - 1)
        i1 = max(min(s.nx, int(np.ceil((x1 - s.x0) / s.dx)) + spare), i0 + 1)
        j1 = max(min(s.ny, int(np.ceil((y1 - s.y0) / s.dy)) + spare), j0 + 1)
        window = GridSpec(s.x0 + i0 * s.dx, s.y0 + j0 * s.dy, s.dx, s.dy, i1 - i0, j1 - j0,
                          s.crs)
        try:
            body = rebuild_body(self.site, name, window)
        except InputError:
            if (i0, j0, i1, j1) == (0, 0, s.nx, s.ny):
                raise
            i0, j0, i1, j1 = 0, 0, s.nx, s.ny
            body = rebuild_body(self.site, name, s)
        thickness = s.zeros()
        thickness[j0:j1, i0:i1] = body.thickness
        return replace(body, thickness=thickness, spec=s)

    def _slice(self, body) -> np.ndarray:
        s = self.spec
        return SlicePlan(body.pressure, s.dx, s.dy, self.site.method,
                         self.site.poisson).at_depth(self.depth)

    def _contribution(self, body, timing: EditTiming) -> Contribution:
        t = time.perf_counter()
        sl = self._slice(body)
        timing.slice_s += time.perf_counter() - t
        t = time.perf_counter()
        xyz = self.xyz
        pts = (stress_at_points(self.spec.load_grid(body.pressure), xyz, self.site.method,
                                self.site.poisson) if len(xyz) else np.zeros(0))
        timing.points_s += time.perf_counter() - t
        return Contribution(body, sl, pts)

    def receptor_table(self, limits, stage: int | None = None) -> tuple[list[dict], object]:
        """One row a receptor: its point of largest Δσz (SI) and, with a soil profile, the
        largest Δσz/σ'v0, under the bodies placed by `stage`; and the limit check of those
        values."""
        p = self.site.points.assign(dsz=self.point_total(stage))
        soil = self.site.soil
        ratio = np.full(len(p), np.nan)
        if soil is not None:
            depth = p["depth"].to_numpy(float)
            inside = depth <= soil.bottom_m
            sigma = np.full(len(p), np.nan)
            sigma[inside] = soil.sigma_v0_eff(depth[inside])
            with np.errstate(divide="ignore", invalid="ignore"):
                ratio = np.where(sigma > 0, p["dsz"].to_numpy() / sigma, np.nan)
        p = p.assign(stress_ratio=ratio)
        rows, values = [], {}
        for rid, g in p.groupby("receptor_id", sort=False):
            top = g.loc[g["dsz"].idxmax()]
            r = g["stress_ratio"].dropna()
            row = {"receptor_id": str(rid), "kind": top["receptor_kind"],
                   "point_id": top["point_id"], "x": float(top["x"]), "y": float(top["y"]),
                   "depth": float(top["depth"]), "dsz": float(top["dsz"]),
                   "stress_ratio": float(r.max()) if len(r) else None}
            rows.append(row)
            values[str(rid)] = {"stress_increase": row["dsz"],
                                **({"stress_ratio": row["stress_ratio"]} if len(r) else {})}
        return rows, check_limits(values, limits)


def open_layout(path, depth_m: float | None = None) -> Layout:
    """Read a site file and compute each body's contribution.

    Examples
    --------
    >>> from fillstress.examples import example_site
    >>> lay = open_layout(example_site("preload_surcharge"))
    >>> list(lay.parts), lay.depth
    (['first_lift', 'second_lift'], 2.0)
    """
    path = Path(path)
    doc = read_toml(path, "site file")
    site = build_site(validate(doc, path))
    spec = working_lattice(site.spec, site.metres_per_unit)
    lay = Layout(path, doc, site, spec, default_depth(site) if depth_m is None else depth_m)
    timing = EditTiming()
    bodies = {n: lay._rasterise(n, spec) for n in doc["bodies"]}
    lay.parts = {n: lay._contribution(b, timing) for n, b in bodies.items()}
    site.bodies, site.spec = [c.body for c in lay.parts.values()], spec
    return lay


def default_depth(site) -> float:
    """The first plan-grid depth, else the shallowest receptor depth > 0, else 1 m."""
    for g in site.plan_grids:
        return float(min(g.depths))
    d = site.points["depth"].to_numpy(float)
    d = d[d > 0]
    return float(d.min()) if d.size else 1.0


def working_lattice(fresh: GridSpec, unit: float) -> GridSpec:
    """`fresh` grown by GROW of its larger side on every side, on the same cell lattice."""
    x0, y0, x1, y1 = fresh.extent
    grow = GROW * max(x1 - x0, y1 - y0)
    return GridSpec.covering(fresh.extent, fresh.dx, margin=grow, unit=unit, crs=fresh.crs)


def _fits(fresh: GridSpec, working: GridSpec) -> bool:
    """Whether `working` holds `fresh` with the same cell (so a body's cells are the same)."""
    a, b = fresh.extent, working.extent
    tol = 1e-6 * working.dx
    return (abs(fresh.dx - working.dx) <= 1e-9 * working.dx and a[0] >= b[0] - tol
            and a[1] >= b[1] - tol and a[2] <= b[2] + tol and a[3] <= b[3] + tol)


def stress_limits(ratio: float | None, stress_kpa: float | None) -> tuple[Limit, ...]:
    """The limits the page checks: Δσz/σ'v0 and Δσz, each when given."""
    out = []
    if ratio:
        out.append(Limit("stress_ratio", ratio, "stated on the design page", name="Δσz/σ'v0"))
    if stress_kpa:
        out.append(Limit("stress_increase", stress_kpa, "stated on the design page",
                         name="Δσz"))
    return tuple(out)


def movable_geometry(lay: Layout, name: str) -> tuple[str, list] | None:
    """(key, vertices in site-file units) of a body that can be moved: its inline outline or
    centreline, or the single polygon or line read from its file; None otherwise."""
    raw = lay.doc["bodies"][name]
    key = MOVABLE.get(raw.get("kind"))
    if key is None:
        return None
    if raw.get(key) is not None:
        return key, [list(map(float, v)) for v in raw[key]]
    if raw["kind"] == "footprint" and raw.get("height") is None:
        return None                     # heights from a file's attribute or vertex z
    ctx = lay.site.context
    geom = ctx.lines.get(name) if key == "centreline" else ctx.outlines.get(name)
    if geom is None or geom.geom_type not in ("Polygon", "LineString"):
        return None
    coords = np.asarray(geom.exterior.coords if key == "outline" else geom.coords)[:, :2]
    if key == "outline":
        coords = coords[:-1]
    return key, (coords / lay.site.metres_per_unit).tolist()


def moved(lay: Layout, name: str, dx: float, dy: float) -> dict:
    """The [bodies] tables with body `name` moved by (dx, dy) site-CRS units; a body read
    from a file gets its vertices inline (the file is left alone)."""
    return _placed(lay, name, lambda xy: xy + [dx, dy])


def rotated(lay: Layout, name: str, degrees: float) -> dict:
    """The [bodies] tables with body `name` turned `degrees` anticlockwise about the centre
    of its outline (the middle of a centreline)."""
    a = np.radians(degrees)
    turn = np.array([[np.cos(a), np.sin(a)], [-np.sin(a), np.cos(a)]])   # row vectors

    def about_centre(xy):
        if lay.doc["bodies"][name]["kind"] == "embankment":
            c = shapely.LineString(xy).interpolate(0.5, normalized=True)
        else:
            c = shapely.Polygon(xy).centroid
        return (xy - [c.x, c.y]) @ turn + [c.x, c.y]
    return _placed(lay, name, about_centre)


def _placed(lay: Layout, name: str, where) -> dict:
    """The [bodies] tables with the plan vertices of body `name` replaced by
    ``where(vertices)`` ((N, 2) site-CRS units; z values kept), inline."""
    found = movable_geometry(lay, name)
    if found is None:
        raise InputError("this body's geometry comes from a file that cannot be moved here "
                         "(several features, or heights per feature): edit that file",
                         file=lay.path, key=f"bodies.{name}")
    key, xy = found
    bodies = lay.bodies_raw()
    raw = bodies[name]
    for k in ("file", "where", "id_field"):
        raw.pop(k, None)
    plan = where(np.array([v[:2] for v in xy], float))
    raw[key] = [[float(p[0]), float(p[1]), *v[2:]] for p, v in zip(plan, xy)]
    return bodies


def template(lay: Layout, kind: str, x: float, y: float) -> dict:
    """The [bodies] tables with a new body of `kind` centred at (x, y) site-CRS units:
    "rectangle", a 20 m square pad 2 m high; "pile", a 12 m radius pile at 35°; or
    "embankment", a 60 m segment running east, 2 m high with a 4 m crest and 2:1 sides."""
    u, f = lay.site.units, lay.site.metres_per_unit
    bodies = lay.bodies_raw()
    n = 1
    while f"{kind}_{n}" in bodies:
        n += 1
    if kind == "rectangle":
        h = 10.0 / f
        body = {"kind": "footprint", "unit_weight": round(u.out(19.0, "unit_weight"), 3),
                "height": round(u.length_out(2.0), 3),
                "outline": [[x - h, y - h], [x + h, y - h], [x + h, y + h], [x - h, y + h]]}
    elif kind == "pile":
        ring = shapely.Point(x, y).buffer(12.0 / f, quad_segs=8).exterior.coords[:-1]
        body = {"kind": "pile", "unit_weight": round(u.out(17.0, "unit_weight"), 3),
                "repose_angle": 35.0, "outline": [[round(a, 3), round(b, 3)] for a, b in ring]}
    elif kind == "embankment":
        h = 30.0 / f
        # the profile runs a little past the line's end: its length in the site's length
        # unit differs from its length in CRS units (a survey foot is not a foot)
        end = math.ceil(u.length_out(60.0) * 10 + 1) / 10
        body = {"kind": "embankment", "unit_weight": round(u.out(19.0, "unit_weight"), 3),
                "centreline": [[x - h, y], [x + h, y]], "crest_width": round(u.length_out(4.0), 3),
                "side_slope": 2.0, "heights": [[0.0, round(u.length_out(2.0), 3)],
                                               [end, round(u.length_out(2.0), 3)]]}
    else:
        raise InputError(f"must be rectangle, pile or embankment, got {kind!r}",
                         argument="template")
    bodies[f"{kind}_{n}"] = body
    return bodies
