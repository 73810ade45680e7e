"""The site-file schema: every table and key, its type, unit, default and meaning.

One declaration serves three readers: the validator (`site/build.py`), the generated
site-file reference (`docs/site-file.md`, written by `tools/write_site_reference.py`) and
the error messages that suggest the nearest valid key.
"""
from __future__ import annotations

from dataclasses import dataclass, field

# Unit kinds a key can carry; site/build.py converts each to SI with the site's unit system.
# COORD: plan coordinates in the units of the site CRS (metres, international or US survey
# feet), converted with the CRS's own axis factor, not with the unit system's length.
# SETTLE: a settlement (mm on SI sites, inches on US sites).
LENGTH, PRESSURE, UNIT_WEIGHT, ANGLE, INV_PRESSURE, CV, COORD, SETTLE, NONE = (
    "length", "pressure", "unit_weight", "angle", "1/pressure", "length2/time", "crs",
    "settlement", "")

UNIT_LABELS = {  # (SI label, US label) for the reference
    LENGTH: ("m", "ft"), PRESSURE: ("kPa", "psf"), UNIT_WEIGHT: ("kN/m³", "pcf"),
    ANGLE: ("degrees", "degrees"), INV_PRESSURE: ("1/kPa", "1/psf"),
    CV: ("m²/year", "ft²/year"), COORD: ("CRS unit", "CRS unit"), SETTLE: ("mm", "in"),
    NONE: ("", ""),
}


@dataclass(frozen=True)
class Key:
    """One key of a table: `kind` is str, strs (list of names), float, int, bool, path, xy
    (list of [x, y] or [x, y, z]), pairs (list of [a, b]), floats (list of numbers), extent
    (4 numbers), table (free sub-table of numbers)."""

    name: str
    kind: str
    doc: str
    unit: str = NONE
    default: object = None
    required: bool = False
    choices: tuple = ()
    example: str = ""
    minimum: float | None = None
    exclusive_minimum: bool = False
    aliases: tuple = ()          # other accepted spellings (US: centerline, stations)


@dataclass(frozen=True)
class Table:
    """A table of keys. `many` = "array" for [[name]] arrays of tables, "named" for
    [name.<id>] tables keyed by a name of the user's choosing, "" for one table."""

    name: str
    doc: str
    keys: tuple[Key, ...]
    many: str = ""
    required: bool = False
    variants: dict = field(default_factory=dict)   # value of `kind` -> extra keys

    def key(self, name: str) -> Key | None:
        for k in self.keys:
            if k.name == name:
                return k
        return None

    def keys_for(self, kind: str | None) -> tuple[Key, ...]:
        return self.keys + tuple(self.variants.get(kind, ()))

    def all_key_names(self) -> list[str]:
        names = [k.name for k in self.keys]
        for extra in self.variants.values():
            names += [k.name for k in extra if k.name not in names]
        return names


_POS = dict(minimum=0.0, exclusive_minimum=True)
_NONNEG = dict(minimum=0.0)

SITE = Table("site", "Who and where: the site's name, coordinate system and unit system.", (
    Key("name", "str", "Name of the site, printed on every output.", required=True,
        example='"Kestrel Quay ore yard"'),
    Key("description", "str", "One or two sentences on the job.", default=""),
    Key("crs", "str", "Projected coordinate reference system of the site (EPSG code or WKT). "
        "Layers in another CRS are transformed to it; layers without a CRS are taken to be "
        "in it. Geographic (degree) systems are refused.", example='"EPSG:32632"'),
    Key("units", "str", "Unit system of every number in this file and of the outputs: SI "
        "(m, kPa, kN/m³) or US customary (ft, psf, pcf; settlement in inches).",
        default="SI", choices=("SI", "US")),
), required=True)

