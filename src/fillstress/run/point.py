"""Δσz at points of a site given on the command line (`fillstress point`)."""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..site.build import Site, build_site
from ..site.config import read_site_file


@dataclass
class PointStresses:
    """Δσz (kPa) at points given as x, y, depth in site units, for one stage.

    What :func:`point_stresses` (and ``fillstress point``) returns.

    Parameters
    ----------
    site : Site
        The site the points were computed on.
    xyz : numpy.ndarray
        (N, 3) as given: plan in site-CRS units, depth in site units.
    dsz : numpy.ndarray
        Δσz at each point, kPa.
    stage : int
        The construction stage whose fill was loaded.
    warnings : list of str
        One line per point outside the site's grid (a coordinate typo, the wrong CRS).

    Examples
    --------
    >>> from fillstress.examples import example_site
    >>> res = point_stresses(example_site("preload_surcharge"), [452100.0, 218300.0, 2.0])
    >>> res.stage, round(float(res.dsz[0]), 1), res.warnings
    (2, 104.3, [])
    """

    site: Site
    xyz: np.ndarray
    dsz: np.ndarray
    stage: int
    warnings: list = field(default_factory=list)

    def to_geodataframe(self):
        """The points as a GeoDataFrame in the site CRS and the site's units.

        Returns
        -------
        geopandas.GeoDataFrame
            One row per point in the order given: ``stage``, ``depth_<len>`` and
            ``dsz_<pressure>`` in the site's unit system (the columns of the results
            folder's point tables) and point geometry at x, y as given, with the site CRS
            (None for a site without one), so ``.to_crs(4326)`` and ``.explore()`` work.

        Examples
        --------
        >>> from fillstress.examples import example_site
        >>> res = point_stresses(example_site("preload_surcharge"), [452100.0, 218300.0, 2.0])
        >>> gdf = res.to_geodataframe()
        >>> list(gdf.columns), gdf.crs == res.site.crs, round(float(gdf["dsz_kPa"][0]), 1)
        (['stage', 'depth_m', 'dsz_kPa', 'geometry'], True, 104.3)
        """
        import geopandas as gpd
        import pandas as pd

        from ..io.tables import labelled_table
        u = self.site.units
        table = pd.DataFrame({"stage": np.full(len(self.dsz), self.stage),
                              "depth": u.length_si(self.xyz[:, 2]), "dsz": self.dsz})
        return gpd.GeoDataFrame(labelled_table(table, u),
                                geometry=gpd.points_from_xy(self.xyz[:, 0], self.xyz[:, 1]),
                                crs=self.site.crs)


def point_stresses(path, xyz, stage=None) -> PointStresses:
    """Δσz at x, y, depth triples given in site units, under the fill of `stage` (default:
    the last).

    Parameters
    ----------
    path : str or path-like
        The site file.
    xyz : array-like
        x, y, depth triples (one or an (N, 3) array): plan coordinates in the site CRS's
        unit, depth below the existing ground in the site's length unit.
    stage : int, optional
        Construction stage whose fill is loaded; the last by default.

    Returns
    -------
    PointStresses
        Δσz in kPa with the points as given; :meth:`PointStresses.to_geodataframe` gives
        them as a GeoDataFrame in the site CRS and units.

    Examples
    --------
    >>> from fillstress.examples import example_site
    >>> res = point_stresses(example_site("preload_surcharge"), [452100.0, 218300.0, 2.0])
    >>> res.stage, round(float(res.dsz[0]), 1)      # BH-01, 2 m below the pad centre (kPa)
    (2, 104.3)
    """
    # no odds samples and no receptor tables at points: the grid is the run's all the same
    site = build_site(read_site_file(path), draw_samples=False, sample_points=False)
    arr = np.asarray(xyz, float).reshape(-1, 3)
    pts = np.column_stack([arr[:, :2] * site.metres_per_unit, site.units.length_si(arr[:, 2])])
    if np.any(pts[:, 2] < 0):
        raise InputError("depth must be >= 0 below the existing ground", argument="xyz")
    grid = site.load_grid(stage)
    return PointStresses(site, arr, stress(site, grid, pts), stage or site.stages[-1],
                         _far_points(site, grid, arr, pts))


