"""A run: from a site model to stresses, settlements, checks and a complete results folder.

`compute` does the numbers (no files); `write_results` writes them; `run_site_file` joins
both inside a results-folder transaction. `check_site_file` shows what a run would do.
"""
from __future__ import annotations

import logging
import time
import warnings
from contextlib import contextmanager
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import pandas as pd
import xarray as xr

from .._summary import Summarised
from .._version import __version__
from ..errors import FillstressWarning, InputError
from ..io.atomic import ResultsWriter
from ..progress import describe, open_bar, silent
from ..site.build import Site, load_site
from ..solve import stress_slices
from ..solve.folded import FoldedSlices
from ..solve.slices import SliceStack, distinct_loads, slice_array, slice_setup
from ..solve.distributed import connect, distributed_slices
from ..solve.tiled import tiled_slices
from . import settle
from .corridor import corridor_results
from .decisions import max_heights
from .headroom import headroom_results, headroom_warnings
from .limits import LimitResults, limit_results
from .odds import odds_results
from .point import RunStress, stress
from .plan import (describe_run, folding_layout, memory_cap, plan_nodes, plan_pad, plan_samples,
                   plan_step, plan_window, shares_kernel, slices_need_tiles, validate_run)
from .wording import ASSUMPTIONS, CAUTIONS  # noqa: F401  (re-exported for the writers)

log = logging.getLogger(__name__)


