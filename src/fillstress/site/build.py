"""The site model: a validated site file turned into fill bodies on one analysis grid,
a soil profile and receptor sample points, all in internal metres.

Data flow: site.config.read_site_file → build_site → Site (used by run.compute).
"""
from __future__ import annotations

import difflib
import math
import re
import time
from contextlib import contextmanager
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import TYPE_CHECKING, Callable, NamedTuple

import numpy as np
import shapely
from pyproj import CRS
from shapely.geometry import LineString, Point, Polygon

from .. import crs as crsmod
from .._lazy import EXTRAS, installed, require_extra
from .._summary import Summarised, crs_text
from ..decide.limits import BUILDING_LIMITS, Limit
from ..drains import VerticalDrains
from ..errors import InputError
from ..grid import GridSpec, LoadGrid
from ..io.footprints import read_footprints
from ..io.surfaces import read_surface
from ..io.vectors import read_layer, select, to_site
from ..shapes import footprints as fp
from ..shapes.bodies import Body, choose_cell, stage_pressure
from ..shapes.embankment import embankment_thickness
from ..shapes.stockpile import pile_thickness
from ..shapes.surfaces import CutReport, elevation_at_centres, fill_from_surfaces
from ..soil import SoilLayer, SoilProfile
from ..solve.cost import check_capacity, estimate_grid, memory_cap_bytes
from ..units import UnitSystem
from . import receptors as rc
from .config import SiteConfig, read_site_file
from .alignment import Alignment, build_alignment
from .ground_use import check_body_ground, depths_from_elevations, warn_near_miss
from .receptors import Borehole, Building, Pipe, PlanGrid, Receptors
from .uncertainty import Uncertainty, build_uncertainty

if TYPE_CHECKING:                  # pandas is loaded where receptor tables are sampled
    import pandas as pd

# Receptor kinds: the site-file table and the point-table kind.
RECEPTOR_TABLES = {"buildings": "building", "pipes": "pipe", "boreholes": "borehole"}


# Site-file distortion limit keys → the Bjerrum (1963) limit names of structures.py.
LIMIT_KEYS = {"limit_no_cracking": "no_cracking", "limit_first_cracking": "panel_wall_cracking",
              "limit_structural_damage": "structural_damage"}


class DrainZone(NamedTuple):
    """A [[drains]] zone: its id, plan polygon (internal metres) and drain layout."""

    id: str
    outline: Polygon
    drains: VerticalDrains


@dataclass(frozen=True)
class PileTemplate:
    """A [headroom] pile, in SI: its toe (a rectangle `size` (m) or a circle of `diameter`
    (m)), height (m), repose angle (degrees) and unit weight (kN/m³)."""

    size: tuple[float, float] | None
    diameter: float | None
    height: float
    repose_angle: float
    unit_weight: float

    def toe(self):
        """The toe polygon about the origin (m)."""
        if self.diameter is not None:
            return shapely.Point(0.0, 0.0).buffer(self.diameter / 2, quad_segs=64)
        return shapely.box(-self.size[0] / 2, -self.size[1] / 2, self.size[0] / 2,
                           self.size[1] / 2)

    def peak(self) -> float:
        """The highest the sides at the repose angle rise on this toe (m)."""
        half = self.diameter / 2 if self.diameter is not None else min(self.size) / 2
        return half * math.tan(math.radians(self.repose_angle))


@dataclass(frozen=True)
class HeadroomTemplate:
    """[headroom], in SI: the template (a rectangle of `size` (m) and `pressure` (kPa), the
    body named `body`, or a `pile`), the map lattice (`extent` in internal metres, `step` analysis
    cells per map cell) and the number of cells re-checked on the full settlement."""

    kind: str
    body: str | None = None
    size: tuple[float, float] | None = None
    pressure: float | None = None
    extent: tuple[float, float, float, float] | None = None
    step: int = 1
    recheck: int = 30
    pile: PileTemplate | None = None


@dataclass(frozen=True)
class RunSettings:
    """How a run is done and which files it writes ([grid], [soil], [settlement],
    [outputs] of the site file, in SI)."""

    convergence_check: bool = True
    margin: float | None = None              # [grid] margin as given (m); None: the default
    memory_cap_gb: float | None = None       # None: a share of the machine's memory
    influence_fraction: float = 0.10         # of σ'v0, for the influence depth
    stage_days: tuple[float, ...] | None = None   # start of each stage, days after stage 1
    stage_durations: tuple[float, ...] = ()  # build time of each stage (days; missing: 0)
    design_life_years: float = 30.0          # secondary compression and the preload target
    removal_includes_secondary: bool = False  # preload target adds the secondary compression
    target_degree: float | None = None       # drain design: the degree wanted ...
    target_day: float | None = None          # ... by this day
    distortion_limits: dict = field(default_factory=dict)  # structures.py name → limit given
    geotiff: bool = True
    netcdf: bool = True
    geopackage: bool = True
    geojson_crs: str = "wgs84"              # [outputs]: "wgs84" (RFC 7946) or "site"
    vtk: bool = True
    report: bool = True
    scene: bool = True
    readings: Path | None = None             # [monitoring]: readings CSV
    construction: Path | None = None         # [monitoring]: construction record CSV
    day0: str | None = None                  # [monitoring]: calendar date of day 0
    limits: tuple[Limit, ...] = ()           # [limits]: the general limits given (SI)
    building_limits: tuple[Limit, ...] = BUILDING_LIMITS   # published ones ([limits] published)
    limit_overrides: dict[str, tuple[Limit, ...]] = field(default_factory=dict)  # receptor →
    max_heights: bool = False                # [limits] max_heights: search each body's
    uncertainty: Uncertainty | None = None   # [uncertainty]: the odds of exceeding a limit
    headroom: HeadroomTemplate | None = None  # [headroom]: where the next load can go