GRID = Table("grid", "The analysis grid and the stress method.", (
    Key("cell", "float", "Plan cell size. Default: chosen from the smallest fill feature and the "
        "shallowest receptor depth.", unit=LENGTH, **_POS, example="1.0"),
    Key("margin", "float", "Distance the grid extends beyond the fill and the receptors.",
        unit=LENGTH, default=10.0, **_NONNEG),
    Key("method", "str", "Stress solution: Boussinesq (homogeneous isotropic half-space) or "
        "Westergaard (layered deposit with thin rigid reinforcing layers).",
        default="boussinesq", choices=("boussinesq", "westergaard")),
    Key("poisson", "float", "Poisson's ratio for the Westergaard solution (0 ≤ ν < 0.5).",
        default=0.0, minimum=0.0),
    Key("convergence_check", "bool", "Recompute the receptors on a grid of half the cell size "
        "and report the largest relative change.", default=True),
    Key("memory_cap", "float", "Largest memory a run may use, in GB (10⁹ bytes). Plan slices "
        "beyond it are computed in tiles; point work beyond it is refused before it starts. "
        "Default: 60 % of the machine's memory.", **_POS),
))

GROUND = Table("ground", "The existing ground surface, used to turn elevations into depths "
               "and to draw the fill in 3D. Give at most one source.", (
    Key("elevation", "float", "A flat existing ground at this elevation.", unit=LENGTH),
    Key("raster", "path", "GeoTIFF of existing ground elevation.", example='"existing.tif"'),
    Key("points", "path", "Survey points (x, y, z) as CSV or whitespace text, triangulated "
        "over the surveyed area: outer triangles with an edge over 5 × the median edge "
        "(gaps, the inside of a curve) are left out.",
        example='"existing_survey.csv"'),
    Key("landxml", "path", "LandXML file with a TIN surface of the existing ground."),
    Key("surface_name", "str", "Which surface of a LandXML file to use (default: the first)."),
))

_BODY_COMMON = (
    Key("kind", "str", "How the body is built.", required=True,
        choices=("pile", "footprint", "embankment", "surfaces")),
    Key("unit_weight", "float", "Bulk unit weight of the fill as placed.", unit=UNIT_WEIGHT,
        required=True, **_POS, example="19.0"),
    Key("stage", "int", "Construction stage; the load of stage k is the sum of bodies with "
        "stage ≤ k.", default=1, minimum=1),
    Key("excavation", "bool", "The body is removed material: its load is negative.",
        default=False),
    Key("removal_day", "float", "Day (after the start of stage 1) the body is taken away, "
        "e.g. a preload surcharge: its load is removed then and the soil below rebounds on "
        "Cr (or the unloading modulus).", **_NONNEG, example="240"),
)
_OUTLINE = (
    Key("outline", "xy", "Plan outline as a list of [x, y] vertices in site CRS units (closed automatically).",
        example="[[0, 0], [40, 0], [40, 25], [0, 25]]"),
    Key("file", "path", "Vector file (GeoJSON or any format geopandas reads) with the outline(s)."),
    Key("where", "str", "Select features of `file` whose `id_field` equals this value."),
    Key("id_field", "str", "Attribute of `file` used by `where`.", default="id"),
)
BODY_VARIANTS = {
    "pile": _OUTLINE + (
        Key("repose_angle", "float", "Angle of repose of the stockpiled material.", unit=ANGLE,
            required=True, minimum=1.0, example="37"),
        Key("crest_height", "float", "Height cap: the pile is flat-topped at this height.",
            unit=LENGTH, **_POS),
    ),
    "footprint": _OUTLINE + (
        Key("height", "float", "Constant fill height over the outline.", unit=LENGTH, **_NONNEG),
        Key("height_field", "str", "Attribute of `file` holding each feature's height."),
        Key("sloping_top", "bool", "Take the top from the z values of 3D outline vertices.",
            default=False),
    ),
    "embankment": (
        Key("centreline", "xy", "Centreline as a list of [x, y] vertices in site CRS units, in chainage order.",
            example="[[0, 0], [80, 0], [140, 30]]", aliases=("centerline",)),
        Key("file", "path", "Vector file with the centreline (a LineString)."),
        Key("where", "str", "Select the feature of `file` whose `id_field` equals this value."),
        Key("id_field", "str", "Attribute of `file` used by `where`.", default="id"),
        Key("crest_width", "float", "Width of the crest.", unit=LENGTH, required=True, **_NONNEG),
        Key("side_slope", "float", "Side slopes, horizontal per unit vertical (H:V).",
            required=True, **_POS, example="2.0"),
        Key("heights", "pairs", "Crest height profile as [chainage, height] pairs, linear "
            "between them.", unit=LENGTH, required=True, example="[[0, 1.0], [120, 7.5]]"),
        Key("start_end", "str", "End at chainage 0: a slope, or vertical against a structure.",
            default="slope", choices=("slope", "vertical")),
        Key("finish_end", "str", "End at the last chainage: a slope or vertical.",
            default="slope", choices=("slope", "vertical")),
        Key("end_slope", "float", "End slopes (H:V); default the side slope.", **_POS),
    ),
    "surfaces": (
        Key("design", "path", "Design (finished) surface: GeoTIFF, survey points or LandXML.",
            required=True, example='"design.tif"'),
        Key("existing", "path", "Existing ground surface for this body: GeoTIFF, survey points "
            "or LandXML. Default: the [ground] surface."),
        Key("cut", "str", "Where the design is below existing ground: ignore the cut, or treat "
            "it as unloading.", default="ignore", choices=("ignore", "unload")),
        Key("fill_tolerance", "float", "Differences between the design and existing surfaces "
            "smaller than this are numerical noise of two surveys of the same ground: not "
            "loaded and not counted as fill or cut. Default 1 mm.", unit=LENGTH,
            default=0.001, **_NONNEG),
    ),
}
BODIES = Table("bodies", "Fill bodies, one table each under a name of your choice, e.g. "
               "[bodies.north_pile].", _BODY_COMMON, many="named", required=True,
               variants=BODY_VARIANTS)