# --- the numbers ----------------------------------------------------------------------
@dataclass(repr=False)
class RunResults(Summarised):
    """Everything a run computed, in internal SI (m, kPa), before any file is written.

    What :func:`compute` returns; ``fillstress run`` writes it as the results folder.
    :meth:`plan_grids` and :meth:`plan_grid` give the plan grids in the site's units.

    Parameters
    ----------
    site : Site
        The site as built from its file.
    grid : LoadGrid
        The load grid of the final stage.
    points : pandas.DataFrame
        Every receptor point with its results (SI).
    slices : dict
        Plan-grid name → Δσz DataArray (depth, y, x), kPa, final stage.
    plan_settlement : dict
        Plan-grid name → final surface settlement DataArray (y, x), m.
    stage_slices : dict
        As `slices` with a leading stage axis.
    buildings : list
        ``structures.BuildingSettlement`` of each building.
    pipes : list
        ``structures.PipeSettlement`` of each pipe.
    profiles : list
        One dict per settlement profile: receptor id and its influence depth.
    time_curves : dict
        Receptor id → (days, settlement m).
    record : dict
        The settlement calculation tables (SI).
    convergence : dict
        The half-cell convergence check.
    timings : dict
        Seconds per step (``fillstress run --timings``).
    warnings : list
        Warnings shown by the command and written to the summary.
    corridor : dict
        Alignment tables of an embankment along an alignment.
    limits : LimitResults or None
        Utilisation of each limit in force.
    settlement_columns : object
        The settlement columns of the receptor points.
    max_heights : list
        The maximum height of each body (``[limits]``).
    odds : object
        Odds of exceeding each limit (``[uncertainty]``), or None.
    headroom : object
        The headroom map (``[headroom]``), or None.

    Examples
    --------
    >>> from fillstress.examples import example_site
    >>> res = compute(load_site(example_site("preload_surcharge")))
    >>> sorted(res.slices), res.plan_settlement["pad"].attrs["units"]
    (['pad'], 'm')
    """

    site: Site
    grid: object                          # LoadGrid of the final stage
    points: pd.DataFrame                  # every receptor point with its results (SI)
    slices: dict = field(default_factory=dict)       # plan-grid name → DataArray (kPa)
    plan_settlement: dict = field(default_factory=dict)  # plan-grid name → (y, x) DataArray (m)
    stage_slices: dict = field(default_factory=dict)  # the same with a leading stage axis
    buildings: list = field(default_factory=list)    # structures.BuildingSettlement
    pipes: list = field(default_factory=list)        # structures.PipeSettlement
    profiles: list = field(default_factory=list)     # dicts: receptor_id, influence depth
    time_curves: dict = field(default_factory=dict)  # receptor_id → (days, settlement m)
    record: dict = field(default_factory=dict)       # settlement calculation tables (SI)
    convergence: dict = field(default_factory=dict)
    timings: dict = field(default_factory=dict)
    warnings: list = field(default_factory=list)     # shown by the command and the summary
    corridor: dict = field(default_factory=dict)     # alignment tables (run.corridor)
    limits: LimitResults | None = None               # utilisation of each limit (run.limits)
    settlement_columns: object = None                # settle.SettlementColumns
    max_heights: list = field(default_factory=list)  # decisions.MaxHeight per body
    odds: object = None                              # odds.OddsResults ([uncertainty])
    headroom: object = None                          # headroom.HeadroomResults ([headroom])

    def _summary(self):
        u, pts = self.site.units, self.points
        rows = [("stages", ", ".join(map(str, self.site.stages))),
                ("sample points", f"{len(pts):,}")]
        if len(pts):
            rows.append(("max Δσz", f"{u.pressure_out(pts['dsz'].max()):.4g} {u.pressure}"))
        if "settlement" in pts and pts["settlement"].notna().any():
            rows.append(("max settlement",
                         f"{u.settlement_out(pts['settlement'].max()):.4g} {u.settlement}"))
        for name, da in self.slices.items():
            rows.append((f"plan grid {name}", f"{da.sizes['depth']} depths on "
                                              f"{da.sizes['x']} × {da.sizes['y']} nodes"))
        rows += [("buildings, pipes checked", f"{len(self.buildings)}, {len(self.pipes)}"),
                 ("warnings", str(len(self.warnings)))]
        return f"RunResults of {self.site.name}", rows

    def plan_grids(self) -> xr.Dataset:
        """Every plan grid in the site's units and CRS, as ``stress_cube.nc`` holds them.

        ``slices`` and ``plan_settlement`` stay in internal SI (metres on the metre twin
        of the site CRS); this is what a user of xarray and GIS wants: x and y in the site
        CRS's unit, depths in the site's length unit, Δσz, σ'v0 and settlement in its
        units, CF-1.8 attributes, the site CRS on the ``spatial_ref`` grid mapping
        (rioxarray's ``.rio.crs``) and longitude/latitude auxiliary coordinates
        (docs/results-folder.md, ``stress_cube.nc``).

        Returns
        -------
        xarray.Dataset
            Variables ``dsz_<grid>`` (stage, depth, y, x), ``fill_thickness`` and, where
            computed, ``sigma_v0_<grid>`` and ``settlement_<grid>``; y north-down.

        Raises
        ------
        InputError
            When the site has no ``[[plan_grids]]``.
        """
        from ..io.netcdf import stress_dataset
        from .files import cube_arguments
        if not self.slices:
            raise InputError("the site has no [[plan_grids]], so the run has no plan grid",
                             argument="plan_grids")
        return stress_dataset(**cube_arguments(self, __version__))

    def plan_grid(self, name: str | None = None, quantity: str = "dsz") -> xr.DataArray:
        """One plan grid of the last stage in site units, with plain ``x``/``y``/``depth``.

        Parameters
        ----------
        name : str, optional
            The plan grid's name in the site file; may be left out when there is one.
        quantity : {"dsz", "settlement", "sigma_v0"}
            Δσz (depth, y, x), the final surface settlement (y, x) or σ'v0 (depth).

        Returns
        -------
        xarray.DataArray
            A variable of :meth:`plan_grids` with its dimensions renamed, the ``stage``
            of the last stage kept as a scalar coordinate, CF attributes, and the site
            CRS (``da.rio.crs``, ``da.rio.to_raster`` with rioxarray).

        Examples
        --------
        >>> from fillstress.examples import example_site
        >>> res = compute(load_site(example_site("preload_surcharge")))
        >>> da = res.plan_grid()
        >>> da.dims, da.attrs["units"], da["x"].attrs["standard_name"]
        (('depth', 'y', 'x'), 'kPa', 'projection_x_coordinate')
        """
        names = list(self.slices)
        if name is None and len(names) == 1:
            name = names[0]
        if name not in self.slices:
            raise InputError(f"no plan grid {name!r}; the run has {', '.join(names) or 'none'}",
                             argument="name")
        ds = self.plan_grids()
        if f"{quantity}_{name}" not in ds:
            have = [v[: -len(name) - 1] for v in ds.data_vars if v.endswith(f"_{name}")]
            raise InputError(f"no {quantity!r} on plan grid {name!r}; the run has "
                             f"{', '.join(have)}", argument="quantity")
        da = ds[f"{quantity}_{name}"]
        if "stage" in da.dims:
            da = da.isel(stage=-1)
        da = da.rename({f"{d}_{name}": d for d in ("depth", "y", "x", "lon", "lat")
                        if f"{d}_{name}" in da.coords})
        # the cube names one x, y pair only (CF checkers ask for one); here it is this one
        named = {axis: da[axis].assign_attrs(standard_name=f"projection_{axis}_coordinate")
                 for axis in ("x", "y") if axis in da.dims}
        return da.assign_coords(named)


