"""The site model: a validated site file turned into fill bodies on one analysis grid,
a soil profile and receptor sample points, all in internal metres.

Data flow: site.config.read_site_file → build_site → Site (used by run.compute).
"""
from __future__ import annotations

import time
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
import shapely
from shapely.geometry import LineString, Point, Polygon

from .. import crs as crsmod
from . import receptors as rc
from ..errors import InputError
from ..grid import GridSpec, LoadGrid
from .config import SiteConfig, read_site_file
from .ground_use import check_body_ground, depths_from_elevations
from ..units import UnitSystem

# Receptor kinds: the site-file table and the point-table kind.
RECEPTOR_TABLES = {"buildings": "building", "pipes": "pipe", "boreholes": "borehole"}


@dataclass
class Site:
    """Everything a run needs, in SI and internal metres (site CRS coordinates × factor)."""

    config: SiteConfig
    name: str
    description: str
    units: UnitSystem
    crs: object                      # pyproj.CRS or None
    metres_per_unit: float           # site-CRS unit → metres (1, 0.3048, 1200/3937)
    spec: GridSpec
    bodies: list                     # shapes.bodies.Body
    method: str
    poisson: float | None
    ground: object                   # callable z(x, y) in metres, or None
    soil: object                     # soil.SoilProfile or None
    points: pd.DataFrame             # every receptor sample point
    receptors: dict                  # kind → list of dicts (id, geometry, attributes)
    plan_grids: list = field(default_factory=list)
    cut_reports: dict = field(default_factory=dict)  # body → surfaces.CutReport
    body_factors: tuple = (1.0, 1.0)  # (unit weight, thickness) scale of a batch variant
    context: object = field(default=None, repr=False)  # what rebuilding the bodies needs
    drains: list = field(default_factory=list)  # (id, plan Polygon, drains.VerticalDrains)

    @property
    def warnings(self) -> list:
        """What building the site found doubtful (shown by check and by a run)."""
        return self.context.warnings if self.context is not None else []

    @property
    def path(self) -> Path:
        return self.config.path

    @property
    def stages(self) -> list[int]:
        return sorted({b.stage for b in self.bodies})

    def load_grid(self, stage: int | None = None, spec: GridSpec | None = None) -> LoadGrid:
        """Surface pressure (kPa) of all bodies up to `stage` (default: the last)."""
        from ..shapes.bodies import stage_pressure
        stage = self.stages[-1] if stage is None else stage
        if stage not in self.stages:
            raise InputError(f"no construction stage {stage}; stages are {self.stages}",
                             argument="stage")
        bodies = self.bodies if spec is None else self.rebuild_bodies(spec)
        spec = spec or self.spec
        return spec.load_grid(stage_pressure(bodies, spec, stage))

    def rebuild_bodies(self, spec: GridSpec) -> list:
        """The same bodies rasterised on another lattice (the convergence check)."""
        gamma, height = self.body_factors
        return [scaled_body(_build_body(self.context, name, raw, spec)[0], gamma, height)
                for name, raw in self.config["bodies"].items()]

    def fill_thickness(self, stage: int | None = None) -> np.ndarray:
        stage = self.stages[-1] if stage is None else stage
        return sum((b.sign * b.thickness for b in self.bodies if b.stage <= stage),
                   self.spec.zeros())

    def ground_elevation_grid(self, filled: bool = False):
        """Existing ground elevation at the cell centres (m), or None without [ground];
        NaN where the ground has no data, or with `filled` the nearest cell's value there
        (for drawing only: nothing is computed where the ground is missing)."""
        if self.ground is None:
            return None
        gx, gy = np.meshgrid(self.spec.x_centres, self.spec.y_centres)
        z = self.ground(gx, gy)
        gap = ~np.isfinite(z)
        if filled and gap.any() and not gap.all():
            from scipy.ndimage import distance_transform_edt
            nearest = distance_transform_edt(gap, return_distances=False, return_indices=True)
            z = z[tuple(nearest)]
        return z


def scaled_body(body, unit_weight_factor: float = 1.0, height_factor: float = 1.0):
    """`body` with its unit weight and thickness scaled (batch variants)."""
    from dataclasses import replace
    if unit_weight_factor == 1.0 and height_factor == 1.0:
        return body
    peak = None if body.max_height_m is None else body.max_height_m * height_factor
    return replace(body, unit_weight=body.unit_weight * unit_weight_factor,
                   thickness=np.asarray(body.thickness) * height_factor, max_height_m=peak)