ALIGNMENT = Table("alignment", "A centreline with stations (chainage) for the longitudinal "
                  "profile and the cross-sections of a road, rail line, levee or pipeline. "
                  "Stations print as 10+00 (100 ft) on US sites and 1+000 (1000 m) on SI "
                  "sites.", (
    Key("centreline", "xy", "Centreline as [x, y] vertices in site CRS units, in station "
        "order.", example="[[0, 0], [800, 0], [1400, 300]]", aliases=("centerline",)),
    Key("body", "str", "Take the centreline of this embankment body instead."),
    Key("start_chainage", "float", "Station of the first vertex.", unit=LENGTH, default=0.0,
        aliases=("start_station",)),
    Key("chainages", "floats", "Stations of the cross-sections.", unit=LENGTH,
        aliases=("stations",), example="[1200, 4500]"),
    Key("profile_depths", "floats", "Depths below ground of Δσz along the profile "
        "(default: the plan-grid depths, else the building foundation and pipe crown "
        "depths).", unit=LENGTH),
    Key("profile_step", "float", "Spacing of the profile points along the centreline "
        "(default: about 400 points over its length).", unit=LENGTH, **_POS),
    Key("section_width", "float", "Full width of each cross-section (default: 2.5 × the "
        "width of the fill across the centreline there).", unit=LENGTH, **_POS),
    Key("section_depth", "float", "Depth of each cross-section's Δσz panel (default: "
        "the width of the fill across the centreline, at most the soil profile's depth).",
        unit=LENGTH, **_POS),
))