def compute(site: Site, progress=silent, client=None) -> RunResults:
    """Every number of a run, in SI; nothing is written.

    Parameters
    ----------
    site : Site
        From :func:`fillstress.site.build.load_site`.
    progress : progress factory, optional
        See :mod:`fillstress.progress`; silent by default.
    client : distributed.Client, optional
        Spread the point and slice work over Dask workers (results equal the serial path).

    Returns
    -------
    RunResults
        ``points`` (every receptor point with ``dsz`` in kPa and, with a soil profile,
        ``sigma_v0``, ``stress_ratio``, ``settlement`` in m), ``slices`` (plan grids,
        SI), ``buildings``/``pipes`` checks, ``time_curves`` and ``convergence``.
        ``RunResults.plan_grid(name)`` gives a plan grid in the site's units and CRS as an
        xarray DataArray with CF attributes (``.rio.crs`` with rioxarray), and
        ``RunResults.plan_grids()`` all of them as ``stress_cube.nc`` holds them.

    Examples
    --------
    >>> from fillstress.examples import example_site
    >>> res = compute(load_site(example_site("preload_surcharge")))
    >>> centre = res.points[res.points["point_id"] == "BH-01-d4"]
    >>> round(float(centre["dsz"].iloc[0]), 1)     # kPa at 2 m below the pad centre
    104.3
    """
    t0 = time.perf_counter()
    grid = site.load_grid()
    pts = site.points.copy()
    steps = 2 + len(site.plan_grids) + (2 if site.soil is not None else 0) + _conv_steps(site)
    steps += bool(site.soil is not None and site.plan_grids)
    steps += site.alignment is not None
    steps += site.settings.max_heights
    steps += site.settings.uncertainty is not None
    steps += site.settings.headroom is not None
    timings = {}
    cap = memory_cap(site)
    points_at = RunStress(site, client, cap)
    with open_bar(progress, "computing", steps) as bar:
        step = _Steps(timings, bar, points_at.release)
        with step("receptor_points"):
            pts["dsz"] = points_at(grid, pts[["x", "y", "depth"]].to_numpy(float))
        res = RunResults(site, grid, pts, warnings=list(site.warnings), timings=timings)
        earlier = [site.load_grid(k) for k in site.stages[:-1]]
        for plan in site.plan_grids:
            with step("plan_slices"):
                stages = _stage_stack(_plan_slicer(site, plan, [*earlier, grid], client)(
                    plan.depths), site.stages)
                res.stage_slices[plan.name] = stages
                res.slices[plan.name] = stages.isel(stage=-1, drop=True)   # a view, no copy
        if site.soil is not None:
            with step("stress_ratios"):
                settle.soil_results(res)
            with step("settlement"):
                settle.settlement_results(res, points_at)
            if site.plan_grids:
                with step("plan_settlement"):
                    res.plan_settlement = plan_settlement(site, client)
                    res.warnings += _plan_cutoff_notes(res.plan_settlement, site.units)
        res.limits = limit_results(res)
        if site.settings.max_heights:
            with step("max_heights"):
                res.max_heights = max_heights(res, points_at)
        if site.settings.headroom is not None:
            with step("headroom"):
                res.headroom = headroom_results(res)
            res.warnings += headroom_warnings(res.headroom)
        if site.settings.uncertainty is not None:
            with step("odds"):
                res.odds = odds_results(res, client)
        if site.alignment is not None:
            with step("alignment"):
                res.corridor = corridor_results(site, points_at)
        if _conv_steps(site):
            with step("convergence_check"):
                res.convergence = convergence_check(site, pts, client)
        bar.advance()
    res.timings["compute_s"] = time.perf_counter() - t0
    return res