@contextmanager
def _located(cfg: SiteConfig, where: str):
    """Re-raise a library InputError with the site file and key it came from."""
    try:
        yield
    except InputError as exc:
        if exc.file and exc.file != str(cfg.path):
            raise                     # already names its own data file
        key = where if not exc.argument else f"{where} ({exc.argument})"
        raise InputError(exc.reason, file=cfg.path, key=key) from None


@dataclass
class _Context:
    """What building the bodies needs, kept so they can be rebuilt on another lattice
    without reading any file again."""

    cfg: SiteConfig
    site_crs: tuple | None          # (pyproj.CRS, factor) or None
    factor: float
    ground: object = None
    outlines: dict = field(default_factory=dict)     # body → plan polygon (grid extent)
    lines: dict = field(default_factory=dict)        # embankment → centreline
    footprints: dict = field(default_factory=dict)   # body → footprint frame with heights
    surfaces: dict = field(default_factory=dict)     # (path, name) → surface
    build_seconds: float = 0.0                       # time taken to rasterise the bodies
    cell_rule: str = ""                              # why the cell is the size it is
    ground_source: str = ""                          # "[ground] points 'survey.csv'"
    warnings: list = field(default_factory=list)     # found while building, for check

    def xy(self, coords) -> np.ndarray:
        """Inline site-file coordinates (CRS units) → internal metres."""
        arr = np.asarray(coords, dtype=float)
        arr[:, :2] *= self.factor
        return arr

    def surface(self, path: Path, surface_name=None):
        """A surface file, read once."""
        key = (Path(path), surface_name)
        if key not in self.surfaces:
            from ..shapes.surfaces import read_surface
            self.surfaces[key] = read_surface(path, site_crs=self.site_crs,
                                              z_to_m=self.cfg.units.length_to_m,
                                              surface_name=surface_name)
        return self.surfaces[key]


def load_site(path) -> Site:
    """Read a site file and build its model.

    Examples
    --------
    >>> from fillstress.examples import example_site
    >>> site = load_site(example_site("stockpile_yard"))
    >>> site.name, [b.name for b in site.bodies]
    ('Kestrel Quay ore yard', ['ore_east', 'coal_west', 'aggregate_north'])
    """
    return build_site(read_site_file(path))


def build_site(cfg: SiteConfig) -> Site:
    s = cfg["site"]
    with _located(cfg, "site.crs"):
        site_crs = crsmod.site_crs(s["crs"]) if s.get("crs") else None
    factor = site_crs[1] if site_crs else 1.0
    ctx = _Context(cfg, site_crs, factor)
    ctx.ground = _ground(ctx)
    ctx.outlines = {name: _body_outline(ctx, name, raw) for name, raw in cfg["bodies"].items()}
    receptors = _receptors(ctx)
    spec = _analysis_grid(ctx, ctx.outlines, receptors)
    t0 = time.perf_counter()
    built = {name: _build_body(ctx, name, raw, spec) for name, raw in cfg["bodies"].items()}
    ctx.build_seconds = time.perf_counter() - t0     # for the run estimate
    grid = cfg.get("grid") or {}
    return Site(cfg, s["name"], s.get("description") or "", cfg.units,
                site_crs[0] if site_crs else None, factor, spec,
                [body for body, _ in built.values()],
                grid.get("method", "boussinesq"),
                grid.get("poisson") if grid.get("method") == "westergaard" else None,
                ctx.ground, _soil(cfg), _points(ctx, receptors), receptors,
                _plan_grids(ctx, spec),
                cut_reports={n: cut for n, (_, cut) in built.items() if cut is not None},
                context=ctx, drains=_drains(ctx))


