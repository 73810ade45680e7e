"""The load model: a regular plan grid of uniformly loaded rectangular cells."""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ._summary import Summarised, crs_text
from ._validate import finite, finite_array, positive
from .errors import InputError


class _Lattice:
    """Plan geometry shared by LoadGrid and GridSpec (needs x0, y0, dx, dy, nx, ny)."""

    @property
    def cell_area(self) -> float:
        """Plan area of one cell, m²."""
        return self.dx * self.dy

    @property
    def extent(self) -> tuple[float, float, float, float]:
        """(xmin, ymin, xmax, ymax) of the whole grid in m."""
        return (self.x0, self.y0, self.x0 + self.nx * self.dx, self.y0 + self.ny * self.dy)

    @property
    def x_centres(self) -> np.ndarray:
        """x of the cell centres (m), west to east."""
        return self.x0 + (np.arange(self.nx) + 0.5) * self.dx

    @property
    def y_centres(self) -> np.ndarray:
        """y of the cell centres (m), south to north (row order)."""
        return self.y0 + (np.arange(self.ny) + 0.5) * self.dy

    def same_lattice(self, other) -> bool:
        """True when `other` (a LoadGrid or GridSpec) has the same origin, cell size and
        shape."""
        return (self.shape == other.shape and np.isclose(self.x0, other.x0)
                and np.isclose(self.y0, other.y0) and np.isclose(self.dx, other.dx)
                and np.isclose(self.dy, other.dy))


