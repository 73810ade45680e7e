"""What a run of a site will compute and what it will cost, before computing anything.

The figures come from fillstress.solve.cost (sizes of the arrays the solvers allocate and
throughputs measured on a 2-core machine); this module only counts the site's work.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np

from ..settlement import sublayers
from ..solve.auto import algorithm_for, direct_work
from ..solve.cost import (Estimate, check_capacity, estimate_folded, estimate_points,
                          estimate_slices, format_bytes, memory_cap_bytes)
from ..solve.folded import fold_layout
from ..solve.slices import distinct_loads, pad_cells, slice_lattice
from . import corridor
from .limits import limits_in_force
from .settle import _settlement_points, analysed_nodes, state_grids
from .timeline import load_states


def memory_cap(site) -> float:
    """Bytes a run may use: [grid] memory_cap (GB) or a share of the machine's memory."""
    return memory_cap_bytes(site.settings.memory_cap_gb)


class SolverCall(NamedTuple):
    """One Δσz call a run will make: `n` points under `load` (a stage number: the bodies
    of stages ≤ it; or a body's name: that body alone), on the half-size cells of the
    convergence check when `fine`."""

    step: str
    n: int
    load: int | str
    fine: bool = False


def solver_calls(site) -> list[SolverCall]:
    """Every Δσz call of a run (run/compute.py), in its order, with its points: receptor
    points, settlement columns, the alignment's profile and sections, the convergence
    check. Calls with no points are not made."""
    final = site.stages[-1]
    calls = [SolverCall("receptor points", len(site.points), final)]
    if site.soil is not None:
        targets = _settlement_points(site.points)         # as settle.settlement_results
        columns = [(n, len(sublayers(site.soil, top_depth=float(depth))[0]))
                   for depth, n in targets.groupby("depth").size().items()]
        # body by body, every depth (settle.settlement_results); load states combine them
        calls += [SolverCall("settlement columns", n * n_z, b.name)
                  for b in site.bodies for n, n_z in columns]
    calls += [SolverCall(*c) for c in corridor.solver_calls(site)]
    if site.settings.convergence_check:
        calls.append(SolverCall("convergence check", len(site.points), final, fine=True))
    return [c for c in calls if c.n]


class SliceCall(NamedTuple):
    """One FFT slice call of a run: `n_depths` depths on a plan grid, of one load grid
    alone (`stacked` False) or of `loads` distinct load grids sharing each depth's kernel
    in one SliceStack, which makes `transforms` pressure transforms (all of them on its
    first call, none later); with a `folded` layout (solve.folded.FoldLayout), the same
    loads at `samples` nodes on its torus instead."""

    step: str
    plan: object
    n_depths: int
    loads: int = 1
    transforms: int = 1
    stacked: bool = False
    folded: object = None
    samples: int = 0


def slice_calls(site) -> list[SliceCall]:
    """Every FFT slice call: each plan grid's depths under the load of every stage, and
    with a soil profile the plan settlement's sublayer depths under every load state, as
    many at a time as the plan grid has depths (settle.plan_settlement). The loads of a
    step share one SliceStack when it fits the memory cap (:func:`shares_kernel`, as
    run/compute.py decides), else each is sliced on its own."""
    stages = [site.load_grid(k).pressure for k in site.stages]
    calls = []
    for plan in site.plan_grids:
        calls += _step_calls(site, f"plan grid {plan.name}", plan, stages, [len(plan.depths)])
    z = np.empty(0) if site.soil is None else sublayers(site.soil, top_depth=0.0)[0]
    grids = state_grids(site) if len(z) else []
    for plan in site.plan_grids:
        step = max(1, len(plan.depths))
        chunks = [min(step, len(z) - k) for k in range(0, len(z), step)]
        keep = analysed_nodes(site, grids, *plan_nodes(site, plan), z) if grids else None
        layout = folding_layout(site, plan, grids, keep) if grids else None
        name = f"plan grid {plan.name}, settlement"
        calls += _step_calls(site, name, plan, [g.pressure for g in grids], chunks) \
            if layout is None else _folded_calls(name, plan, grids, chunks, layout, keep)
    return calls


def _folded_calls(step: str, plan, grids, chunks: list[int], layout, keep) -> list[SliceCall]:
    n = len(distinct_loads([g.pressure for g in grids])[0])
    return [SliceCall(step, plan, d, n, n if k == 0 else 0, False, layout, int(keep.sum()))
            for k, d in enumerate(chunks)]


def plan_nodes(site, plan) -> tuple[np.ndarray, np.ndarray]:
    """x and y (m) of a plan grid's nodes: the slice lattice's samples it keeps."""
    x, y = slice_lattice(site.spec, _pad_cells(site, plan), (0.0, 0.0))
    rows, cols = plan_window(site, plan)
    return x[cols], y[rows]