def _far_points(site: Site, grid, given: np.ndarray, pts: np.ndarray) -> list[str]:
    """One line per point outside the site's analysis grid (a coordinate typo, or the
    wrong CRS), with its distance from the loaded area, instead of a bare 0.00."""
    xmin, ymin, xmax, ymax = site.spec.extent
    loaded = np.argwhere(grid.pressure != 0)
    if loaded.size:
        (j0, i0), (j1, i1) = loaded.min(axis=0), loaded.max(axis=0) + 1
        box = (site.spec.x0 + i0 * site.spec.dx, site.spec.y0 + j0 * site.spec.dy,
               site.spec.x0 + i1 * site.spec.dx, site.spec.y0 + j1 * site.spec.dy)
    else:
        box = site.spec.extent
    out = []
    for k, (x, y) in enumerate(pts[:, :2]):
        if xmin <= x <= xmax and ymin <= y <= ymax:
            continue
        gap = np.hypot(max(box[0] - x, 0.0, x - box[2]), max(box[1] - y, 0.0, y - box[3]))
        d = gap / site.metres_per_unit
        out.append(f"point {k + 1} ({given[k, 0]:.2f}, {given[k, 1]:.2f}) lies outside the "
                   f"site's grid, {d:,.0f} {site.units.length} from the loaded area: check "
                   f"its coordinates and the site CRS")
    return out


def stress(site: Site, grid, xyz: np.ndarray, client=None, memory_cap=None) -> np.ndarray:
    """Δσz (kPa) at (N, 3) points for a load grid, with the site's method: direct
    summation, or the far-field method for very large problems (solve.auto; direct where
    only it fits `memory_cap` bytes), on Dask workers when a client is given."""
    if len(xyz) == 0:
        return np.zeros(0)
    return _solver(site, grid, client, memory_cap)(xyz)


class RunStress:
    """``evaluate(grid, xyz)`` of a run's steps: Δσz (kPa) at (N, 3) points, as
    :func:`stress` gives them. The last grid's solver (solve.auto.PointSolver, or with a
    Dask client solve.distributed.DistributedSolver: node weights, far-field pyramid, sent
    to the workers once) is kept, so a step that asks depth after depth on one grid
    (settlement columns, alignment profiles) prepares that grid once; one grid is kept at
    a time, so the memory stays that of one call."""

    def __init__(self, site: Site, client=None, memory_cap=None):
        self.site, self.client, self.memory_cap = site, client, memory_cap
        self._grid = self._solver = None

    def __call__(self, grid, xyz: np.ndarray) -> np.ndarray:
        if len(xyz) == 0:
            return np.zeros(0)
        if grid is not self._grid:
            self._solver = None                   # free the old solver before the new one
            # a run has numba's kernels loaded anyway: no numpy path for small sums
            self._solver = _solver(self.site, grid, self.client, self.memory_cap,
                                   numpy_for_small=False)
            self._grid = grid
        return self._solver(xyz)

    def release(self) -> None:
        """Let the kept grid's solver go (its far-field pyramid may be large)."""
        self._grid = self._solver = None


def _solver(site: Site, grid, client=None, memory_cap=None, numpy_for_small=True):
    """Δσz at points below `grid`, for many calls: on the workers of `client`, or here."""
    options = {"memory_cap": memory_cap, "numpy_for_small": numpy_for_small}
    if client is not None:
        from ..solve.distributed import DistributedSolver
        return DistributedSolver(grid, site.method, site.poisson, client=client, **options)
    from ..solve.auto import PointSolver
    return PointSolver(grid, site.method, site.poisson, **options)