SOIL = Table("soil", "Soil profile: horizontal layers below the existing ground.", (
    Key("water_table", "float", "Depth of the water table below ground.", unit=LENGTH,
        required=True, **_NONNEG),
    Key("rigid_base", "float", "Depth of an incompressible base; no compression below it.",
        unit=LENGTH, **_POS),
    Key("influence_fraction", "float", "Influence depth: where Δσz falls to this fraction of "
        "σ'v0 (common practice: 0.10).", default=0.10, **_POS),
))
LAYER = Table("soil.layers", "One soil layer; layers must follow each other without gaps "
              "from depth 0.", (
    Key("name", "str", "Layer name.", required=True, example='"soft clay"'),
    Key("top", "float", "Depth of the layer top.", unit=LENGTH, required=True, **_NONNEG),
    Key("bottom", "float", "Depth of the layer bottom.", unit=LENGTH, required=True, **_POS),
    Key("unit_weight", "float", "Bulk unit weight above the water table.", unit=UNIT_WEIGHT,
        required=True, **_POS),
    Key("saturated_unit_weight", "float", "Saturated unit weight below the water table "
        "(default: unit_weight).", unit=UNIT_WEIGHT, **_POS),
    Key("cc", "float", "Compression index Cc.", **_POS),
    Key("cr", "float", "Recompression (swelling) index Cr.", **_POS),
    Key("e0", "float", "Initial void ratio.", **_POS),
    Key("sigma_p", "float", "Preconsolidation stress σ'p.", unit=PRESSURE, **_POS),
    Key("ocr", "float", "Overconsolidation ratio σ'p/σ'v0, applied at each depth (instead of sigma_p).",
        minimum=1.0),
    Key("mv", "float", "Coefficient of volume compressibility.", unit=INV_PRESSURE, **_POS),
    Key("modulus", "float", "Constrained (oedometer) modulus.", unit=PRESSURE, **_POS),
    Key("cv", "float", "Coefficient of consolidation, for settlement with time.", unit=CV, **_POS),
    Key("ch", "float", "Horizontal coefficient of consolidation for radial flow to vertical "
        "drains (default: cv).", unit=CV, **_POS),
    Key("unloading_modulus", "float", "Constrained modulus for unloading and reloading below "
        "the largest past stress, mv and modulus layers (default: the loading value; index "
        "layers unload on cr).", unit=PRESSURE, **_POS),
    Key("c_alpha", "float", "Secondary compression index Cα (void ratio change per log cycle "
        "of time), index layers; divided by 1 + e_p.", **_POS),
    Key("c_alpha_eps", "float", "Modified secondary compression index Cα/(1+e0), any "
        "compressible layer (instead of c_alpha).", **_POS),
    Key("c_alpha_ratio_surcharged", "float", "Cα'/Cα where the layer ends below its largest "
        "past stress (after a surcharge), a value you choose (Mesri's Cα/Cc concept).",
        default=1.0, **_POS),
    Key("end_of_primary_days", "float", "Time after loading at which primary consolidation "
        "ends, for secondary compression (default: when the layer reaches U = 95 %).", **_POS),
    Key("drainage", "str", "Drainage boundaries of the layer for consolidation with time.",
        default="double", choices=("double", "top", "bottom")),
), many="array")

BUILDINGS = Table("buildings", "Buildings to check, each an [[buildings]] entry: inline "
                  "outline or a vector file of footprints.", (
    Key("id", "str", "Name of the building (with `file`: prefix of the feature ids)."),
    Key("outline", "xy", "Footprint as [x, y] vertices in site CRS units."),
    Key("file", "path", "Vector file of footprint polygons."),
    Key("id_field", "str", "Attribute of `file` naming each building.", default="id"),
    Key("foundation_depth", "float", "Depth of the foundation below existing ground.",
        unit=LENGTH, **_NONNEG),
    Key("foundation_elevation", "float", "Elevation of the foundation (needs [ground]).",
        unit=LENGTH),
    Key("depth_field", "str", "Attribute of `file` with each foundation depth."),
    Key("interior_spacing", "float", "Spacing of the interior grid of points.", unit=LENGTH,
        default=5.0, **_POS),
    Key("wall_spacing", "float", "Largest step between points along each wall, for the "
        "relative rotation and deflection ratio of each wall line (Burland & Wroth 1974).",
        unit=LENGTH, default=2.0, **_POS),
    Key("profile_step", "float", "Step of the vertical profile below the centroid.",
        unit=LENGTH, default=1.0, **_POS),
    Key("profile_bottom", "float", "Depth of the bottom of the vertical profile.",
        unit=LENGTH, default=20.0, **_POS),
), many="array")

PIPES = Table("pipes", "Buried pipes and other lines, each a [[pipes]] entry.", (
    Key("id", "str", "Name of the pipe."),
    Key("line", "xy", "Route as [x, y] vertices in site CRS units, in chainage order."),
    Key("file", "path", "Vector file of LineStrings."),
    Key("id_field", "str", "Attribute of `file` naming each line.", default="id"),
    Key("crown_depth", "float", "Depth of the pipe crown below existing ground.", unit=LENGTH,
        **_NONNEG),
    Key("invert_depth", "float", "Depth of the invert (crown = invert − diameter).",
        unit=LENGTH, **_NONNEG),
    Key("invert_elevation", "floats", "Invert elevation, one value or one per vertex "
        "(needs [ground]).", unit=LENGTH),
    Key("depth_field", "str", "Attribute of `file` with the crown depth."),
    Key("diameter", "float", "Outside diameter.", unit=LENGTH, default=0.0, **_NONNEG),
    Key("spacing", "float", "Sampling spacing along the line.", unit=LENGTH, default=2.0, **_POS),
    Key("differential_length", "float", "Length over which the largest differential "
        "settlement is reported.", unit=LENGTH, default=10.0, **_POS),
), many="array")