def _step_calls(site, step: str, plan, loads: list, chunks: list[int]) -> list[SliceCall]:
    if not loads:
        return []
    if shares_kernel(site, plan, loads):
        n = len(distinct_loads(loads)[0])
        return [SliceCall(step, plan, d, n, n if k == 0 else 0, True)
                for k, d in enumerate(chunks)]
    return [SliceCall(step, plan, d) for d in chunks for _ in loads]


def shares_kernel(site, plan, loads: list) -> bool:
    """Whether the slices of the load arrays `loads` on `plan` go through one SliceStack:
    its estimate (a spectrum kept per distinct load, the output cut to the plan grid)
    fits the memory cap; otherwise each load is sliced alone, tiled when needed."""
    n = len(distinct_loads(loads)[0])
    return _stack_estimate(site, plan, len(plan.depths), n, n).bytes <= memory_cap(site)


def _stack_estimate(site, plan, n_depths: int, loads: int, transforms: int) -> Estimate:
    """A SliceStack's call: its output is cut to the plan grid (:func:`plan_window`)."""
    pad_x, pad_y = _pad_cells(site, plan)
    rows, cols = plan_window(site, plan)
    kept = (len(range(site.spec.ny + 2 * pad_y)[rows])
            * len(range(site.spec.nx + 2 * pad_x)[cols]))
    return estimate_slices(site.spec.shape, max(1, n_depths), pad_cells=(pad_x, pad_y),
                           loads=loads, transforms=transforms, kept=kept)


def plan_step(site, plan) -> int:
    """Cells between the nodes of a plan grid."""
    return max(1, round(plan.spacing / site.spec.dx))


def plan_window(site, plan) -> tuple[slice, slice]:
    """Rows and columns of the slice lattice (cell centres, padded by :func:`plan_pad`)
    that a plan grid keeps: the samples within its extent, every :func:`plan_step`."""
    x, y = slice_lattice(site.spec, _pad_cells(site, plan), (0.0, 0.0))
    step = plan_step(site, plan)
    return _within(y, plan.ymin, plan.ymax, step), _within(x, plan.xmin, plan.xmax, step)


def _within(v: np.ndarray, lo: float, hi: float, step: int) -> slice:
    """The slice of sorted `v` from `lo` to `hi` inclusive (as xarray's .sel), every `step`."""
    return slice(int(np.searchsorted(v, lo, "left")), int(np.searchsorted(v, hi, "right")), step)


def plan_pad(site, plan) -> float:
    """Padding (m) the analysis grid's slices need to cover a plan grid's extent."""
    gx0, gy0, gx1, gy1 = site.spec.extent
    return max(0.0, gx0 - plan.xmin, gy0 - plan.ymin, plan.xmax - gx1, plan.ymax - gy1)