# --- ground ---------------------------------------------------------------------------
def _ground(ctx: _Context):
    g = ctx.cfg.get("ground")
    if not g:
        return None
    given = [k for k in ("elevation", "raster", "points", "landxml") if g.get(k) is not None]
    if len(given) != 1:
        raise InputError(f"give exactly one of elevation, raster, points, landxml; got "
                         f"{given or 'none'}", file=ctx.cfg.path, key="ground")
    if given[0] == "elevation":
        z = g["elevation"]
        return lambda x, y: np.full(np.shape(x), z, dtype=float)
    ctx.ground_source = f"ground.{given[0]} '{Path(g[given[0]]).name}'"
    with _located(ctx.cfg, f"ground.{given[0]}"):
        return ctx.surface(g[given[0]], g.get("surface_name")).sample


# --- bodies ---------------------------------------------------------------------------
def _outline_from(ctx: _Context, raw: dict, where: str, line: bool = False):
    """The body's plan geometry in internal metres: inline vertices or a vector file."""
    key = "centreline" if line else "outline"
    if raw.get(key) is not None and raw.get("file") is not None:
        raise InputError(f"give either {key} or file, not both", file=ctx.cfg.path, key=where)
    if raw.get(key) is not None:
        xy = ctx.xy(raw[key])
        geom = LineString(xy) if line else Polygon(xy)
        if not line and not geom.is_valid:
            raise InputError(f"outline is not a valid polygon ({shapely.is_valid_reason(geom)})",
                             file=ctx.cfg.path, key=f"{where}.{key}")
        return geom
    if raw.get("file") is None:
        raise InputError(f"needs {key} = [[x, y], ...] or file = \"...\"",
                         file=ctx.cfg.path, key=where)
    frame = _read_vector(ctx, raw["file"], raw.get("id_field") or "id", raw.get("where"),
                         "LineString" if line else "Polygon")
    geom = shapely.union_all(frame.geometry.values)
    if line:
        geom = shapely.line_merge(geom)
        if geom.geom_type != "LineString":
            raise InputError("the selected features do not form one connected line",
                             file=raw["file"])
    return geom


def _read_vector(ctx: _Context, path: Path, id_field: str, where, geom_type: str):
    import geopandas as gpd
    try:
        frame = gpd.read_file(path)
    except Exception as exc:  # pyogrio raises several types for unreadable files
        raise InputError(f"cannot read vector file ({exc})", file=path) from None
    if frame.empty:
        raise InputError("the layer has no features", file=path)
    frame = _select(frame, id_field, where, path)
    kinds = set(frame.geometry.geom_type)
    if not kinds <= {geom_type, "Multi" + geom_type}:
        raise InputError(f"expected {geom_type} features, found {', '.join(sorted(kinds))}",
                         file=path)
    bad = ~frame.geometry.is_valid
    if bad.any():
        reason = shapely.is_valid_reason(frame.geometry[bad].iloc[0])
        raise InputError(f"{int(bad.sum())} invalid geometr{'y' if bad.sum() == 1 else 'ies'} "
                         f"({reason})", file=path)
    frame = frame.copy()
    frame["geometry"] = _to_site(ctx, frame, path)
    return frame


def _select(frame, id_field: str, where, path):
    """The features of `frame` whose `id_field` equals `where` (all when None)."""
    if where is None:
        return frame
    if id_field not in frame.columns:
        raise InputError(f"no attribute {id_field!r} to select {where!r} with; attributes: "
                         f"{', '.join(map(str, frame.columns))}", file=path)
    frame = frame[frame[id_field].astype(str) == str(where)]
    if frame.empty:
        raise InputError(f"no feature with {id_field} = {where!r}", file=path)
    return frame


def _to_site(ctx: _Context, frame, path):
    layer_crs = frame.crs
    if layer_crs is None and ctx.site_crs is None:
        raise InputError("the layer states no CRS and neither does the site; add "
                         "crs = \"EPSG:...\" to [site]", file=path)
    # to_site also refuses "degrees" that cannot be (GeoJSON without a crs member)
    return crsmod.to_site(np.asarray(frame.geometry.values, dtype=object),
                          layer_crs, ctx.site_crs, argument="crs", file=path)