@dataclass(repr=False)
class Site(Summarised):
    """Everything a run needs, in SI and internal metres (site CRS coordinates × factor).

    Built by :func:`load_site`; nothing after the build reads the site file's raw
    tables: later stages take these.

    Parameters
    ----------
    path : pathlib.Path
        The site file.
    name, description : str
        The site's name and its description from ``[site]``.
    units : UnitSystem
        The unit system of the site file and the outputs.
    crs : pyproj.CRS or None
        The site CRS as stated (None: no CRS given).
    metres_per_unit : float
        Metres per site-CRS unit (1, 0.3048, 1200/3937).
    spec : GridSpec
        The analysis lattice, internal metres.
    bodies : list of Body
        The fill and cut bodies on the lattice.
    method : str
        ``"boussinesq"`` or ``"westergaard"``.
    poisson : float or None
        Poisson's ratio for Westergaard; None for Boussinesq.
    ground : callable or None
        Existing ground elevation ``z(x, y)`` in metres; None without ``[ground]``.
    soil : SoilProfile or None
        The soil profile; None without ``[soil]``.
    points : pandas.DataFrame
        Every receptor sample point (internal metres).
    receptors : Receptors
        The buildings, pipes and boreholes.
    settings : RunSettings
        How the run is done and which files it writes.
    input_files : tuple of pathlib.Path
        Every file the site refers to.
    plan_grids : list of PlanGrid
        The ``[[plan_grids]]`` to slice.
    cut_reports : dict of str to CutReport
        Body name → the report of its cut.
    existing_surfaces : dict of str to pathlib.Path
        Body name → the existing-surface file it was built from.
    body_factors : (float, float)
        (unit weight, thickness) factors of a batch variant; (1, 1) otherwise.
    build_seconds : float
        Time the bodies took to rasterise.
    cell_rule : str
        Why the cell is the size it is.
    warnings : list of str
        What the build found doubtful.
    alignment : Alignment or None
        ``[alignment]``: stations along a line.
    drains : list of DrainZone
        The ``[[drains]]`` zones.
    removal_days : dict of str to float
        Body name → the day it is taken away.
    context : object, optional
        The build context, kept to rebuild the bodies on another lattice.

    Examples
    --------
    >>> from fillstress.examples import example_site
    >>> site = load_site(example_site("bridge_approach"))
    >>> site.units.name, site.crs.to_epsg(), round(site.metres_per_unit, 9), site.stages
    ('US', 2277, 0.30480061, [1])
    """

    path: Path
    name: str
    description: str
    units: UnitSystem
    crs: CRS | None
    metres_per_unit: float
    spec: GridSpec
    bodies: list[Body]
    method: str
    poisson: float | None
    ground: Callable[[np.ndarray, np.ndarray], np.ndarray] | None
    soil: SoilProfile | None
    points: pd.DataFrame
    receptors: Receptors
    settings: RunSettings
    input_files: tuple[Path, ...] = ()
    plan_grids: list[PlanGrid] = field(default_factory=list)
    cut_reports: dict[str, CutReport] = field(default_factory=dict)
    existing_surfaces: dict[str, Path] = field(default_factory=dict)
    body_factors: tuple[float, float] = (1.0, 1.0)
    build_seconds: float = 0.0
    cell_rule: str = "given"
    warnings: list[str] = field(default_factory=list)
    alignment: Alignment | None = None
    drains: list[DrainZone] = field(default_factory=list)
    removal_days: dict[str, float] = field(default_factory=dict)
    context: _Context | None = field(default=None, repr=False)

    @property
    def stages(self) -> list[int]:
        """The construction stage numbers, ascending."""
        return sorted({b.stage for b in self.bodies})

    def _summary(self):
        u, s = self.units, self.spec
        kinds = {kind: len(items) for kind, items in self.receptors.by_table().items() if items}
        soil = ("none" if self.soil is None else
                f"{len(self.soil.layers)} layers to {u.length_out(self.soil.bottom_m):.5g} {u.length}")
        return (f"Site {self.name}",
                [("file", str(self.path)), ("units", u.name), ("crs", crs_text(self.crs)),
                 ("method", self.method),
                 ("grid", f"{s.nx} × {s.ny} cells of {u.length_out(s.dx):.5g} {u.length}"),
                 ("bodies", ", ".join(f"{b.name} (stage {b.stage})" for b in self.bodies)),
                 ("receptors", ", ".join(f"{k}: {n}" for k, n in kinds.items()) or "none"),
                 ("sample points", "not sampled" if self.points is None
                  else f"{len(self.points):,}"),
                 ("plan grids", ", ".join(p.name for p in self.plan_grids) or "none"),
                 ("soil", soil), ("warnings", str(len(self.warnings)))])

    def stage_start_days(self) -> list[float]:
        """Start of each stage in days, one per stage.

        Returns
        -------
        list of float
            [settlement] stage_days, the last repeated when too few are given
            (plan.site_warnings warns of a mismatch).
        """
        days = list(self.settings.stage_days or [0.0])
        return (days + [days[-1]] * len(self.stages))[:len(self.stages)]

    def stage_build_days(self) -> list[float]:
        """Build duration of each stage in days, one per stage.

        Returns
        -------
        list of float
            [settlement] stage_durations; a stage given none is placed at once (0).
        """
        given = list(self.settings.stage_durations)
        return (given + [0.0] * len(self.stages))[:len(self.stages)]

    def load_grid(self, stage: int | None = None, spec: GridSpec | None = None) -> LoadGrid:
        """Surface pressure (kPa) of all bodies up to `stage`.

        Parameters
        ----------
        stage : int, optional
            A construction stage; the last by default.
        spec : GridSpec, optional
            Another lattice to rasterise the bodies on; the site's by default.

        Returns
        -------
        LoadGrid
            The pressure of every body of stage <= `stage`.
        """
        stage = self.stages[-1] if stage is None else stage
        if stage not in self.stages:
            raise InputError(f"no construction stage {stage}; stages are {self.stages}",
                             argument="stage")
        bodies = self.bodies if spec is None else self.rebuild_bodies(spec)
        spec = spec or self.spec
        return spec.load_grid(stage_pressure(bodies, spec, stage))

    def rebuild_bodies(self, spec: GridSpec) -> list:
        """The same bodies rasterised on another lattice (the convergence check).

        Parameters
        ----------
        spec : GridSpec
            The lattice.

        Returns
        -------
        list of Body
            One per body of the site, in the site file's order.
        """
        gamma, height = self.body_factors
        return [scaled_body(_build_body(self.context, name, raw, spec)[0], gamma, height)
                for name, raw in self.context.cfg["bodies"].items()]

    def fill_thickness(self, stage: int | None = None) -> np.ndarray:
        """Net fill thickness (m, cuts negative) of the bodies up to `stage`.

        Parameters
        ----------
        stage : int, optional
            A construction stage; the last by default.

        Returns
        -------
        numpy.ndarray
            Shape ``spec.shape``, row 0 south.
        """
        stage = self.stages[-1] if stage is None else stage
        return sum((b.sign * b.thickness for b in self.bodies if b.stage <= stage),
                   self.spec.zeros())

    def ground_elevation_grid(self, filled: bool = False):
        """Existing ground elevation at the cell centres (m), or None without [ground].

        Parameters
        ----------
        filled : bool
            Fill cells where the ground has no data with the nearest cell's value (for
            drawing only: nothing is computed where the ground is missing).

        Returns
        -------
        numpy.ndarray or None
            Shape ``spec.shape``; NaN where the ground has no data unless `filled`.
        """
        if self.ground is None:
            return None
        z = elevation_at_centres(self.ground, self.spec)
        gap = ~np.isfinite(z)
        if filled and gap.any() and not gap.all():
            from scipy.ndimage import distance_transform_edt
            nearest = distance_transform_edt(gap, return_distances=False, return_indices=True)
            z = z[tuple(nearest)]
        return z


