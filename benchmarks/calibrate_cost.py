"""Measure the throughputs behind the run-time estimate (src/fillstress/solve/cost.py).

    PYTHONPATH=src python benchmarks/calibrate_cost.py            # about 30 s
    PYTHONPATH=src python benchmarks/calibrate_cost.py --repeat 5

Prints each constant of solve/cost.py beside the value measured here, best of
`--repeat` runs (the machine is shared; the best run is the least disturbed):

- CORNERS_PER_SECOND: corner evaluations (points × non-zero node weights) a second of
  direct summation, on the invented site of bench_scale.py (piles, an embankment, a cut).
- DIRECT_SETUP_SECONDS_PER_NODE: what one call of stress_at_points spends before the
  kernel (the node weights to choose the algorithm, then the weights and rows again),
  per grid node: a call with a single point beside an embankment across 10^6 cells (few
  weighted nodes), less that point's corner evaluations.
- FAR_SECONDS_PER_POINT: the far-field walk at the default accuracy, per point 0-10 m
  below that embankment (the estimate scales it with log2(cells) / 20, 1.0 at 10^6
  cells). The walk depends on where the points are: points scattered over the whole grid
  walk several times faster, deeper ones slower; the constant is a round figure between.
- PYRAMID_SECONDS_PER_CELL: building the far-field pyramid, per cell.
- FFT_FLOPS_PER_SECOND: exact FFT slices, counted as 5 n log2 n flops a transform, after
  the corner evaluations of each depth's unit-cell kernel (at CORNERS_PER_SECOND).

With ``--corridor MILES`` it then writes the corridor site of tools/make_corridor_site.py
that long, and sets the estimate of `fillstress check` beside the measured time of each
step of a run of it (the solver calls timed one by one, in the order the estimate lists
them; the run itself unchanged).
"""
from __future__ import annotations

import argparse
import math
import os
import sys
import time
from pathlib import Path

import numpy as np
import scipy.fft

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_scale import invented_site, points_on  # noqa: E402

import importlib.util  # noqa: E402
import tempfile  # noqa: E402
from collections import defaultdict  # noqa: E402

from fillstress import LoadGrid  # noqa: E402
from fillstress.run import compute as run_compute  # noqa: E402
from fillstress.run.plan import run_estimates, slice_calls, solver_calls  # noqa: E402
from fillstress.site.build import load_site  # noqa: E402
from fillstress.solve import cost, stress_slices  # noqa: E402
from fillstress.solve.auto import direct_work, stress_at_points  # noqa: E402
from fillstress.solve.farfield import build_pyramid, evaluate_pyramid  # noqa: E402


def best(repeat: int, fn, *args, **kwargs) -> float:
    """Shortest wall time (s) of `repeat` calls."""
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn(*args, **kwargs)
        times.append(time.perf_counter() - t)
    return min(times)


def embankment_band() -> LoadGrid:
    """10^6 cells of 1 m crossed diagonally by an embankment: 100 kPa on a 60 m crest,
    side slopes 15 m wide (few weighted nodes, as on a real fill)."""
    off = np.abs(np.subtract.outer(np.arange(1000), np.arange(1000)))
    return LoadGrid(np.clip((45 - off) / 15, 0, 1) * 100.0, 0, 0, 1, 1)


def points_below_fill(grid: LoadGrid, n: int, depth: float = 10.0, seed: int = 9) -> np.ndarray:
    """`n` points 0 to `depth` m below loaded cells: where a run's settlement columns, sections
    and profiles lie (their walks expand more blocks than points far from the fill)."""
    rng = np.random.default_rng(seed)
    j, i = np.nonzero(grid.pressure)
    pick = rng.integers(0, j.size, n)
    return np.column_stack([grid.x0 + (i[pick] + rng.uniform(0, 1, n)) * grid.dx,
                            grid.y0 + (j[pick] + rng.uniform(0, 1, n)) * grid.dy,
                            rng.uniform(0.0, depth, n)])