def _body_outline(ctx: _Context, name: str, raw: dict):
    """Plan geometry of a body (for the grid extent), in internal metres."""
    where = f"bodies.{name}"
    kind = raw["kind"]
    if kind == "surfaces":
        with _located(ctx.cfg, f"{where}.design"):
            return shapely.box(*ctx.surface(raw["design"]).bounds)
    if kind == "embankment":
        line = ctx.lines[name] = _outline_from(ctx, raw, where, line=True)
        reach = _embankment_reach(raw)
        return line.buffer(reach, cap_style="flat").union(
            shapely.buffer(shapely.points(list(line.coords)[::len(line.coords) - 1]), reach))
    if kind == "footprint" and raw.get("file") is not None and raw.get("height") is None:
        frame = ctx.footprints[name] = _footprint_frame(ctx, raw)
        return shapely.union_all(frame.geometry.values)
    return _outline_from(ctx, raw, where)


def _footprint_frame(ctx: _Context, raw: dict):
    """Footprints with their heights (attribute or vertex z) from a vector file."""
    from ..shapes.footprints import read_footprints
    with _located(ctx.cfg, "file"):
        frame = read_footprints(raw["file"], raw.get("height_field"),
                                target_crs=ctx.site_crs or None,
                                height_to_m=ctx.cfg.units.length_to_m)
    return _select(frame, raw.get("id_field") or "id", raw.get("where"), raw["file"])


def _embankment_reach(raw: dict) -> float:
    """Largest plan distance of the embankment toe from its centreline."""
    hmax = max(h for _, h in raw["heights"])
    slope = max(raw["side_slope"], raw.get("end_slope") or raw["side_slope"])
    return raw["crest_width"] / 2 + slope * hmax


def _build_body(ctx: _Context, name: str, raw: dict, spec: GridSpec):
    """(Body on `spec`, its surfaces.CutReport or None)."""
    from ..shapes import bodies as bd
    where = f"bodies.{name}"
    with _located(ctx.cfg, where):
        thickness, cut = _BUILDERS[raw["kind"]](ctx, name, raw, spec)
        area, peak = _exact_size(ctx, name, raw)
        body = bd.Body(name=name, kind=raw["kind"], unit_weight=raw["unit_weight"],
                       stage=raw["stage"], thickness=thickness, spec=spec,
                       excavation=raw["excavation"], footprint_area_m2=area, max_height_m=peak)
    return body, cut


def _exact_size(ctx, name, raw) -> tuple[float | None, float | None]:
    """Footprint area and peak height known from the geometry itself (None: take the
    grid's estimate)."""
    kind, outline = raw["kind"], ctx.outlines.get(name)
    if kind == "pile":
        radius = shapely.maximum_inscribed_circle(outline).length   # centre → toe distance
        peak = np.tan(np.radians(raw["repose_angle"])) * radius
        if raw.get("crest_height") is not None:
            peak = min(peak, raw["crest_height"])
        return outline.area, float(peak)
    if kind == "footprint" and raw.get("height") is not None and raw.get("file") is None:
        return outline.area, raw["height"]
    if kind == "embankment":
        return None, float(max(h for _, h in raw["heights"]))
    return None, None


def _pile(ctx, name, raw, spec):
    from ..shapes.stockpile import pile_thickness
    return pile_thickness(ctx.outlines[name], raw["repose_angle"], spec,
                          crest_height=raw.get("crest_height")), None


def _footprint(ctx, name, raw, spec):
    from ..shapes import footprints as fp
    if name in ctx.footprints:
        frame = ctx.footprints[name]
        total = spec.zeros()
        for geom, h, sloping in zip(frame.geometry, frame.height_m, frame.sloping_top):
            total += (fp.sloping_footprint_thickness(geom, spec) if sloping
                      else fp.footprint_thickness(geom, h, spec))
        return total, None
    geom = ctx.outlines[name]
    if raw.get("sloping_top"):
        return fp.sloping_footprint_thickness(geom, spec), None
    if raw.get("height") is None:
        raise InputError("needs height (or height_field with file, or sloping_top = true "
                         "with z on every vertex)", argument="height")
    return fp.footprint_thickness(geom, raw["height"], spec), None


def _embankment(ctx, name, raw, spec):
    from ..shapes.embankment import embankment_thickness
    line = ctx.lines[name]
    chain, heights = np.array(raw["heights"]).T
    end = raw.get("end_slope") or raw["side_slope"]
    return embankment_thickness(
        line, spec, crest_width=raw["crest_width"], side_slope=raw["side_slope"],
        heights=heights, chainages=chain,
        start_slope="vertical" if raw["start_end"] == "vertical" else end,
        end_slope="vertical" if raw["finish_end"] == "vertical" else end), None