BOREHOLES = Table("boreholes", "Vertical profiles of stress (and settlement) at points.", (
    Key("id", "str", "Name of the borehole.", required=True),
    Key("x", "float", "Easting.", unit=COORD, required=True),
    Key("y", "float", "Northing.", unit=COORD, required=True),
    Key("top", "float", "Depth of the first point.", unit=LENGTH, default=0.5, **_NONNEG),
    Key("bottom", "float", "Depth of the last point.", unit=LENGTH, default=20.0, **_POS),
    Key("step", "float", "Depth step.", unit=LENGTH, default=0.5, **_POS),
), many="array")

PLAN_GRIDS = Table("plan_grids", "Plan grids of Δσz at a list of depths, computed exactly by "
                   "FFT on the analysis grid's cell centres.", (
    Key("name", "str", "Name used in file names.", required=True, example='"plan"'),
    Key("depths", "floats", "Depths of the slices.", unit=LENGTH, required=True,
        example="[2.0, 5.0, 10.0]"),
    Key("extent", "extent", "[xmin, ymin, xmax, ymax] of the grid (default: the analysis grid "
        "extent).", unit=COORD),
    Key("spacing", "float", "Node spacing: the analysis cell (default) or a whole multiple of "
        "it, taking every k-th cell centre (the FFT slices are exact only on cell centres).",
        unit=LENGTH, **_POS),
), many="array")

SETTLEMENT = Table("settlement", "Settlement checks (need [soil]).", (
    Key("stage_days", "floats", "Start time of each construction stage, days after the "
        "start of stage 1, for the settlement-time curve.", example="[0, 90]"),
    Key("stage_durations", "floats", "Build duration of each stage in days: its load rises "
        "linearly over it (ramp loading, Olson 1977). Default 0 (placed at once).",
        example="[30, 20]"),
    Key("design_life_years", "float", "Design life after the last stage starts, for secondary "
        "compression and the preload removal target.", default=30.0, **_POS),
    Key("removal_includes_secondary", "bool", "The earliest surcharge removal day aims at the "
        "permanent-load settlement plus the secondary compression over the design life.",
        default=False),
    Key("target_degree", "float", "Drain design: the average degree of consolidation (0-1) to "
        "reach by `target_day`; the drain spacing that does it is solved in each drain zone.",
        **_POS, example="0.9"),
    Key("target_day", "float", "Drain design: the day by which `target_degree` is wanted.",
        **_POS, example="180"),
    Key("limit_no_cracking", "float", "Angular distortion limit where no cracking is "
        "acceptable (Bjerrum 1963: 1/500).", default=1 / 500, **_POS),
    Key("limit_first_cracking", "float", "Limit of first cracking of panel walls "
        "(Bjerrum 1963: 1/300).", default=1 / 300, **_POS),
    Key("limit_structural_damage", "float", "Limit of structural damage (Bjerrum 1963: "
        "1/150).", default=1 / 150, **_POS),
))

DRAINS = Table("drains", "Vertical drain zones, each a [[drains]] entry: a plan polygon and "
               "the drain layout inside it (radial consolidation by Hansbo 1981, combined with "
               "vertical drainage by Carrillo 1942).", (
    Key("id", "str", "Name of the zone.", required=True),
    Key("outline", "xy", "Zone polygon as [x, y] vertices in site CRS units.", required=True),
    Key("pattern", "str", "Drain pattern: de = 1.05 s (triangular) or 1.128 s (square).",
        default="triangular", choices=("triangular", "square")),
    Key("spacing", "float", "Centre-to-centre drain spacing s.", unit=LENGTH, required=True, **_POS),
    Key("diameter", "float", "Drain diameter dw (sand drains), or give width and thickness.",
        unit=LENGTH, **_POS),
    Key("width", "float", "Band drain width a (dw = 2(a+b)/π, Hansbo 1979).", unit=LENGTH, **_POS),
    Key("thickness", "float", "Band drain thickness b.", unit=LENGTH, **_POS),
    Key("depth", "float", "Depth of penetration below ground; drains act above it.",
        unit=LENGTH, required=True, **_POS),
    Key("smear_diameter", "float", "Diameter ds of the smear zone (default: no smear).",
        unit=LENGTH, **_POS),
    Key("k_ratio", "float", "kh/ks, undisturbed over smeared permeability (>= 1).",
        default=1.0, minimum=1.0),
    Key("kh_over_qw", "float", "Well resistance: soil kh over drain discharge capacity qw, "
        "in 1/m² (SI only; default 0, no well resistance).", default=0.0, **_NONNEG),
), many="array")