def place_body(site: Site, cfg: SiteConfig, name: str):
    """Plan outline (internal metres) of body `name` of `cfg`, an edited copy of the
    site's file, kept in the site's build context for the lattice and the rasterising;
    files already read are not read again (an editor changes one body at a time)."""
    ctx = site.context
    ctx.cfg = cfg
    ctx.outlines[name] = _body_outline(ctx, name, cfg["bodies"][name])
    return ctx.outlines[name]


def rebuild_body(site: Site, name: str, spec: GridSpec | None = None):
    """Body `name` of the build context's file rasterised on `spec` (default: the site's
    lattice), after :func:`place_body`."""
    ctx = site.context
    body, _ = _build_body(ctx, name, ctx.cfg["bodies"][name], spec or site.spec)
    return scaled_body(body, *site.body_factors)


def analysis_grid(site: Site) -> GridSpec:
    """The lattice a fresh build of the site's current bodies would choose."""
    return _analysis_grid(site.context, site.context.outlines, site.receptors)


def scaled_body(body, unit_weight_factor: float = 1.0, height_factor: float = 1.0):
    """`body` with its unit weight and thickness scaled (batch variants)."""
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
        name = _ARGUMENT_KEYS.get(exc.argument) or site_words(exc.argument or "")
        key = f"{where}.{name}" if name else where
        raise InputError(site_words(exc.reason), file=cfg.path, key=key) from None


#: Library arguments whose site-file key has another name.
_ARGUMENT_KEYS = {"receptor_id": "id"}
#: Library argument names carry their unit (sigma_p_kpa); the site file's keys do not.
_UNIT_SUFFIX = re.compile(r"\b([a-z][a-z0-9]*(?:_[a-z0-9]+)*?)_(?:kpa|per_kpa|m2_per_yr|kn_m3|"
                          r"deg|m)\b")