class _Steps:
    """``with step(name):`` times a step of the run into `timings` (seconds, summed under
    ``<name>_s``, in the order the steps first run), advances the progress bar and calls
    `done` (the point solver lets its prepared grid go: the next step asks other grids)."""

    def __init__(self, timings: dict, bar, done=lambda: None):
        self.timings, self.bar, self.done = timings, bar, done

    @contextmanager
    def __call__(self, name: str):
        describe(self.bar, name.replace("_", " "))
        t0 = time.perf_counter()
        yield
        self.done()
        key = f"{name}_s"
        seconds = time.perf_counter() - t0
        self.timings[key] = self.timings.get(key, 0.0) + seconds
        log.info("%s: %.2f s", name.replace("_", " "), seconds)
        self.bar.advance()


def _conv_steps(site: Site) -> int:
    return int(site.settings.convergence_check and len(site.points) > 0)


def _plan_cutoff_notes(plans: dict, units) -> list[str]:
    """One note per plan grid with nodes left out as below the stated cut-off, in the
    site's units."""
    return [f"plan grid {name!r}: {da.attrs['not_analysed_nodes']} of {da.size} nodes left as "
            f"nodata (Δσz < {units.pressure_out(da.attrs['not_analysed_below_kpa']):.3g} "
            f"{units.pressure} at every sublayer, settlement there ≤ "
            f"{units.settlement_out(da.attrs['not_analysed_settlement_bound_m']):.2g} "
            f"{units.settlement})"
            for name, da in plans.items() if da.attrs.get('not_analysed_nodes')]


def _stage_stack(stack: list, stages: list):
    """Slices of each stage along a leading ``stage`` axis (a view for one stage)."""
    if len(stack) == 1:
        return stack[0].expand_dims(stage=stages)
    return xr.concat(stack, dim="stage").assign_coords(stage=stages)


def _plan_slicer(site: Site, plan, grids, client=None):
    """Δσz slices of every load grid of `grids` on a plan grid, as a function of the
    depths (a list of DataArrays, one per grid). Without Dask and when it fits the memory
    cap (plan.shares_kernel), one SliceStack serves them all: each pressure transformed
    once, per depth one kernel and one kernel transform for every grid, the output cut to
    the plan grid depth by depth. Otherwise each grid is sliced alone (_plan_slices:
    tiled under the cap, or on the Dask workers)."""
    if client is None and shares_kernel(site, plan, [g.pressure for g in grids]):
        stack = SliceStack(grids, site.method, site.poisson, pad=plan_pad(site, plan))
        window = plan_window(site, plan)
        return lambda depths: stack.slices(depths, window)
    return lambda depths: [_plan_slices(site, g, replace(plan, depths=tuple(depths)), client)
                           for g in grids]


def plan_settlement(site: Site, client=None) -> dict:
    """The run's settlement plan of every plan grid (settle.plan_settlement): Δσz at the
    nodes it analyses only, on a folded torus where that is cheaper (:func:`_kept_slicer`)."""
    return settle.plan_settlement(site, lambda plan: _plan_nodes(site, plan),
                                  lambda plan, grids, keep: _kept_slicer(site, plan, grids,
                                                                         keep, client))


def _plan_nodes(site: Site, plan) -> xr.DataArray:
    """A plan grid's nodes as a (y, x) DataArray of zeros with the slices' coordinates."""
    _, frame = slice_setup(site.spec.load_grid(site.spec.zeros()), [0.0], site.method,
                           site.poisson, pad=plan_pad(site, plan))
    x, y = plan_nodes(site, plan)
    frame = {**frame, "y": y, "x": x}
    return slice_array(np.zeros((1, frame["y"].size, frame["x"].size)), frame).isel(
        depth=0, drop=True)