def warm() -> None:
    """Compile (or load from the numba cache) every kernel measured below."""
    g = LoadGrid(np.ones((4, 4)), 0, 0, 1, 1)
    pts = np.array([[1.0, 1.0, 1.0], [2.0, 2.0, 0.0]])
    stress_at_points(g, pts, algorithm="direct")
    evaluate_pyramid(build_pyramid(g), pts)
    stress_slices(g, [1.0])


def measure(repeat: int, direct_cells: int, direct_points: int, far_points: int) -> dict:
    warm()
    small = invented_site(direct_cells)
    pts = points_on(small, direct_points)
    corners = direct_work(small, direct_points)
    t_direct = best(repeat, stress_at_points, small, pts, algorithm="direct")
    big = embankment_band()
    nodes = (big.ny + 1) * (big.nx + 1)
    t_one = best(max(repeat, 10), stress_at_points, big, points_on(big, 1))   # short: noisy
    t_setup = t_one - direct_work(big, 1) * t_direct / corners
    t_pyramid = best(repeat, build_pyramid, big)
    pyramid = build_pyramid(big)
    t_far = best(repeat, evaluate_pyramid, pyramid, points_below_fill(big, far_points))
    side = 1000
    fft = LoadGrid(np.random.default_rng(3).uniform(0, 100, (side, side)), 0, 0, 1, 1)
    depths = [1.0, 3.0, 6.0, 12.0, 24.0]
    t_fft = best(repeat, stress_slices, fft, depths)
    n = scipy.fft.next_fast_len(2 * side - 1, real=True) ** 2
    flops = (1 + 2 * len(depths)) * 5 * n * math.log2(n)      # the model of solve/cost.py
    corner_s = len(depths) * (2 * side) ** 2 * t_direct / corners   # the unit-cell nodes
    log_factor = max(1.0, math.log2(big.pressure.size) / 20.0)
    return {
        "CORNERS_PER_SECOND": (corners / t_direct,
                               f"{direct_points} points × {corners // direct_points} nodes, {t_direct:.2f} s"),
        "DIRECT_SETUP_SECONDS_PER_NODE": (t_setup / nodes,
                                          f"one point on {nodes} nodes, {t_one * 1e3:.1f} ms"),
        "FAR_SECONDS_PER_POINT": (t_far / far_points / log_factor,
                                  f"{far_points} points below an embankment, {big.pressure.size} cells, {t_far:.2f} s"),
        "PYRAMID_SECONDS_PER_CELL": (t_pyramid / big.pressure.size,
                                     f"{big.pressure.size} cells, {t_pyramid:.2f} s"),
        "FFT_FLOPS_PER_SECOND": (flops / max(t_fft - corner_s, 1e-9),
                                 f"{side} × {side} cells, {len(depths)} depths, {t_fft:.2f} s"),
    }


def corridor_site(folder: Path, miles: float) -> Path:
    tool_path = Path(__file__).resolve().parents[1] / "tools" / "make_corridor_site.py"
    spec = importlib.util.spec_from_file_location("_corridor_tool", tool_path)
    tool = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(tool)
    return tool.write_corridor_site(folder, miles=miles)