OUTPUTS = Table("outputs", "Which files a run writes besides the point tables and manifest.", (
    Key("geotiff", "bool", "One GeoTIFF per depth slice and the fill rasters.", default=True),
    Key("netcdf", "bool", "The NetCDF cube of the plan grids.", default=True),
    Key("geopackage", "bool", "layers.gpkg: every vector layer of the run in the site CRS.",
        default=True),
    Key("geojson_crs", "str", "Coordinates of the GeoJSON files: `wgs84` writes RFC 7946 "
        "(WGS 84 longitude and latitude, no `crs` member, rounded to what the cell "
        "resolves); `site` keeps the site CRS with a `crs` member, for tools that want "
        "projected GeoJSON (not RFC 7946). A site without a CRS writes its local "
        "coordinates either way.", default="wgs84", choices=("wgs84", "site")),
    Key("vtk", "bool", "VTK files for 3D viewers (needs the 'view' extra; default: written "
        "where it is installed, with a warning where it is not).", default=None),
    Key("report", "bool", "The HTML engineering report.", default=True),
    Key("scene", "bool", "The standalone HTML 3D scene (needs the 'view' extra; default as "
        "for vtk).", default=None),
))

MONITORING = Table("monitoring", "Field readings for `fillstress monitor` (readings against "
                   "the prediction); the command line may give or override each.", (
    Key("readings", "path", "Readings CSV: settlement plates and markers, extensometer "
        "anchors, piezometers (docs/guide.md, during construction).", example='"readings.csv"'),
    Key("construction", "path", "Construction record CSV (stage, date or day, placed): the "
        "fill as actually placed.", example='"construction.csv"'),
    Key("day0", "str", "Calendar date (YYYY-MM-DD) of the site's day 0, from which "
        "stage_days and the readings' days count.", example='"2025-03-03"'),
))

_LIMIT_VALUES = (
    Key("stress_increase", "float", "Largest Δσz at any point of a receptor (a building's "
        "foundation points, a pipe's crown, a borehole's depths).", unit=PRESSURE, **_POS),
    Key("stress_ratio", "float", "Largest Δσz/σ'v0 at any point of a receptor (needs "
        "[soil]).", **_POS, example="0.1"),
    Key("settlement", "float", "Largest settlement of a building or pipe (needs [soil]).",
        unit=SETTLE, **_POS),
    Key("differential_settlement", "float", "Differential settlement: between any two points "
        "of a building, and along a pipe over its own differential_length.",
        unit=SETTLE, **_POS),
    Key("angular_distortion", "float", "Angular distortion β of a building (Burland & Wroth "
        "1974), as a ratio (1/500 = 0.002).", **_POS),
    Key("tilt", "float", "Tilt ω of a building, as a ratio.", **_POS),
    Key("pipe_differential", "float", "Differential settlement of a pipe within "
        "pipe_differential_length (needs it).", unit=SETTLE, **_POS),
    Key("pipe_differential_length", "float", "Length over which pipe_differential is judged.",
        unit=LENGTH, **_POS),
    Key("pipe_radius_min", "float", "Smallest radius of curvature of a settled pipe: the "
        "curvature limit is 1/R.", unit=LENGTH, **_POS),
)
LIMITS = Table("limits", "Limits on what the fill may do to the receptors; each result "
               "marks its utilisation (value ÷ limit, 1 = the limit is reached) and the "
               "governing receptor. A key left out sets no limit of its own.", _LIMIT_VALUES + (
    Key("published", "bool", "Apply the published limits for buildings (Bjerrum 1963; "
        "Skempton & MacDonald 1956: angular distortion, tilt, settlement, differential "
        "settlement); a value given here for the same quantity replaces them.",
        default=True),
    Key("max_heights", "bool", "Also find each fill body's maximum height: the factor on its "
        "height, the other bodies in place, at which the first limit is reached "
        "(max_heights.csv; a root search on the settlement per body, so the run takes "
        "longer).", default=False),
))
LIMIT_OVERRIDES = Table("limits.overrides", "Limits of one receptor, each an "
                        "[[limits.overrides]] entry: every quantity it gives replaces the "
                        "general limits of that quantity at this receptor.", (
    Key("receptor", "str", "Id of the building, pipe or borehole.", required=True),
) + _LIMIT_VALUES, many="array")