def plan_samples(site, plan, keep: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Lattice indices (rows, cols) of a plan grid's nodes `keep` (bool (y, x)): the cell
    each node is the centre of, negative or beyond the grid in its padding."""
    pad_x, pad_y = _pad_cells(site, plan)
    rows, cols = plan_window(site, plan)
    y = np.arange(site.spec.ny + 2 * pad_y)[rows] - pad_y
    x = np.arange(site.spec.nx + 2 * pad_x)[cols] - pad_x
    j, i = np.nonzero(keep)
    return y[j], x[i]


#: plan settlement folds its kept nodes onto a torus when the estimate of that is at most
#: this fraction of the zero-padded SliceStack's: the folded path transforms all of its
#: torus back and gathers the nodes, where the stack inverts along x only the rows kept
FOLD_GAIN = 0.7


def folding_layout(site, plan, grids, keep: np.ndarray):
    """The folded torus (solve.folded.FoldLayout) on which plan settlement computes its
    nodes `keep` (bool (y, x)) under the load `grids`, or None where the zero-padded
    transform is about as cheap or the torus would not fit the memory cap."""
    if not keep.any():
        return None
    loaded = np.any([g.pressure != 0 for g in grids], axis=0)
    layout = fold_layout(*plan_samples(site, plan, keep), loaded)
    n = len(distinct_loads([g.pressure for g in grids])[0])
    folded = _folded_estimate(layout, len(plan.depths), n, n, int(keep.sum()))
    stack = _stack_estimate(site, plan, len(plan.depths), n, n)
    fits = folded.bytes <= memory_cap(site)
    return layout if fits and folded.seconds <= FOLD_GAIN * stack.seconds else None


def _folded_estimate(layout, n_depths: int, loads: int, transforms: int, samples: int):
    return estimate_folded(layout.torus, layout.reach, max(1, n_depths), loads=loads,
                           transforms=transforms, samples=samples)


def _pad_cells(site, plan) -> tuple[int, int]:
    return pad_cells(plan_pad(site, plan), site.spec.dx, site.spec.dy)


def run_estimates(site, slices: bool = True) -> list[Estimate]:
    """One estimate per step of a run (:func:`solver_calls`, :func:`slice_calls` unless
    not `slices`, and the rebuild of the bodies on half cells): memory of its largest
    call, time of all."""
    shape, cap = site.spec.shape, memory_cap(site)
    active = {k: direct_work(site.load_grid(k), 1) for k in site.stages}   # weighted nodes
    active |= {b.name: direct_work(site.spec.load_grid(b.pressure), 1) for b in site.bodies}
    steps: dict[str, list[Estimate]] = {}
    prepared = set()               # a step's later calls on one load reuse its preparation
    for call in solver_calls(site):
        # half-size cells: about twice the weighted nodes along the fill's edges, four
        # times where the fill varies everywhere; take the upper bound
        g_shape, nodes = ((2 * shape[0], 2 * shape[1]), 4 * active[call.load]) if call.fine \
            else (shape, active[call.load])
        algorithm = algorithm_for(call.n * nodes, g_shape, call.n, cap)
        key = (call.step, call.load, algorithm)
        steps.setdefault(call.step, []).append(estimate_points(
            g_shape, call.n, algorithm=algorithm, active_nodes=nodes, prepared=key in prepared))
        prepared.add(key)
    for c in slice_calls(site) if slices else []:
        steps.setdefault(c.step, []).append(_slice_estimate(site, c))
    out = [_combined(step, parts) for step, parts in steps.items()]
    if len(site.points) and site.build_seconds and site.settings.convergence_check:
        # the check rebuilds every body on 4× the cells: scale the measured first build
        out.append(Estimate("bodies on half cells", 4 * site.load_grid().pressure.nbytes,
                            4 * site.build_seconds,
                            f"4 × the {site.build_seconds:.2g} s the bodies took"))
    return out


def _slice_estimate(site, c: SliceCall) -> Estimate:
    if c.folded is not None:
        return _folded_estimate(c.folded, c.n_depths, c.loads, c.transforms, c.samples)
    if c.stacked:
        return _stack_estimate(site, c.plan, c.n_depths, c.loads, c.transforms)
    return estimate_slices(site.spec.shape, c.n_depths, pad_cells=_pad_cells(site, c.plan))


def _combined(step: str, parts: list[Estimate]) -> Estimate:
    """One step of several calls: the memory of the largest, the time of all."""
    detail = parts[0].detail if len(parts) == 1 else \
        f"{len(parts)} calls, the largest {max(parts, key=lambda e: e.bytes).detail}"
    return Estimate(step, max(e.bytes for e in parts), sum(e.seconds for e in parts), detail)


def check_fits(site) -> list[Estimate]:
    """Raise CapacityError, with the numbers, when point work cannot fit the memory cap.
    Plan slices that do not fit are tiled instead (see run/compute.py), so they are not
    estimated here: their settlement step's analysed nodes and folded torus would be
    worked out twice in a run."""
    cap = memory_cap(site)
    estimates = run_estimates(site, slices=False)
    for e in estimates:
        check_capacity(e, cap, hint="use a coarser [grid] cell or fewer receptor points")
    return estimates


def slices_need_tiles(site, plan) -> bool:
    e = estimate_slices(site.spec.shape, len(plan.depths), pad_cells=_pad_cells(site, plan))
    return e.bytes > memory_cap(site)


def describe_run(site) -> list[list]:
    """Rows (item, value) for `fillstress check`."""
    u = site.units
    kinds = site.points["receptor_kind"].value_counts().to_dict() if len(site.points) else {}
    loaded = int((site.load_grid().pressure != 0).sum())
    estimates = run_estimates(site)
    cap = memory_cap(site)
    rows = [
        ["site", site.name],
        ["CRS", site.crs.to_string() if site.crs is not None else "none stated"],
        ["units", f"{u.name} ({u.length}, {u.pressure}, {u.unit_weight})"],
        ["method", site.method + (f", ν = {site.poisson:g}" if site.poisson is not None else "")],
        ["analysis grid", f"{site.spec.nx} × {site.spec.ny} cells of "
                          f"{u.length_out(site.spec.dx):.4g} {u.length} ({loaded:,} loaded)"],
        ["cell size rule", site.cell_rule],
        ["construction stages", ", ".join(map(str, site.stages))],
        ["receptor points", ", ".join(f"{n} {k}" for k, n in kinds.items()) or "none"],
        ["soil profile", "none" if site.soil is None else
         ", ".join(L.name for L in site.soil.layers)],
    ]
    if site.soil is not None:
        rows.append(["load history", "; ".join(_state_text(s) for s in load_states(site))])
    rows += [[f"drains: {z.id}", f"{z.drains.pattern}, {u.length_out(z.drains.spacing_m):g} "
              f"{u.length} spacing, to {u.length_out(z.drains.depth_m):g} {u.length}"]
             for z in site.drains]
    rows += limits_in_force(site.settings, u)
    if site.settings.uncertainty is not None:
        rows += site.settings.uncertainty.describe(u)
    rows += [[f"estimate: {e.operation}", f"{format_bytes(e.bytes)}, about {e.seconds:.2g} s "
              f"({e.detail})" + (" — will be tiled" if e.bytes > cap and
                                 e.operation.startswith("plan grid") else "")]
             for e in estimates]
    rows.append(["estimated total", f"about {sum(e.seconds for e in estimates):.2g} s of "
                 "computing on a 2-core machine (writing the folder and report come on "
                 f"top); memory cap {format_bytes(cap)}"])
    return rows


def _state_text(state) -> str:
    """'stage 2 from day 60 over 25 days', 'removal of surcharge on day 330'."""
    if state.stage is None:
        return f"{state.event} on day {state.day:g}"
    ramp = f" over {state.duration_days:g} days" if state.duration_days else ""
    return f"{state.event} from day {state.day:g}{ramp}"


#: Above this a fill height is taken for a unit or typing error (common practice: the
#: highest earth and rockfill dams are about 300 m).
PLAUSIBLE_FILL_M = 300.0
#: A grid this many times the cells the fill loads, and this large, is worth a warning.
FAR_GRID_RATIO, FAR_GRID_CELLS = 100, 2_000_000


def site_warnings(site) -> list[str]:
    """What a run of `site` should tell the engineer before it starts (check and run)."""
    u, out = site.units, []
    for body in site.bodies:
        if body.max_height_m is not None and body.max_height_m > PLAUSIBLE_FILL_M:
            out.append(f"[bodies.{body.name}] fill {u.length_out(body.max_height_m):g} "
                       f"{u.length} high, higher than any earth fill built (about "
                       f"{u.length_out(PLAUSIBLE_FILL_M):g} {u.length}); a unit or typing "
                       "error?")
    cells = site.spec.nx * site.spec.ny
    loaded = max(1, int((site.load_grid().pressure != 0).sum()))
    if cells > FAR_GRID_CELLS and cells > FAR_GRID_RATIO * loaded:
        out.append(f"the analysis grid has {site.spec.nx:,} × {site.spec.ny:,} cells, "
                   f"{cells / loaded:,.0f} times the {loaded:,} the fill loads; a body or "
                   "receptor far from the others (a coordinate typing error, another CRS?) "
                   "makes it large")
    out += _ground_gaps(site)
    days = site.settings.stage_days
    if site.soil is not None and days and len(days) != len(site.stages):
        out.append(f"[settlement.stage_days] gives {len(days)} start time(s) for "
                   f"{len(site.stages)} stage(s); missing stages start with the last given, "
                   "extra times are ignored")
    ramps = site.settings.stage_durations
    if site.soil is not None and len(ramps) > len(site.stages):
        out.append(f"[settlement.stage_durations] gives {len(ramps)} durations for "
                   f"{len(site.stages)} stage(s); the extra ones are ignored")
    return out


def validate_run(site) -> list[str]:
    """The one validation `check` and `run` share: refuse what cannot fit the memory cap
    (CapacityError, with the numbers), and return the warnings of :func:`site_warnings`."""
    check_fits(site)
    if site.soil is not None:
        load_states(site)                  # refuses a body removed before it is complete
    return site_warnings(site)


def _ground_gaps(site) -> list[str]:
    """Surfaces bodies whose existing ground has no data under part of the design: no fill
    is counted there, which the engineer must know (a nodata hole, a raster too small)."""
    out, u = [], site.units
    for name, report in (site.cut_reports or {}).items():
        if not report.area_design_only:
            continue
        source = site.existing_surfaces.get(name)
        where = (f" (first at x = {report.missing_at[0] / site.metres_per_unit:.1f}, "
                 f"y = {report.missing_at[1] / site.metres_per_unit:.1f})"
                 if report.missing_at else "")
        area = report.area_design_only / u.length_to_m ** 2
        out.append(f"[bodies.{name}] the existing ground {source or ''} has no data under "
                   f"{area:,.0f} {u.length}² of the design surface{where}; no fill is "
                   "counted there".replace("  ", " "))
    return out