@dataclass(frozen=True, eq=False, repr=False)
class LoadGrid(Summarised, _Lattice):
    """A plan grid of cells, each a uniform surface pressure (kPa).

    ``pressure[j, i]`` covers ``x0 + i*dx … x0 + (i+1)*dx`` and
    ``y0 + j*dy … y0 + (j+1)*dy``: row 0 is the southern row, x runs east, y north.
    Negative pressure (excavation, unloading) is allowed.

    Parameters
    ----------
    pressure : array_like, shape (ny, nx)
        Surface pressure of each cell in kPa.
    x0, y0 : float
        Coordinates (m) of the south-west corner of cell ``[0, 0]``.
    dx, dy : float
        Cell size (m) in x and y, positive.
    crs : str or pyproj.CRS, optional
        Coordinate reference system of x and y, carried through to outputs.

    Examples
    --------
    >>> g = LoadGrid([[100.0, 100.0]], x0=0.0, y0=0.0, dx=1.0, dy=2.0)
    >>> g.shape, g.total_load
    ((1, 2), 400.0)
    >>> g.extent
    (0.0, 0.0, 2.0, 2.0)
    """

    pressure: np.ndarray
    x0: float
    y0: float
    dx: float
    dy: float
    crs: object = field(default=None)

    def __post_init__(self):
        p = finite_array(self.pressure, "pressure", ndim=2)
        if p.size == 0:
            raise InputError("must have at least one cell", argument="pressure")
        object.__setattr__(self, "pressure", np.ascontiguousarray(p))
        object.__setattr__(self, "x0", finite(self.x0, "x0"))
        object.__setattr__(self, "y0", finite(self.y0, "y0"))
        object.__setattr__(self, "dx", positive(self.dx, "dx"))
        object.__setattr__(self, "dy", positive(self.dy, "dy"))

    @classmethod
    def from_thickness(cls, thickness, unit_weight, x0, y0, dx, dy, crs=None) -> "LoadGrid":
        """Build a grid from fill thickness (m) and unit weight (kN/m³, scalar or per cell).

        Parameters
        ----------
        thickness : array_like, shape (ny, nx)
            Fill thickness of each cell (m); negative for a cut.
        unit_weight : float or array_like, shape (ny, nx)
            Unit weight of the fill (kN/m³, >= 0).
        x0, y0 : float
            Coordinates (m) of the south-west corner of cell ``[0, 0]``.
        dx, dy : float
            Cell size (m), positive.
        crs : str or pyproj.CRS, optional
            Coordinate reference system of x and y.

        Returns
        -------
        LoadGrid
            Pressure = thickness × unit weight (kPa).

        Examples
        --------
        >>> g = LoadGrid.from_thickness([[2.0, 0.0]], 20.0, 0, 0, 1, 1)
        >>> g.pressure.tolist()
        [[40.0, 0.0]]
        """
        t = finite_array(thickness, "thickness", ndim=2)
        gamma = finite_array(unit_weight, "unit_weight")
        if gamma.ndim not in (0, 2) or (gamma.ndim == 2 and gamma.shape != t.shape):
            raise InputError(f"must be a scalar or have the thickness shape {t.shape}, "
                             f"got {gamma.shape}", argument="unit_weight")
        if np.any(gamma < 0):
            raise InputError("must be >= 0 kN/m³", argument="unit_weight")
        return cls(t * gamma, x0, y0, dx, dy, crs)

    # --- geometry -------------------------------------------------------------
    @property
    def shape(self) -> tuple[int, int]:
        """(ny, nx): rows south to north, columns west to east."""
        return self.pressure.shape

    @property
    def ny(self) -> int:
        """Number of rows (y)."""
        return self.pressure.shape[0]

    @property
    def nx(self) -> int:
        """Number of columns (x)."""
        return self.pressure.shape[1]

    @property
    def total_load(self) -> float:
        """Sum of pressure × cell area, kN."""
        return float(self.pressure.sum() * self.cell_area)


    def _summary(self):
        x1, y1 = self.x0 + self.nx * self.dx, self.y0 + self.ny * self.dy
        loaded = int(np.count_nonzero(self.pressure))
        return (f"LoadGrid {self.nx} × {self.ny} cells of {self.dx:g} × {self.dy:g} m",
                [("x, y (m)", f"{self.x0:,.2f} … {x1:,.2f}, {self.y0:,.2f} … {y1:,.2f}"),
                 ("pressure", f"{self.pressure.min():.4g} … {self.pressure.max():.4g} kPa, "
                              f"{loaded:,} cells loaded"),
                 ("total load", f"{self.total_load:,.0f} kN"),
                 ("crs", crs_text(self.crs))])

    def with_pressure(self, pressure) -> "LoadGrid":
        """A grid on the same lattice with new pressures.

        Parameters
        ----------
        pressure : array_like, shape ``self.shape``
            Surface pressure of each cell (kPa).

        Returns
        -------
        LoadGrid
            Same origin, cell size and CRS.
        """
        return LoadGrid(pressure, self.x0, self.y0, self.dx, self.dy, self.crs)

    def __add__(self, other: "LoadGrid") -> "LoadGrid":
        if not isinstance(other, LoadGrid):
            return NotImplemented
        if not self.same_lattice(other):
            raise InputError("grids to add must share origin, cell size and shape", argument="other")
        return self.with_pressure(self.pressure + other.pressure)