def _kept_slicer(site: Site, plan, grids, keep: np.ndarray, client=None):
    """Δσz of every load grid of `grids` at a plan grid's nodes `keep` (bool (y, x)), as a
    function of the depths: one (depth, node) array per grid. Where the offsets between
    those nodes and the loaded cells fold onto a torus much smaller than the zero-padded
    transform and it fits the memory cap (plan.folding_layout), only the kept nodes are
    computed, here, with Dask too (FoldedSlices, each distinct load once); otherwise the
    full slices (tiled, or on the Dask workers) are cut to them."""
    layout = folding_layout(site, plan, grids, keep)
    if layout is None:
        full = _plan_slicer(site, plan, grids, client)
        return lambda depths: cut_to_nodes(full(depths), keep)
    distinct, index = distinct_loads([g.pressure for g in grids])
    rows, cols = plan_samples(site, plan, keep)
    folded = FoldedSlices(distinct, site.spec.dx, site.spec.dy, rows, cols, site.method,
                          site.poisson, layout=layout)

    def values_at(depths):
        values = folded.slices(depths)                                      # (E, K, N)
        return [values[e] for e in index]
    return values_at


def cut_to_nodes(slices: list, keep: np.ndarray) -> list[np.ndarray]:
    """(depth, y, x) slices cut to the nodes `keep` (bool (y, x)): (depth, node) arrays."""
    return [np.asarray(da.values)[:, keep] for da in slices]


def _plan_slices(site: Site, grid, plan, client=None):
    """FFT slices on the cell centres of the analysis grid, cut to the plan extent."""
    pad = plan_pad(site, plan)
    cap = memory_cap(site) if slices_need_tiles(site, plan) else None
    if client is not None:
        da = distributed_slices(grid, plan.depths, site.method, site.poisson, client=client,
                                pad=pad, memory_cap=cap)
    elif cap is not None:
        da = tiled_slices(grid, plan.depths, site.method, site.poisson, pad=pad,
                          memory_cap=cap)
    else:
        da = stress_slices(grid, plan.depths, method=site.method, poisson=site.poisson,
                           pad=pad)
    step = plan_step(site, plan)
    return da.sel(x=slice(plan.xmin, plan.xmax), y=slice(plan.ymin, plan.ymax)).isel(
        x=slice(None, None, step), y=slice(None, None, step))


def convergence_check(site: Site, pts: pd.DataFrame, client=None) -> dict:
    """Recompute the receptor stresses on a grid of half the cell size; report the largest
    relative change where Δσz is at least 1 % of the largest applied pressure."""
    fine_spec = site.spec.refined(2)
    fine = site.load_grid(spec=fine_spec)
    xyz = pts[["x", "y", "depth"]].to_numpy(float)
    coarse_vals = pts["dsz"].to_numpy()
    fine_vals = stress(site, fine, xyz, client, memory_cap(site))
    qmax = float(np.abs(fine.pressure).max()) or 1.0
    mask = np.abs(fine_vals) >= settle.NEGLIGIBLE_FRACTION * qmax
    rel = np.abs(coarse_vals - fine_vals)[mask] / np.abs(fine_vals[mask]) if mask.any() else [0.0]
    k = int(np.argmax(rel))
    where = pts[mask].iloc[k]["point_id"] if mask.any() else ""
    return {"cell": site.spec.dx, "fine_cell": fine_spec.dx, "points_compared": int(mask.sum()),
            "max_relative_change": float(np.max(rel)), "at_point": str(where),
            "threshold_fraction_of_qmax": settle.NEGLIGIBLE_FRACTION}