def site_words(text: str) -> str:
    """A library message in the site file's words: unit-suffixed argument names become the
    site-file keys (``sigma_p_kpa`` → ``sigma_p``, ``rigid_base_m`` → ``rigid_base``), and
    the layer option the site file cannot state is not offered.

    >>> site_words("give cc, cr, e0 with sigma_p_kpa or ocr; or mv_per_kpa; or "
    ...            "modulus_kpa; or incompressible = true")
    'give cc, cr, e0 with sigma_p or ocr; or mv; or modulus'
    """
    return _UNIT_SUFFIX.sub(r"\1", text.replace("; or incompressible = true", ""))


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
    existing_surfaces: dict = field(default_factory=dict)  # surfaces body → existing file

    def xy(self, coords) -> np.ndarray:
        """Inline site-file coordinates (CRS units) → internal metres."""
        arr = np.asarray(coords, dtype=float)
        arr[:, :2] *= self.factor
        return arr

    def surface(self, path: Path, surface_name=None):
        """A surface file, read once."""
        key = (Path(path), surface_name)
        if key not in self.surfaces:
            self.surfaces[key] = read_surface(path, site_crs=self.site_crs,
                                              z_to_m=self.cfg.units.length_to_m,
                                              surface_name=surface_name)
            warn_near_miss(self, path, getattr(self.surfaces[key], "moved_m", 0.0))
        return self.surfaces[key]


def load_site(path) -> Site:
    """Read a site file and build its model.

    Parameters
    ----------
    path : str or path-like
        The site file (TOML).

    Returns
    -------
    Site
        The typed site: bodies on the lattice, receptors, soil, run settings (SI).

    Raises
    ------
    InputError
        Naming the file and key of the first thing wrong.

    Examples
    --------
    >>> from fillstress.examples import example_site
    >>> site = load_site(example_site("stockpile_yard"))
    >>> site.name, [b.name for b in site.bodies]
    ('Kestrel Quay ore yard', ['ore_east', 'coal_west', 'aggregate_north'])
    """
    return build_site(read_site_file(path))


def build_site(cfg: SiteConfig, *, draw_samples: bool = True,
               sample_points: bool = True) -> Site:
    """The typed site of a validated site file; `draw_samples=False` leaves the
    [uncertainty] samples undrawn until a run's odds, `sample_points=False` the receptors
    unsampled (``points`` None): `fillstress point` needs neither, nor scipy.stats and
    pandas to make them. The receptors still shape the analysis grid, so Δσz at a point
    is the run's."""
    s = cfg["site"]
    _check_method(cfg)
    with _located(cfg, "site"):            # the error names its argument: crs
        site_crs = crsmod.site_crs(s["crs"]) if s.get("crs") else None
    factor = site_crs[1] if site_crs else 1.0
    ctx = _Context(cfg, site_crs, factor)
    ctx.ground = _ground(ctx)
    ctx.outlines = {name: _body_outline(ctx, name, raw) for name, raw in cfg["bodies"].items()}
    receptors = _receptors(ctx)
    spec = _analysis_grid(ctx, ctx.outlines, receptors)
    _check_grid(cfg, spec, len(cfg["bodies"]), _placed_items(ctx.outlines, receptors))
    t0 = time.perf_counter()
    built = {name: _build_body(ctx, name, raw, spec) for name, raw in cfg["bodies"].items()}
    ctx.build_seconds = time.perf_counter() - t0     # for the run estimate
    grid, soil = cfg.get("grid") or {}, _soil(cfg)
    return Site(cfg.path, s["name"], s.get("description") or "", cfg.units,
                site_crs[0] if site_crs else None, factor, spec,
                [body for body, _ in built.values()],
                grid.get("method", "boussinesq"),
                grid.get("poisson") if grid.get("method") == "westergaard" else None,
                ctx.ground, soil, _points(ctx, receptors) if sample_points else None,
                receptors,
                replace(_settings(cfg, ctx.warnings), **_limits(cfg, receptors),
                        uncertainty=_uncertainty(cfg, soil, draw_samples),
                        headroom=_headroom(ctx, spec)),
                input_files=tuple(cfg.input_files()), plan_grids=_plan_grids(ctx, spec),
                cut_reports={n: cut for n, (_, cut) in built.items() if cut is not None},
                existing_surfaces=ctx.existing_surfaces,
                build_seconds=ctx.build_seconds, cell_rule=ctx.cell_rule,
                warnings=ctx.warnings, context=ctx, drains=_drains(ctx),
                removal_days={n: float(r["removal_day"]) for n, r in cfg["bodies"].items()
                              if r.get("removal_day") is not None},
                alignment=build_alignment(ctx, cfg.get("alignment"),
                                          _profile_depths(cfg, receptors)))


def _settings(cfg: SiteConfig, warnings: list) -> RunSettings:
    grid, soil = cfg.get("grid") or {}, cfg.get("soil") or {}
    settle, outputs = cfg.get("settlement") or {}, cfg.get("outputs") or {}
    monitoring = cfg.get("monitoring") or {}
    days = settle.get("stage_days") or []
    if any(b < a for a, b in zip(days, days[1:])):
        raise InputError("stage start days must not decrease", file=cfg.path,
                         key="settlement.stage_days")
    return RunSettings(
        convergence_check=bool(grid.get("convergence_check", True)),
        margin=grid.get("margin"), memory_cap_gb=grid.get("memory_cap"),
        influence_fraction=soil.get("influence_fraction", 0.10),
        stage_days=tuple(settle["stage_days"]) if settle.get("stage_days") else None,
        stage_durations=tuple(settle.get("stage_durations") or ()),
        design_life_years=float(settle.get("design_life_years", 30.0)),
        removal_includes_secondary=bool(settle.get("removal_includes_secondary", False)),
        target_degree=settle.get("target_degree"), target_day=settle.get("target_day"),
        distortion_limits={name: settle[key] for key, name in LIMIT_KEYS.items()
                           if settle.get(key) is not None},
        **{k: monitoring.get(k) for k in ("readings", "construction", "day0")},
        geojson_crs=outputs.get("geojson_crs", "wgs84"),
        **{k: _view_output(cfg, k, outputs.get(k), warnings) for k in VIEW_OUTPUTS},
        **{k: outputs.get(k, True) is not False for k in ("geotiff", "netcdf", "geopackage",
                                                             "report")})


