"""Fill bodies on the analysis grid, their statistics and the surface pressure per stage.

Overlap rule: **loads add**. Bodies are stacked layers — a second body placed over the
first adds its own thickness (and its own unit weight times that thickness) on top,
whatever the order of stages. A body is never clipped by another one. To model one fill
replacing another, give the builders the remaining geometry.

Excavation: a body built by the same builders with ``excavation=True`` keeps a positive
thickness (the depth removed) and contributes ``−γ·t`` (unloading). Thickness grids
that already carry signs (``fill_from_surfaces(..., cut="unload")``) go in with
``excavation=False``.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._validate import finite_array, positive, whole_number
from ..errors import InputError
from ..grid import GridSpec
from .coverage import check_spec


@dataclass(frozen=True, eq=False)
class Body:
    """One fill (or excavation) body as a cell-average thickness grid.

    Parameters
    ----------
    name : str
        Label used in outputs.
    kind : str
        What built it ("footprint", "pile", "embankment", "surface", ...); free text.
    unit_weight : float
        Bulk unit weight γ of the fill (kN/m³), > 0.
    stage : int
        Construction stage (>= 0); the body loads the ground from this stage on.
    thickness : numpy.ndarray, shape ``spec.shape``
        Cell-average thickness (m).
    spec : GridSpec
        The lattice the thickness lives on.
    excavation : bool
        True when the body is soil removed: load −γ·t; thickness must then be >= 0.
    footprint_area_m2, max_height_m : float, optional
        Exact values when the builder knows them (the polygon area, the pile cap);
        otherwise estimated from the grid (see the properties).

    Examples
    --------
    >>> spec = GridSpec(0.0, 0.0, 2.0, 2.0, 2, 1)
    >>> b = Body("pad", "footprint", 20.0, 1, np.array([[1.5, 0.0]]), spec)
    >>> b.volume, b.footprint_area, b.max_height, b.total_load
    (6.0, 4.0, 1.5, 120.0)
    """

    name: str
    kind: str
    unit_weight: float
    stage: int
    thickness: np.ndarray
    spec: GridSpec
    excavation: bool = False
    footprint_area_m2: float | None = None
    max_height_m: float | None = None

    def __post_init__(self):
        if not isinstance(self.name, str) or not self.name.strip():
            raise InputError("must be a non-empty string", argument="name")
        check_spec(self.spec)
        object.__setattr__(self, "unit_weight", positive(self.unit_weight, "unit_weight"))
        whole_number(self.stage, "stage", meaning="an integer >= 0")
        t = finite_array(self.thickness, "thickness", ndim=2)
        if t.shape != self.spec.shape:
            raise InputError(f"has shape {t.shape} but the grid is {self.spec.shape}",
                             argument="thickness")
        if self.excavation and np.any(t < 0):
            raise InputError("an excavation body takes the depth removed as a positive "
                             "thickness", argument="thickness")
        t.setflags(write=False)
        object.__setattr__(self, "thickness", t)

    @property
    def sign(self) -> float:
        """+1 for fill, −1 for excavation."""
        return -1.0 if self.excavation else 1.0

    @property
    def volume(self) -> float:
        """Net volume (m³): Σ thickness × cell area (soil removed, for an excavation)."""
        return float(self.thickness.sum() * self.spec.cell_area)

    @property
    def footprint_area(self) -> float:
        """Plan area (m²): exact if given, else the area of cells with non-zero thickness
        (an overestimate by up to half a cell along the outline)."""
        if self.footprint_area_m2 is not None:
            return float(self.footprint_area_m2)
        return float(np.count_nonzero(self.thickness) * self.spec.cell_area)

    @property
    def max_height(self) -> float:
        """Greatest thickness (m): exact if given, else the largest cell average
        (below the true peak of a pointed pile by a fraction of a cell's rise)."""
        if self.max_height_m is not None:
            return float(self.max_height_m)
        return float(np.abs(self.thickness).max())

    @property
    def pressure(self) -> np.ndarray:
        """Surface pressure (kPa) of this body: ±γ·t."""
        return self.sign * self.unit_weight * self.thickness

    @property
    def total_load(self) -> float:
        """Total vertical load (kN), negative for an excavation."""
        return self.sign * self.unit_weight * self.volume


def stage_pressure(bodies, spec: GridSpec, stage: int) -> np.ndarray:
    """Surface pressure (kPa) at a stage: Σ ±γ·t over bodies with ``body.stage <= stage``.

    Loads add (stacked layers, see the module docstring). A stage before every body
    gives zeros.

    Examples
    --------
    >>> spec = GridSpec(0.0, 0.0, 1.0, 1.0, 1, 1)
    >>> a = Body("base", "footprint", 20.0, 0, np.array([[1.0]]), spec)
    >>> b = Body("surcharge", "footprint", 18.0, 1, np.array([[2.0]]), spec)
    >>> stage_pressure([a, b], spec, 0).tolist(), stage_pressure([a, b], spec, 1).tolist()
    ([[20.0]], [[56.0]])
    """
    check_spec(spec)
    whole_number(stage, "stage", minimum=None, meaning="an integer")
    total = spec.zeros()
    for k, body in enumerate(bodies):
        if not isinstance(body, Body):
            raise InputError(f"item {k} is a {type(body).__name__}, not a Body",
                             argument="bodies")
        if not body.spec.same_lattice(spec):
            raise InputError(f"body {body.name!r} lives on another grid", argument="bodies")
        if body.stage <= stage:
            total += body.pressure
    return total


_NICE = (1.0, 2.0, 2.5, 5.0)
MIN_CELL_M, MAX_CELL_M = 0.1, 20.0
#: Most cells a default grid may have: the bound on the work of a run with defaults
#: (grid arrays, FFT slices and body rasterising scale with it). This project's choice:
#: 2 million cells keep a default run's slices and bodies within seconds to a minute on a
#: 2-core machine; a finer cell is one `[grid] cell` away.
MAX_DEFAULT_CELLS = 2_000_000


@dataclass(frozen=True)
class CellChoice:
    """A default cell size (m) and the rule that chose it, in words for `check`."""

    cell_m: float
    rule: str


def _nice(size_units: float, up: bool) -> float:
    """The 1-2-2.5-5 × 10^k number next below (or above, with `up`) `size_units`."""
    decade = 10.0 ** math.floor(math.log10(size_units) + 1e-12)
    steps = [m * decade for m in _NICE + (10.0,)]
    if up:
        return min(v for v in steps if v >= size_units * (1 - 1e-12))
    return max(v for v in steps if v <= size_units * (1 + 1e-12))


def choose_cell(smallest_feature_m: float, shallowest_depth_m: float | None = None, *,
                area_m2: float | None = None, unit_m: float = 1.0,
                unit: str = "m") -> CellChoice:
    """A default cell: ``min(feature / 10, depth / 2)``, coarsened to bound the work.

    Rationale (this project's rule of thumb, not a published criterion): ten cells across
    the narrowest fill feature (crest, berm, pile toe) resolve its outline and slopes;
    the Boussinesq influence at depth z smooths the surface load over a width of order z,
    so cells no larger than z/2 make the cell-average load indistinguishable at the
    shallowest depth of interest. That size is rounded down to a 1-2-2.5-5 number *in the
    site's length unit* (`unit_m` metres), so a feet site gets 2.5 ft, never 0.1 m. When
    the grid's `area_m2` would then hold more than ``MAX_DEFAULT_CELLS``, the cell is
    the round number next above ``sqrt(area / MAX_DEFAULT_CELLS)`` instead (a long
    corridor's bounding box). The result is bounded to about 0.1…20 m. The run checks
    convergence on a grid of half the cell.

    Parameters
    ----------
    smallest_feature_m : float
        Narrowest plan dimension of any body (m), > 0.
    shallowest_depth_m : float or None
        Shallowest depth (m) where stress is wanted, > 0; None to use the feature rule only.
    area_m2 : float, optional
        Plan area of the analysis grid (m²); None for no work bound.
    unit_m, unit : float, str
        The site's length unit in metres and its label.

    Examples
    --------
    >>> choose_cell(30.0, 4.0).cell_m
    2.0
    >>> c = choose_cell(30.0, 4.0, unit_m=0.3048, unit="ft")
    >>> round(c.cell_m / 0.3048, 9), c.rule
    (5.0, 'depth rule: half the shallowest receptor depth (13.1 ft), rounded down')
    >>> choose_cell(30.0, 4.0, area_m2=5000.0 * 2000.0).cell_m    # 10 km² of grid
    2.5
    """
    feature = positive(smallest_feature_m, "smallest_feature_m")
    unit_m = positive(unit_m, "unit_m")
    size, rule = feature / 10.0, (f"feature rule: a tenth of the narrowest body "
                                  f"({feature / unit_m:.3g} {unit})")
    if shallowest_depth_m is not None:
        depth = positive(shallowest_depth_m, "shallowest_depth_m")
        if depth / 2.0 < size:
            size, rule = depth / 2.0, (f"depth rule: half the shallowest receptor depth "
                                       f"({depth / unit_m:.3g} {unit})")
    lo, hi = _nice(MIN_CELL_M / unit_m, up=True), _nice(MAX_CELL_M / unit_m, up=False)
    rounded = _nice(size / unit_m, up=False)
    cell = min(max(rounded, lo), hi)
    rule += (", rounded down" if cell == rounded else
             f", held to the {'smallest' if cell == lo else 'largest'} default cell")
    if area_m2 is not None and area_m2 / (cell * unit_m) ** 2 > MAX_DEFAULT_CELLS:
        bound = min(_nice(math.sqrt(area_m2 / MAX_DEFAULT_CELLS) / unit_m, up=True), hi)
        rule = (f"work bound: at most {MAX_DEFAULT_CELLS:,} cells over the grid "
                f"(the {rule.split(':')[0]} gave {cell:g} {unit}, "
                f"{area_m2 / (cell * unit_m) ** 2:,.0f} cells)")
        cell = bound
    return CellChoice(cell * unit_m, rule)


def refine(spec: GridSpec, factor: int = 2) -> GridSpec:
    """The same extent with cells `factor` times smaller, for the convergence check.

    Bodies must be rebuilt on the refined lattice (their builders take the spec); the
    comparison of stresses between the two grids is done by the solver's caller.

    Examples
    --------
    >>> refine(GridSpec(0.0, 0.0, 2.0, 2.0, 3, 4)).shape
    (8, 6)
    """
    check_spec(spec)
    factor = whole_number(factor, "factor", minimum=2, meaning="an integer >= 2")
    return spec.refined(factor)