# --- the files ------------------------------------------------------------------------
def run_site_file(path, out=None, *, overwrite=False, report=True, progress=silent,
                  workers=None, scheduler=None) -> "RunSummary":
    """Load a site file, compute, and write a complete results folder.

    Parameters
    ----------
    path : path-like
        The site file (TOML).
    out : path-like, optional
        Results folder; default ``results-<site file stem>`` in the current folder. An
        existing folder is refused unless `overwrite`, and then replaced only once the new
        one is complete.
    overwrite : bool
        Replace an existing results folder (only a results folder, never an input).
    report : bool
        Also write ``report.html`` and ``scene.html``.
    progress : progress factory, optional
        See :mod:`fillstress.progress`; silent by default.
    workers : int, optional
        Run on a local Dask cluster of this many worker processes.
    scheduler : str, optional
        Run on the Dask scheduler at this address.

    Returns
    -------
    RunSummary
        ``results`` (the :class:`RunResults`, SI) and ``folder``, the results folder
        written.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from fillstress.examples import example_site
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "res"
    >>> summary = run_site_file(example_site("preload_surcharge"), out, report=False)
    >>> (out / "manifest.json").is_file(), (out / "boreholes_points.csv").is_file()
    (True, True)
    """
    t0 = time.perf_counter()
    site = load_site(path)
    out = Path(out) if out else Path(f"results-{Path(path).stem}")
    # refuses now an existing folder, one that is not a results folder or holds an input
    folder = ResultsWriter(out, overwrite=overwrite, protect=list(site.input_files))
    notes = validate_run(site)                            # refuses, with numbers, before work
    loaded_s = time.perf_counter() - t0
    cluster = cluster_choice(workers, scheduler, notes)
    if cluster:
        # local workers share the run's memory cap, so the cluster holds what check said
        share = int(memory_cap(site) // cluster) if isinstance(cluster, int) else None
        with connect(cluster, worker_memory=share) as client:
            res = compute(site, progress, client)
    else:
        res = compute(site, progress)
    res.warnings[:0] = notes
    res.timings = {"site_build_s": loaded_s, "bodies_s": site.build_seconds, **res.timings}
    with folder:
        t0 = time.perf_counter()
        write_results(res, folder, report=report, progress=progress)
        res.timings["write_s"] = time.perf_counter() - t0
    return RunSummary(res, out)


def write_results(res: RunResults, folder, *, report=True, progress=silent) -> None:
    from . import files   # the writers, report and scene: not loaded by check and point
    files.write_all(res, folder, report=report, progress=progress,
                    assumptions=ASSUMPTIONS, cautions=CAUTIONS, version=__version__)


# --- what the command prints (console.py formats it) ---------------------------------
@dataclass
class RunSummary:
    """A finished run and the folder it was written to."""

    results: RunResults
    folder: Path


@dataclass
class CheckReport:
    """A validated site and what a run of it would compute: rows (item, value)."""

    site: Site
    plan: list


def check_site_file(path) -> CheckReport:
    """Validate a site file and describe the run without computing it.

    Parameters
    ----------
    path : str or path-like
        The site file (TOML).

    Returns
    -------
    CheckReport
        ``site`` and ``plan``, the rows (item, value) describing the run: bodies, loads,
        grid, receptors, estimated time and memory.

    Examples
    --------
    >>> from fillstress.examples import example_site
    >>> report = check_site_file(example_site("stockpile_yard"))
    >>> [b.name for b in report.site.bodies]
    ['ore_east', 'coal_west', 'aggregate_north']
    >>> report.plan[0]
    ['site', 'Kestrel Quay ore yard']
    """
    site = load_site(path)
    for note in validate_run(site):
        warnings.warn(note, FillstressWarning, stacklevel=2)
    return CheckReport(site, describe_run(site))


def cluster_choice(workers, scheduler, notes: list):
    """What to hand solve.distributed.connect: a scheduler address, a number of local
    workers, or None for a run without Dask (``--workers 0``, with a note saying so)."""
    if workers is not None and scheduler:
        raise InputError("give --workers or --scheduler, not both", argument="--workers")
    if workers is not None:
        if isinstance(workers, bool) or not isinstance(workers, int) or workers < 0:
            raise InputError(f"must be a whole number of workers >= 1, got {workers!r}",
                             argument="--workers")
        if workers == 0:
            notes.append("--workers 0 starts no Dask cluster; the run is computed in this "
                         "process (give 1 or more workers to use Dask)")
            return None
        return workers
    return scheduler or None