def _surfaces(ctx, name, raw, spec):
    from ..shapes.surfaces import fill_from_surfaces
    design = ctx.surface(raw["design"])
    if raw.get("existing") is not None:
        existing = ctx.surface(raw["existing"])
    elif ctx.ground is not None:
        existing = ctx.ground
    else:
        raise InputError("needs existing = \"...\" or a [ground] table", argument="existing")
    thickness, report = fill_from_surfaces(design, existing, spec, cut=raw["cut"])
    if raw.get("existing") is None:
        check_body_ground(ctx, name, report)
    if report.area_compared <= 0:
        raise InputError("the design and existing surfaces do not overlap inside the grid",
                         argument="design")
    return thickness, report            # the cut is reported even where it is ignored


# Each builder returns (cell-average thickness on spec, surfaces.CutReport or None).
_BUILDERS = {"pile": _pile, "footprint": _footprint, "embankment": _embankment,
             "surfaces": _surfaces}


# --- grid -----------------------------------------------------------------------------
def _analysis_grid(ctx: _Context, outlines: dict, receptors: dict) -> GridSpec:
    grid = ctx.cfg.get("grid") or {}
    fills = shapely.union_all(list(outlines.values()))
    bounds = np.array(fills.bounds)
    for items in receptors.values():
        for r in items:
            b = r["geometry"].bounds
            bounds = np.r_[np.minimum(bounds[:2], b[:2]), np.maximum(bounds[2:], b[2:])]
    margin = grid.get("margin", 10.0)
    cell = grid.get("cell")
    ctx.cell_rule = "given in [grid] cell"
    if cell is None:
        from ..shapes.bodies import choose_cell
        smallest = min(min(_feature_size(g) for g in outlines.values()), 1e9)
        width, height = bounds[2:] - bounds[:2] + 2 * margin
        u = ctx.cfg.units
        choice = choose_cell(smallest, _shallowest_depth(ctx, receptors),
                             area_m2=width * height, unit_m=u.length_to_m, unit=u.length)
        cell, ctx.cell_rule = choice.cell_m, choice.rule
    with _located(ctx.cfg, "grid"):
        return GridSpec.covering(bounds, cell, margin=margin,
                                 crs=crsmod.metric_twin(ctx.site_crs[0]) if ctx.site_crs else None)


def _feature_size(geom) -> float:
    """A plan size of a body: twice its area over its perimeter (≈ the width of a long
    strip; half the harmonic mean of a rectangle's sides)."""
    return 2 * geom.area / max(geom.length, 1e-9)


def _shallowest_depth(ctx, receptors) -> float:
    """Shallowest receptor depth below ground. Depth 0 is left out: at the surface the
    stress is the cell's own pressure, whatever the cell size. Pipes may have one depth a
    vertex."""
    depths = [d for items in receptors.values() for r in items
              for d in np.atleast_1d(r.get("depth") or 0.0) if d > 0]
    return min(depths) if depths else 1.0


# --- soil -----------------------------------------------------------------------------
_DRAINAGE = {"double": "double", "top": "single-top", "bottom": "single-bottom"}


def _soil(cfg: SiteConfig):
    s = cfg.get("soil")
    if not s:
        return None
    from ..soil import SoilLayer, SoilProfile
    layers = []
    for i, L in enumerate(s["layers"]):
        with _located(cfg, f"soil.layers[{i}]"):
            layers.append(SoilLayer(
                L["name"], L["top"], L["bottom"], L["unit_weight"], L.get("saturated_unit_weight"),
                cc=L.get("cc"), cr=L.get("cr"), e0=L.get("e0"), sigma_p_kpa=L.get("sigma_p"),
                ocr=L.get("ocr"), mv_per_kpa=L.get("mv"), modulus_kpa=L.get("modulus"),
                cv_m2_per_yr=L.get("cv"), drainage=_DRAINAGE[L.get("drainage") or "double"],
                ch_m2_per_yr=L.get("ch"), unloading_modulus_kpa=L.get("unloading_modulus"),
                c_alpha=L.get("c_alpha"), c_alpha_eps=L.get("c_alpha_eps"),
                c_alpha_ratio_surcharged=L.get("c_alpha_ratio_surcharged") or 1.0,
                end_of_primary_yr=(None if L.get("end_of_primary_days") is None
                                   else L["end_of_primary_days"] / 365.25)))
    with _located(cfg, "soil"):
        return SoilProfile(layers, s["water_table"], s.get("rigid_base"))