@dataclass(frozen=True)
class GridSpec(_Lattice):
    """The analysis lattice shared by every fill body of a site: origin, cell size, shape, CRS.

    Cell ``[j, i]`` covers ``x0 + i*dx … x0 + (i+1)*dx`` and ``y0 + j*dy … y0 + (j+1)*dy``.

    Parameters
    ----------
    x0, y0 : float
        Coordinates (m) of the south-west corner of cell ``[0, 0]``.
    dx, dy : float
        Cell size (m), positive.
    nx, ny : int
        Number of columns (x) and rows (y), at least 1.
    crs : str or pyproj.CRS, optional
        Coordinate reference system of x and y.

    Examples
    --------
    >>> s = GridSpec.covering((3.2, 1.0, 10.1, 4.9), cell=1.0)
    >>> (s.x0, s.y0, s.nx, s.ny)
    (3.0, 1.0, 8, 4)
    """

    x0: float
    y0: float
    dx: float
    dy: float
    nx: int
    ny: int
    crs: object = None

    def __post_init__(self):
        positive(self.dx, "dx")
        positive(self.dy, "dy")
        if int(self.nx) < 1 or int(self.ny) < 1:
            raise InputError(f"grid must have at least one cell, got {self.ny} x {self.nx}",
                             argument="nx/ny")

    @classmethod
    def covering(cls, bounds, cell: float, margin: float = 0.0, crs=None,
                 unit: float = 1.0) -> "GridSpec":
        """The lattice of square cells `cell` (m), snapped to multiples of `cell`, that
        covers `bounds` = (xmin, ymin, xmax, ymax) grown by `margin` on every side.

        With `unit` (metres per unit of the site CRS) the lattice is snapped in CRS units,
        so every raster of a run has round CRS coordinates; a cell within 10 ppm of a
        5-digit value in CRS units is taken as that value (4 ft asked on a US-survey-foot
        CRS is 4 US ft, not 3.999992).

        Parameters
        ----------
        bounds : sequence of 4 float
            (xmin, ymin, xmax, ymax) in metres.
        cell : float
            Cell size (m), positive.
        margin : float
            Growth of the bounds on every side (m).
        crs : str or pyproj.CRS, optional
            Coordinate reference system of x and y.
        unit : float
            Metres per unit of the site CRS (1 for metres).

        Returns
        -------
        GridSpec
            The covering lattice.

        Examples
        --------
        >>> s = GridSpec.covering((0.0, 0.0, 10.0, 10.0), 1.2192, unit=0.3048006096012192)
        >>> round(s.dx / 0.3048006096012192, 12), round(s.x0, 9)
        (4.0, 0.0)
        """
        cell = positive(cell, "cell")
        xmin, ymin, xmax, ymax = (float(b) for b in bounds)
        if not (xmax >= xmin and ymax >= ymin):
            raise InputError(f"bounds must be (xmin, ymin, xmax, ymax), got {bounds}", argument="bounds")
        c = cell / unit
        near = float(f"{c:.5g}")
        c = near if abs(near / c - 1.0) < 1e-5 else c
        x0 = np.floor((xmin - margin) / unit / c) * c
        y0 = np.floor((ymin - margin) / unit / c) * c
        nx = max(1, int(np.ceil(round(((xmax + margin) / unit - x0) / c, 9))))
        ny = max(1, int(np.ceil(round(((ymax + margin) / unit - y0) / c, 9))))
        return cls(float(x0 * unit), float(y0 * unit), c * unit, c * unit, nx, ny, crs)

    @property
    def shape(self) -> tuple[int, int]:
        """(ny, nx) of arrays on this lattice."""
        return (int(self.ny), int(self.nx))

    def zeros(self) -> np.ndarray:
        """A float array of zeros on this lattice.

        Returns
        -------
        numpy.ndarray
            Zeros of shape ``(ny, nx)``.
        """
        return np.zeros(self.shape)

    def load_grid(self, pressure) -> LoadGrid:
        """A LoadGrid of `pressure` on this lattice.

        Parameters
        ----------
        pressure : array_like, shape ``self.shape``
            Surface pressure of each cell (kPa).

        Returns
        -------
        LoadGrid
            Same origin, cell size and CRS.
        """
        return LoadGrid(pressure, self.x0, self.y0, self.dx, self.dy, self.crs)

    def refined(self, factor: int = 2) -> "GridSpec":
        """The same extent with cells `factor` times smaller (convergence checks).

        Parameters
        ----------
        factor : int
            How many cells across each cell becomes.

        Returns
        -------
        GridSpec
            `factor` times as many cells in x and in y.
        """
        return GridSpec(self.x0, self.y0, self.dx / factor, self.dy / factor,
                        self.nx * factor, self.ny * factor, self.crs)