# --- the odds of exceeding a limit ([uncertainty]) -------------------------------------
# Each parameter that may be uncertain → the unit of its mean, sd and bounds.
UNCERTAIN_UNITS = {"cc": NONE, "cr": NONE, "e0": NONE, "sigma_p": PRESSURE, "ocr": NONE,
                   "cv": CV, "mv": INV_PRESSURE, "modulus": PRESSURE,
                   "unit_weight": UNIT_WEIGHT, "saturated_unit_weight": UNIT_WEIGHT,
                   "water_table": LENGTH}
UNCERTAINTY = Table("uncertainty", "The odds of exceeding a limit: soil parameters, fill unit "
                    "weights and the water table given as distributions "
                    "([[uncertainty.parameters]]), sampled by a seeded Latin hypercube "
                    "(McKay, Beckman & Conover 1979). Each sample's settlement and building "
                    "and pipe checks are recomputed; odds.csv gives P10/P50/P90 of each "
                    "receptor's settlement, differential settlement and distortion and the "
                    "probability of exceeding each settlement limit in force (needs [soil]).", (
    Key("samples", "int", "Number of samples (the sampling error of a probability p is about "
        "sqrt(p(1−p)/samples)).", default=400, minimum=20),
    Key("seed", "int", "Seed of the sampling: the same seed gives the same samples.",
        default=0, minimum=0),
))
UNCERTAIN_PARAMETERS = Table(
    "uncertainty.parameters", "One uncertain parameter, each an [[uncertainty.parameters]] "
    "entry. Its mean, sd and bounds are in the parameter's own unit (kPa or psf for sigma_p "
    "and modulus, m or ft for water_table, ...). Parameters not named in a "
    "[[uncertainty.correlations]] entry are independent.", (
        Key("parameter", "str", "What is uncertain: a soil parameter of `layer` (unit_weight "
            "also moves the saturated unit weight when that is not given), a fill body's "
            "unit_weight (with `body`; its stress is scaled, being linear in the load) or "
            "the depth of the water table.", required=True, choices=tuple(UNCERTAIN_UNITS),
            example='"cc"'),
        Key("layer", "str", "Name of the soil layer of a soil parameter.",
            example='"firm clay"'),
        Key("body", "str", "Name of the fill body whose unit_weight is uncertain."),
        Key("distribution", "str", "Normal, lognormal (for a parameter that cannot be "
            "negative) or uniform.", required=True,
            choices=("normal", "lognormal", "uniform")),
        Key("mean", "float", "Mean (default: the value in the site file)."),
        Key("cov", "float", "Coefficient of variation, sd / |mean| (normal, lognormal; "
            "uniform: bounds mean ± √3·sd).", **_POS, example="0.3"),
        Key("sd", "float", "Standard deviation of a normal distribution, instead of cov.",
            **_POS),
        Key("low", "float", "Lower bound of a uniform distribution (instead of cov)."),
        Key("high", "float", "Upper bound of a uniform distribution."),
    ), many="array")
UNCERTAIN_CORRELATIONS = Table(
    "uncertainty.correlations", "A rank correlation between two uncertain parameters, each "
    "an [[uncertainty.correlations]] entry, imposed by the Iman & Conover (1982) method "
    "(every parameter keeps its distribution).", (
        Key("between", "strs", "The two parameters, each named `<layer>.<parameter>`, "
            "`<body>.unit_weight` or `water_table`.", required=True,
            example='["firm clay.cc", "firm clay.e0"]'),
        Key("coefficient", "float", "Target rank correlation, strictly between −1 and 1.",
            required=True, example="0.5"),
    ), many="array")