def _drains(ctx: _Context) -> list:
    """Vertical drain zones: (id, plan polygon in metres, VerticalDrains)."""
    from ..drains import VerticalDrains
    zones = []
    for i, raw in enumerate(ctx.cfg.get("drains") or []):
        where = f"drains[{i}]"
        with _located(ctx.cfg, f"{where}.outline"):
            poly = Polygon(ctx.xy(raw["outline"])[:, :2])
            if not poly.is_valid or poly.area <= 0:
                raise InputError("must be a valid polygon with a positive area", argument="outline")
        with _located(ctx.cfg, where):
            drains = VerticalDrains(raw["spacing"], raw["pattern"], diameter_m=raw.get("diameter"),
                                    width_m=raw.get("width"), thickness_m=raw.get("thickness"),
                                    depth_m=raw["depth"], smear_diameter_m=raw.get("smear_diameter"),
                                    k_ratio=raw["k_ratio"], kh_over_qw=raw["kh_over_qw"])
        zones.append((raw["id"], poly, drains))
    return zones


# --- receptors ------------------------------------------------------------------------
def _level(ctx: _Context, raw: dict, where: str, geom, depth_key: str, elevation_key: str):
    """Depth (m) of a receptor from a stated depth or an elevation and the ground."""
    if raw.get(depth_key) is not None:
        return raw[depth_key]
    if raw.get(elevation_key) is not None:
        if ctx.ground is None:
            raise InputError(f"{elevation_key} needs a [ground] table to give depths",
                             file=ctx.cfg.path, key=f"{where}.{elevation_key}")
        c = geom.centroid
        with _located(ctx.cfg, f"{where}.{elevation_key}"):
            elev = np.atleast_1d(raw[elevation_key])[0]
            return float(depths_from_elevations(ctx, (c.x, c.y), elev,
                                                f"{where}.{elevation_key}", "foundation")[0])
    return None


def _receptors(ctx: _Context) -> dict:
    out = {}
    for table in RECEPTOR_TABLES:
        items = []
        for i, raw in enumerate(ctx.cfg.get(table) or []):
            items += _receptor_items(ctx, table, raw, f"{table}[{i}]")
        ids = [r["id"] for r in items]
        dup = {x for x in ids if ids.count(x) > 1}
        if dup:
            raise InputError(f"receptor ids must be unique; repeated: {', '.join(sorted(dup))}",
                             file=ctx.cfg.path, key=table)
        out[table] = items
    return out


def _receptor_items(ctx, table, raw, where) -> list[dict]:
    if table == "boreholes":
        geom = Point(raw["x"] * ctx.factor, raw["y"] * ctx.factor)
        return [{"id": raw["id"], "geometry": geom, "top": raw["top"], "bottom": raw["bottom"],
                 "step": raw["step"], "depth": raw["top"]}]
    line = table == "pipes"
    key = "line" if line else "outline"
    if raw.get(key) is not None:
        if not raw.get("id"):
            raise InputError("needs an id", file=ctx.cfg.path, key=f"{where}.id")
        xy = ctx.xy(raw[key])
        geoms = [(raw["id"], LineString(xy) if line else Polygon(xy), {})]
    elif raw.get("file") is not None:
        def to_site(frame):
            return frame.set_geometry(list(_to_site(ctx, frame, raw["file"])))
        frame = rc.read_receptor_layer(
            raw["file"], RECEPTOR_TABLES[table], id_field=raw["id_field"],
            required_fields=[raw["depth_field"]] if raw.get("depth_field") else (),
            to_site_crs=to_site)
        geoms = [(r["receptor_id"], r.geometry, r) for _, r in frame.iterrows()]
    else:
        raise InputError(f"needs {key} = [[x, y], ...] or file = \"...\"",
                         file=ctx.cfg.path, key=where)
    items = []
    for rid, geom, attrs in geoms:
        item = dict(raw)
        if raw.get("depth_field"):          # read_receptor_layer checked it is filled
            item["foundation_depth" if not line else "crown_depth"] = (
                float(attrs[raw["depth_field"]]) * ctx.cfg.units.length_to_m)
        if geom.geom_type.startswith("Multi"):
            geom = max(geom.geoms, key=lambda g: g.area if not line else g.length)
        item.update(id=rid, geometry=geom)
        if line:
            item["depth"] = _pipe_crown_depth(ctx, item, where)
        else:
            item["depth"] = _level(ctx, item, where, geom, "foundation_depth",
                                   "foundation_elevation")
            if item["depth"] is None:
                raise InputError("needs foundation_depth, foundation_elevation or depth_field",
                                 file=ctx.cfg.path, key=where)
        items.append(item)
    return items