def estimate_against_run(path: Path) -> tuple[list, float, float]:
    """([(step, estimated s, measured s)], estimated total, measured compute s) for a
    run of the site file `path` (numba warm: run after :func:`measure`)."""
    site = load_site(path)
    estimated = {e.operation: e.seconds for e in run_estimates(site)}
    order = [c.step for c in solver_calls(site)]
    slice_order = list(slice_calls(site))
    measured = defaultdict(float)
    real_stress = run_compute.stress
    real_check = run_compute.convergence_check

    def timed_call(real, steps):
        def call(*args, **kwargs):
            t = time.perf_counter()
            out = real(*args, **kwargs)
            if len(args[2]) if real is real_stress else True:
                measured[steps.pop(0)] += time.perf_counter() - t
            return out
        return call

    def check(*args, **kwargs):
        before, t = measured["convergence check"], time.perf_counter()
        out = real_check(*args, **kwargs)
        spent = time.perf_counter() - t - (measured["convergence check"] - before)
        measured["bodies on half cells"] += spent
        return out

    def slicer(site_, plan, grids, client=None):
        # a SliceStack's pressure transforms are made here, its slices per call; a call
        # of the per-grid path stands for one slice call per grid
        t = time.perf_counter()
        inner = real_slicer(site_, plan, grids, client)
        measured[slice_order[0].step] += time.perf_counter() - t

        def timed(depths):
            t = time.perf_counter()
            out = inner(depths)
            first = slice_order[0]
            del slice_order[:1 if first.stacked else len(grids)]
            measured[first.step] += time.perf_counter() - t
            return out
        return timed

    def kept_slicer(site_, plan, grids, keep, client=None):
        if slice_order[0].folded is None:   # cut from the full slices, timed by `slicer`
            return real_kept(site_, plan, grids, keep, client)
        t = time.perf_counter()
        inner = real_kept(site_, plan, grids, keep, client)
        measured[slice_order[0].step] += time.perf_counter() - t

        def timed(depths):
            t = time.perf_counter()
            out = inner(depths)
            measured[slice_order.pop(0).step] += time.perf_counter() - t
            return out
        return timed

    real_points = run_compute.RunStress

    class TimedStress(real_points):                 # the steps' evaluator
        def __call__(self, grid, xyz):
            t = time.perf_counter()
            out = super().__call__(grid, xyz)
            if len(xyz):
                measured[order.pop(0)] += time.perf_counter() - t
            return out

    real_slicer, real_kept = run_compute._plan_slicer, run_compute._kept_slicer
    run_compute.stress = timed_call(real_stress, order)
    run_compute.RunStress = TimedStress
    run_compute._plan_slicer, run_compute._kept_slicer = slicer, kept_slicer
    run_compute.convergence_check = check
    try:
        res = run_compute.compute(site)
    finally:
        run_compute.stress, run_compute._plan_slicer = real_stress, real_slicer
        run_compute._kept_slicer = real_kept
        run_compute.convergence_check, run_compute.RunStress = real_check, real_points
    rows = [(step, estimated.get(step, 0.0), measured.get(step, 0.0))
            for step in dict.fromkeys([*estimated, *measured])]
    return rows, sum(estimated.values()), res.timings["compute_s"]


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--direct-cells", type=int, default=90_000)
    ap.add_argument("--direct-points", type=int, default=1000)
    ap.add_argument("--far-points", type=int, default=20_000)
    ap.add_argument("--corridor", type=float, default=None, metavar="MILES",
                    help="also compare the estimate with a run of the corridor site")
    args = ap.parse_args(argv)
    print("\n".join(markdown(args)))


def markdown(args) -> list[str]:
    load = os.getloadavg()[0]
    rows = measure(args.repeat, args.direct_cells, args.direct_points, args.far_points)
    lines = [f"Load average before: {load:.1f}, after: {os.getloadavg()[0]:.1f} (1 min).", "",
             "| constant | in solve/cost.py | measured | measured on |", "|---|---|---|---|"]
    lines += [f"| `{name}` | {getattr(cost, name, float('nan')):.3g} | {value:.3g} | {how} |"
              for name, (value, how) in rows.items()]
    if args.corridor:
        with tempfile.TemporaryDirectory() as tmp:
            steps, est_total, compute_s = estimate_against_run(
                corridor_site(Path(tmp), args.corridor))
        lines += ["", f"A run of the {args.corridor:g}-mile corridor site, estimate beside "
                  "measurement:", "", "| step | estimated | measured |", "|---|---|---|"]
        lines += [f"| {step} | {e:.2f} s | {m:.2f} s |" for step, e, m in steps]
        lines += [f"| whole computation (compute_s, with the rest between the calls) | "
                  f"{est_total:.1f} s | {compute_s:.1f} s |"]
    return lines


if __name__ == "__main__":
    main()