# --- where the next load can go ([headroom]) --------------------------------------------
HEADROOM = Table("headroom", "A headroom map: the largest multiple of a template load that "
                 "may be placed centred on each plan cell before the first stress or "
                 "settlement-derived limit in force ([limits]: settlement, differential "
                 "settlement, angular distortion, tilt, pipe differential and curvature) is "
                 "reached at any receptor "
                 "(headroom.tif; stress limits exact by reciprocity, settlement limits "
                 "linearised about the present state and the lowest cells re-checked on "
                 "the full settlement).", (
    Key("kind", "str", "The template: a uniform rectangle, a body of the site (its "
        "shape and unit weight), or a stockpile on a rectangular or circular toe.",
        required=True, choices=("rectangle", "body", "pile")),
    Key("extent", "extent", "[xmin, ymin, xmax, ymax] of the map (default: the analysis "
        "grid).", unit=COORD),
    Key("cell", "float", "Map cell: the analysis cell (default) or a whole multiple of it; "
        "a body template is averaged onto it (its load kept), a pile built on it.",
        unit=LENGTH, **_POS),
    Key("recheck", "int", "Number of cells of the settlement map re-checked with the "
        "template placed for real on the full nonlinear settlement: the lowest two thirds "
        "and the rest spread over the map. Where the full model allows less than the "
        "linearisation, the map's settlement limits are scaled by the worst ratio found.",
        default=30, minimum=0),
), variants={
    "rectangle": (
        Key("size_x", "float", "Size of the rectangle east-west.", unit=LENGTH, required=True,
            **_POS),
        Key("size_y", "float", "Size of the rectangle north-south.", unit=LENGTH,
            required=True, **_POS),
        Key("pressure", "float", "Uniform pressure of the rectangle.", unit=PRESSURE,
            required=True, **_POS),
    ),
    "body": (
        Key("body", "str", "Name of the site body used as the template (a fill, not an "
            "excavation).", required=True, example='"ore_east"'),
    ),
    "pile": (
        Key("size_x", "float", "Toe length east-west of a rectangular toe (with size_y).",
            unit=LENGTH, **_POS),
        Key("size_y", "float", "Toe length north-south of a rectangular toe.", unit=LENGTH,
            **_POS),
        Key("diameter", "float", "Toe diameter of a circular toe (instead of size_x, "
            "size_y).", unit=LENGTH, **_POS),
        Key("height", "float", "Height of the pile: flat-topped at this height, at most the "
            "peak its toe and repose angle give.", unit=LENGTH, required=True, **_POS),
        Key("repose_angle", "float", "Angle of repose of the stockpiled material.",
            unit=ANGLE, required=True, minimum=1.0, example="37"),
        Key("unit_weight", "float", "Bulk unit weight of the stockpiled material.",
            unit=UNIT_WEIGHT, required=True, **_POS, example="23.0"),
    ),
})

TABLES: tuple[Table, ...] = (SITE, GRID, GROUND, BODIES, ALIGNMENT, SOIL, LAYER, BUILDINGS,
                             PIPES, BOREHOLES, PLAN_GRIDS, SETTLEMENT, DRAINS, OUTPUTS,
                             MONITORING, LIMITS, LIMIT_OVERRIDES, UNCERTAINTY,
                             UNCERTAIN_PARAMETERS, UNCERTAIN_CORRELATIONS, HEADROOM)
TOP_LEVEL = {t.name: t for t in TABLES if "." not in t.name}

# The variants file of `fillstress batch`: its own TOML file, lengths in the site's units.
VARIANTS = Table("variants", "One table per variant of the site that `fillstress batch` runs; "
                 "each gets its own results folder, and the envelope takes the largest value "
                 "over the variants at every receptor point. A key left out keeps the site's "
                 "own value.", (
    Key("name", "str", "Folder name of the variant's results: letters, digits, _ or -.",
        required=True, example='"dense_fill"'),
    Key("unit_weight_factor", "float", "Every body's unit weight × this.", default=1.0, **_POS),
    Key("height_factor", "float", "Every body's thickness × this.", default=1.0, **_POS),
    Key("water_table", "float", "Depth of the water table below ground; replaces "
        "`[soil] water_table` (needs a [soil] table).", unit=LENGTH, **_NONNEG,
        example="0.5"),
    Key("method", "str", "Stress solution of this variant (default: the site's).",
        choices=("boussinesq", "westergaard")),
    Key("poisson", "float", "Poisson's ratio for Westergaard (default: the site's).",
        **_NONNEG),
), many="array", required=True)