def _pipe_crown_depth(ctx, item, where):
    d = item.get("diameter") or 0.0
    if item.get("crown_depth") is not None:
        return item["crown_depth"]
    if item.get("invert_depth") is not None:
        crown = item["invert_depth"] - d
        if crown < 0:
            raise InputError(f"invert depth {item['invert_depth']:g} m is less than the diameter",
                             file=ctx.cfg.path, key=f"{where}.invert_depth")
        return crown
    if item.get("invert_elevation") is not None:
        if ctx.ground is None:
            raise InputError("invert_elevation needs a [ground] table", file=ctx.cfg.path,
                             key=f"{where}.invert_elevation")
        xy = np.asarray(item["geometry"].coords)
        elev = np.asarray(item["invert_elevation"], float)
        if elev.size not in (1, len(xy)):
            raise InputError(f"give one invert elevation or one per vertex ({len(xy)})",
                             file=ctx.cfg.path, key=f"{where}.invert_elevation")
        with _located(ctx.cfg, f"{where}.invert_elevation"):
            depths = depths_from_elevations(ctx, xy[:, :2], elev, f"{where}.invert_elevation",
                                            "pipe crown", above=d)
        return np.broadcast_to(depths, len(xy)).tolist()
    raise InputError("needs crown_depth, invert_depth, invert_elevation or depth_field",
                     file=ctx.cfg.path, key=where)


def _points(ctx: _Context, receptors: dict) -> pd.DataFrame:
    frames = []
    for table, items in receptors.items():
        for k, r in enumerate(items):
            with _located(ctx.cfg, f"{table} '{r['id']}'"):
                frames.append(_sample(table, r))
    if not frames:
        return pd.DataFrame(columns=rc.POINT_COLUMNS)
    return pd.concat(frames, ignore_index=True)


def _sample(table: str, r: dict) -> pd.DataFrame:
    if table == "buildings":
        depths = np.arange(r["depth"] + r["profile_step"], r["profile_bottom"] + 1e-9,
                           r["profile_step"])
        return rc.building_points(r["id"], r["geometry"], r["depth"],
                                  interior_spacing=r["interior_spacing"], profile_depths=depths,
                                  wall_spacing=r.get("wall_spacing"))
    if table == "pipes":
        return rc.pipe_points(r["id"], r["geometry"], r["depth"], spacing=r["spacing"],
                              diameter=r.get("diameter") or 0.0)
    p = r["geometry"]
    return rc.borehole_points(r["id"], p.x, p.y, r["top"], r["bottom"], r["step"])


def _plan_grids(ctx: _Context, spec: GridSpec) -> list:
    grids = []
    for i, g in enumerate(ctx.cfg.get("plan_grids") or []):
        extent = (np.array(g["extent"]) * ctx.factor).tolist() if g.get("extent") else None
        spacing = g.get("spacing") or spec.dx
        step = spacing / spec.dx
        if abs(step - round(step)) > 1e-6 or round(step) < 1:
            raise InputError(f"must be a whole multiple of the cell size "
                             f"{ctx.cfg.units.length_out(spec.dx):g} {ctx.cfg.units.length}",
                             file=ctx.cfg.path, key=f"plan_grids[{i}].spacing")
        with _located(ctx.cfg, f"plan_grids[{i}]"):
            grids.append(rc.plan_grid(extent or list(spec.extent), round(step) * spec.dx,
                                      g["depths"], name=g["name"]))
    return grids