# [outputs] key → what it writes; its meshes are built with pyvista (the 'view' extra)
VIEW_OUTPUTS = {"vtk": "VTK files (vtk/)", "scene": "The 3D scene (scene.html)"}


def _view_output(cfg: SiteConfig, key: str, asked, warnings: list) -> bool:
    """An output of the 'view' extra: written by default where it is installed (a warning
    says it is not), and refused before any work when asked for explicitly without it."""
    if asked is False:
        return False
    if asked is True:
        require_extra("view", file=cfg.path, key=f"outputs.{key}")
    if not all(installed(name) for name in EXTRAS["view"]):
        warnings.append(f"{VIEW_OUTPUTS[key]} not written: it needs the 'view' extra "
                        "(pip install 'fillstress[view]')")
        return False
    return True


# [limits] key → (quantity of decide.limits, label in the tables)
LIMIT_QUANTITIES = {"stress_increase": "stress_increase", "stress_ratio": "stress_ratio",
                    "settlement": "settlement",
                    "differential_settlement": "differential_settlement",
                    "angular_distortion": "angular_distortion", "tilt": "tilt",
                    "pipe_differential": "differential_settlement",
                    "pipe_radius_min": "pipe_curvature"}


def _limits(cfg: SiteConfig, receptors: Receptors) -> dict:
    """The RunSettings fields of [limits]: general limits, the published building limits in
    force and the per-receptor overrides (SI)."""
    raw = cfg.get("limits")
    if raw is None:
        return {}
    ids = {r.id for items in receptors.by_table().values() for r in items}
    overrides = {}
    for i, over in enumerate(raw["overrides"]):
        where = f"limits.overrides[{i}]"
        if over["receptor"] not in ids:
            raise InputError(f"no building, pipe or borehole has the id {over['receptor']!r}",
                             file=cfg.path, key=f"{where}.receptor")
        overrides[over["receptor"]] = (overrides.get(over["receptor"], ())
                                       + _limit_values(cfg, over, where, "[[limits.overrides]]"))
    return dict(limits=_limit_values(cfg, raw, "limits", "[limits]"),
                building_limits=BUILDING_LIMITS if raw["published"] else (),
                limit_overrides=overrides, max_heights=bool(raw["max_heights"]))


def _uncertainty(cfg: SiteConfig, soil, draw_samples: bool = True):
    """[uncertainty], typed (site/uncertainty.py); None without it."""
    layers = (cfg.get("soil") or {}).get("layers", [])
    try:
        return build_uncertainty(cfg.get("uncertainty"), soil,
                                 {n: b["unit_weight"] for n, b in cfg["bodies"].items()},
                                 {L["name"]: L.get("saturated_unit_weight") is not None
                                  for L in layers}, cfg.path, draw_samples=draw_samples)
    except InputError as err:           # a sample's soil-model message in site-file words
        raise InputError(site_words(err.reason), file=err.file, key=err.key) from None


def _limit_values(cfg: SiteConfig, raw: dict, where: str, source: str) -> tuple[Limit, ...]:
    if (raw.get("pipe_differential") is None) != (raw.get("pipe_differential_length") is None):
        given = "pipe_differential" if raw.get("pipe_differential") is not None else \
            "pipe_differential_length"
        raise InputError("pipe_differential and pipe_differential_length go together",
                         file=cfg.path, key=f"{where}.{given}")
    out = []
    for key, quantity in LIMIT_QUANTITIES.items():
        value = raw.get(key)
        if value is None:
            continue
        if key == "pipe_radius_min":
            value = 1.0 / value                       # curvature limit 1/R
        length = raw["pipe_differential_length"] if key == "pipe_differential" else None
        out.append(Limit(quantity, value, f"site file {source}", length_m=length, name=key))
    return tuple(out)


def _profile_depths(cfg: SiteConfig, receptors: Receptors) -> list[float]:
    """Default depths of Δσz along an alignment: the plan-grid depths, else the depths of
    the buildings' foundations and the pipes' crowns."""
    plan = {d for g in cfg.get("plan_grids") or [] for d in g["depths"]}
    found = {round(float(d), 6) for r in (*receptors.buildings, *receptors.pipes)
             for d in np.atleast_1d(r.depth) if d > 0}
    return sorted(plan or found)


def _check_method(cfg: SiteConfig) -> None:
    """Westergaard's solution needs 0 ≤ ν < 0.5: refused here for check and run alike."""
    grid = cfg.get("grid") or {}
    nu = grid.get("poisson")
    if grid.get("method") == "westergaard" and nu is not None and not 0.0 <= nu < 0.5:
        raise InputError(f"must be 0 ≤ ν < 0.5 for the Westergaard method, got {nu:g}",
                         file=cfg.path, key="grid.poisson")


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
    geoms = _read_vector(ctx, raw["file"], raw.get("id_field") or "id", raw.get("where"),
                         "LineString" if line else "Polygon")
    geom = shapely.union_all(geoms)
    if line:
        geom = shapely.line_merge(geom)
        if geom.geom_type != "LineString":
            raise InputError("the selected features do not form one connected line",
                             file=raw["file"])
    return geom


def _read_vector(ctx: _Context, path: Path, id_field: str, where, geom_type: str):
    """The selected features' geometries in site metres."""
    layer = select(read_layer(path, geom_type, what="fill outlines"), id_field, where, path)
    return _into_site(ctx, layer, path)


def _into_site(ctx: _Context, frame, path) -> np.ndarray:
    """`frame`'s geometries in site metres, warning when a near-twin CRS moved them."""
    if frame.crs is not None and ctx.site_crs is not None and len(frame):
        b = frame.total_bounds
        warn_near_miss(ctx, path, crsmod.near_miss_shift(
            ((b[0] + b[2]) / 2, (b[1] + b[3]) / 2), frame.crs, ctx.site_crs))
    return to_site(frame, ctx.site_crs, path)


def _body_outline(ctx: _Context, name: str, raw: dict):
    """Plan geometry of a body (for the grid extent), in internal metres."""
    where = f"bodies.{name}"
    kind = raw["kind"]
    if kind == "surfaces":
        with _located(ctx.cfg, f"{where}.design"):
            return shapely.box(*ctx.surface(raw["design"]).bounds)
    if kind == "embankment":
        line = ctx.lines[name] = _outline_from(ctx, raw, where, line=True)
        # square ends and mitred bends: the toe's corners at a sloped end lie up to
        # √2·reach from the end point, and the outside of a bend beyond a round offset
        return line.buffer(_embankment_reach(raw), cap_style="square", join_style="mitre",
                           mitre_limit=4.0)
    if kind == "footprint" and raw.get("file") is not None and raw.get("height") is None:
        frame = ctx.footprints[name] = _footprint_frame(ctx, raw)
        return shapely.union_all(frame.geometry.values)
    return _outline_from(ctx, raw, where)


def _footprint_frame(ctx: _Context, raw: dict):
    """Footprints with their heights (attribute or vertex z) from a vector file."""
    with _located(ctx.cfg, "file"):
        frame = read_footprints(raw["file"], raw.get("height_field"),
                                target_crs=ctx.site_crs or None,
                                height_to_m=ctx.cfg.units.length_to_m)
    return select(frame, raw.get("id_field") or "id", raw.get("where"), raw["file"])


def _embankment_reach(raw: dict) -> float:
    """Largest plan distance of the embankment toe from its centreline."""
    hmax = max(h for _, h in raw["heights"])
    slope = max(raw["side_slope"], raw.get("end_slope") or raw["side_slope"])
    return raw["crest_width"] / 2 + slope * hmax


def _build_body(ctx: _Context, name: str, raw: dict, spec: GridSpec):
    """(Body on `spec`, its surfaces.CutReport or None)."""
    where = f"bodies.{name}"
    with _located(ctx.cfg, where):
        thickness, cut = _BUILDERS[raw["kind"]](ctx, name, raw, spec)
        area, peak = _exact_size(ctx, name, raw)
        body = Body(name=name, kind=raw["kind"], unit_weight=raw["unit_weight"],
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
    return pile_thickness(ctx.outlines[name], raw["repose_angle"], spec,
                          crest_height=raw.get("crest_height")), None


def _footprint(ctx, name, raw, spec):
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
    line = ctx.lines[name]
    chain, heights = np.array(raw["heights"]).T
    end = raw.get("end_slope") or raw["side_slope"]
    return embankment_thickness(
        line, spec, crest_width=raw["crest_width"], side_slope=raw["side_slope"],
        heights=heights, chainages=chain,
        start_slope="vertical" if raw["start_end"] == "vertical" else end,
        end_slope="vertical" if raw["finish_end"] == "vertical" else end), None


def _surfaces(ctx, name, raw, spec):
    design = ctx.surface(raw["design"])
    if raw.get("existing") is not None:
        existing = ctx.surface(raw["existing"])
        ctx.existing_surfaces[name] = raw["existing"]
    elif ctx.ground is not None:
        ground = ctx.cfg.get("ground") or {}
        ctx.existing_surfaces[name] = next(
            (ground[k] for k in ("raster", "points", "landxml") if ground.get(k)), None)
        existing = ctx.ground
    else:
        raise InputError("needs existing = \"...\" or a [ground] table", argument="existing")
    thickness, report = fill_from_surfaces(design, existing, spec, cut=raw["cut"],
                                           tolerance=raw["fill_tolerance"])
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
def _analysis_grid(ctx: _Context, outlines: dict, receptors: Receptors) -> GridSpec:
    grid = ctx.cfg.get("grid") or {}
    fills = shapely.union_all(list(outlines.values()))
    bounds = np.array(fills.bounds)
    for r in receptors:
        b = r.geometry.bounds
        bounds = np.r_[np.minimum(bounds[:2], b[:2]), np.maximum(bounds[2:], b[2:])]
    margin = grid.get("margin", 10.0)
    cell = grid.get("cell")
    ctx.cell_rule = "given in [grid] cell"
    if cell is None:
        smallest = min(min(_feature_size(g) for g in outlines.values()), 1e9)
        width, height = bounds[2:] - bounds[:2] + 2 * margin
        u = ctx.cfg.units
        choice = choose_cell(smallest, _shallowest_depth(ctx, receptors),
                             area_m2=width * height, unit_m=u.length_to_m, unit=u.length)
        cell, ctx.cell_rule = choice.cell_m, choice.rule
    with _located(ctx.cfg, "grid"):
        return GridSpec.covering(bounds, cell, margin=margin, unit=ctx.factor,
                                 crs=crsmod.metric_twin(ctx.site_crs[0]) if ctx.site_crs else None)


GRID_HINT = ("use a larger [grid] cell or a smaller margin, or check the coordinates of the "
             "bodies and receptors (CRS, units, a typing error)")


def _check_grid(cfg: SiteConfig, spec: GridSpec, n_bodies: int, items: dict) -> None:
    """Refuse (CapacityError: the grid size, the memory it needs, the cap, and the item lying
    far from the rest) an analysis grid whose bodies cannot be rasterised within the memory
    cap; called with the grid worked out from the bounds, before any body is rasterised."""
    u = cfg.units
    e = estimate_grid(spec.shape, n_bodies, f"{u.length_out(spec.dx):.3g} {u.length}")
    cap = memory_cap_bytes((cfg.get("grid") or {}).get("memory_cap"))
    if e.bytes > cap:
        check_capacity(e, cap, hint=GRID_HINT + _outlier_note(items, u))


def _placed_items(outlines: dict, receptors: Receptors) -> dict:
    """Everything that sets the grid's extent, by the name a user knows it by."""
    items = {f"[bodies.{name}]": geom for name, geom in outlines.items()}
    for table, found in receptors.by_table().items():
        items.update({f"{RECEPTOR_TABLES[table]} {r.id}": r.geometry for r in found})
    return items


def _outlier_note(items: dict, u: UnitSystem) -> str:
    """``; [bodies.x] lies 7,912 km from pipes P1, the nearest other item`` when one item
    lies far from all the others (a wrong CRS or a typing error), else ""."""
    if len(items) < 2:
        return ""
    names = list(items)
    gaps = {n: min(items[n].distance(items[m]) for m in names if m != n) for n in names}
    far = max(gaps, key=gaps.get)
    near = min((m for m in names if m != far), key=lambda m: items[far].distance(items[m]))
    if gaps[far] < 10 * max(_plan_size(items[near]), _plan_size(items[far]), 1.0):
        return ""
    return (f"; {far} lies {u.length_out(gaps[far]):,.0f} {u.length} from {near}, the "
            "nearest other item")


def _plan_size(geom) -> float:
    x0, y0, x1, y1 = geom.bounds
    return max(x1 - x0, y1 - y0)


def _feature_size(geom) -> float:
    """A plan size of a body: twice its area over its perimeter (≈ the width of a long
    strip; half the harmonic mean of a rectangle's sides)."""
    return 2 * geom.area / max(geom.length, 1e-9)


def _shallowest_depth(ctx, receptors) -> float:
    """Shallowest receptor depth below ground. Depth 0 is left out: at the surface the
    stress is the cell's own pressure, whatever the cell size. Pipes may have one depth a
    vertex."""
    depths = [d for r in receptors for d in np.atleast_1d(r.depth) if d > 0]
    return min(depths) if depths else 1.0


# --- soil -----------------------------------------------------------------------------
_DRAINAGE = {"double": "double", "top": "single-top", "bottom": "single-bottom"}


def _soil(cfg: SiteConfig):
    s = cfg.get("soil")
    if not s:
        return None
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


def _drains(ctx: _Context) -> list[DrainZone]:
    """The [[drains]] zones, outlines in internal metres."""
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
        zones.append(DrainZone(raw["id"], poly, drains))
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


def _receptors(ctx: _Context) -> Receptors:
    out = {}
    for table in RECEPTOR_TABLES:
        items = []
        for i, raw in enumerate(ctx.cfg.get(table) or []):
            items += _receptor_items(ctx, table, raw, f"{table}[{i}]")
        ids = [r.id for r in items]
        dup = {x for x in ids if ids.count(x) > 1}
        if dup:
            raise InputError(f"receptor ids must be unique; repeated: {', '.join(sorted(dup))}",
                             file=ctx.cfg.path, key=table)
        out[table] = tuple(items)
    return Receptors(**out)


def _receptor_items(ctx, table, raw, where) -> list:
    if table == "boreholes":
        geom = Point(raw["x"] * ctx.factor, raw["y"] * ctx.factor)
        return [Borehole(raw["id"], geom, raw["top"], raw["bottom"], raw["step"])]
    line = table == "pipes"
    key = "line" if line else "outline"
    if raw.get(key) is not None:
        if not raw.get("id"):
            raise InputError("needs an id", file=ctx.cfg.path, key=f"{where}.id")
        xy = ctx.xy(raw[key])
        geoms = [(raw["id"], LineString(xy) if line else Polygon(xy), {})]
    elif raw.get("file") is not None:
        layer, ids = rc.receptor_layer(
            raw["file"], RECEPTOR_TABLES[table], id_field=raw["id_field"],
            required_fields=[raw["depth_field"]] if raw.get("depth_field") else ())
        geoms = [(rid, geom, {f: v[k] for f, v in layer.fields.items()}) for k, (rid, geom)
                 in enumerate(zip(ids, _into_site(ctx, layer, raw["file"])))]
    else:
        raise InputError(f"needs {key} = [[x, y], ...] or file = \"...\"",
                         file=ctx.cfg.path, key=where)
    items = []
    for rid, geom, attrs in geoms:
        item = dict(raw)
        if raw.get("depth_field"):          # read_receptor_layer checked it is filled
            item["foundation_depth" if not line else "crown_depth"] = (
                float(attrs[raw["depth_field"]]) * ctx.cfg.units.length_to_m)
        item.update(id=rid, geometry=geom)
        if line:
            items.append(Pipe(rid, geom, _pipe_crown_depth(ctx, item, where),
                              item.get("diameter") or 0.0, item["spacing"],
                              item["differential_length"]))
            continue
        depth = _level(ctx, item, where, geom, "foundation_depth", "foundation_elevation")
        if depth is None:
            raise InputError("needs foundation_depth, foundation_elevation or depth_field",
                             file=ctx.cfg.path, key=where)
        items.append(Building(rid, geom, depth, item["interior_spacing"],
                              item["profile_step"], item["profile_bottom"],
                              item.get("wall_spacing")))
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


def _points(ctx: _Context, receptors: Receptors) -> pd.DataFrame:
    import pandas as pd
    frames = []
    for table, items in receptors.by_table().items():
        for k, r in enumerate(items):
            with _located(ctx.cfg, f"{table}[{k}]"):
                frames.append(r.points())
    if not frames:
        return pd.DataFrame(columns=rc.POINT_COLUMNS)
    return pd.concat(frames, ignore_index=True)


def _headroom(ctx: _Context, spec: GridSpec) -> HeadroomTemplate | None:
    """[headroom], typed; its body named, its extent on the grid, its cell a whole multiple
    of the analysis cell."""
    raw, cfg = ctx.cfg.get("headroom"), ctx.cfg
    if raw is None:
        return None
    bodies = cfg["bodies"]
    if raw["kind"] == "body":
        name = raw["body"]
        if name not in bodies:
            near = difflib.get_close_matches(name, list(bodies), n=1)
            hint = f"; did you mean '{near[0]}'?" if near else f"; bodies: {', '.join(bodies)}"
            raise InputError(f"no body is named {name!r}{hint}", file=cfg.path,
                             key="headroom.body")
        if bodies[name].get("excavation"):
            raise InputError(f"{name!r} is an excavation: a template adds load",
                             file=cfg.path, key="headroom.body")
    step = _whole_cells(cfg, spec, raw.get("cell") or spec.dx, "headroom.cell")
    extent = None
    if raw.get("extent"):
        extent = tuple(float(v) * ctx.factor for v in raw["extent"])
        g = spec.extent
        if extent[0] >= g[2] or extent[2] <= g[0] or extent[1] >= g[3] or extent[3] <= g[1]:
            raise InputError("lies outside the analysis grid", file=cfg.path,
                             key="headroom.extent")
    size = (raw["size_x"], raw["size_y"]) if raw["kind"] == "rectangle" else None
    pile = _headroom_pile(cfg, raw) if raw["kind"] == "pile" else None
    return HeadroomTemplate(raw["kind"], raw.get("body"), size, raw.get("pressure"), extent,
                            step, int(raw["recheck"]), pile)


def _headroom_pile(cfg: SiteConfig, raw: dict) -> PileTemplate:
    """[headroom] kind = "pile": a rectangular toe (size_x, size_y) or a circular one
    (diameter), and a height the sides at the repose angle can reach on it."""
    given = [k for k in ("size_x", "size_y", "diameter") if raw.get(k) is not None]
    if given not in (["size_x", "size_y"], ["diameter"]):
        raise InputError("a pile template needs its toe: size_x and size_y, or diameter"
                         f" (given: {', '.join(given) or 'none'})", file=cfg.path,
                         key="headroom." + (given[0] if given else "diameter"))
    if raw["repose_angle"] >= 90.0:
        raise InputError(f"must be below 90 degrees, got {raw['repose_angle']:g}",
                         file=cfg.path, key="headroom.repose_angle")
    size = (raw["size_x"], raw["size_y"]) if raw.get("size_x") is not None else None
    pile = PileTemplate(size, raw.get("diameter"), raw["height"], raw["repose_angle"],
                        raw["unit_weight"])
    if pile.height > pile.peak() * (1 + 1e-9):
        u = cfg.units
        raise InputError(f"{u.length_out(pile.height):g} {u.length} is higher than the "
                         f"{u.length_out(pile.peak()):.3g} {u.length} its toe reaches at "
                         f"{pile.repose_angle:g}°; lower it or widen the toe", file=cfg.path,
                         key="headroom.height")
    return pile


def _whole_cells(cfg: SiteConfig, spec: GridSpec, length: float, key: str) -> int:
    """`length` in analysis cells, refused unless a whole number of them."""
    step = length / spec.dx      # the cell may be snapped by ppm to CRS units
    if abs(step - round(step)) > 1e-4 or round(step) < 1:
        raise InputError(f"must be a whole multiple of the cell size "
                         f"{cfg.units.length_out(spec.dx):g} {cfg.units.length}",
                         file=cfg.path, key=key)
    return round(step)


def _plan_grids(ctx: _Context, spec: GridSpec) -> list:
    grids = []
    for i, g in enumerate(ctx.cfg.get("plan_grids") or []):
        extent = (np.array(g["extent"]) * ctx.factor).tolist() if g.get("extent") else None
        step = _whole_cells(ctx.cfg, spec, g.get("spacing") or spec.dx,
                            f"plan_grids[{i}].spacing")
        with _located(ctx.cfg, f"plan_grids[{i}]"):
            grids.append(rc.plan_grid(extent or list(spec.extent), step * spec.dx,
                                      g["depths"], name=g["name"]))
    return grids
