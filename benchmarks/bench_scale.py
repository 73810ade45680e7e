"""Scale benchmarks: far field vs direct summation, tiled slices under a cap, Dask.

Prints Markdown.  Example (the figures in docs/performance.md, "## Far field"):

    PYTHONPATH=src python benchmarks/bench_scale.py --cells 1000000 --points 100000 \
        --slice-cells 10000000 --cap-gb 2 --dask-points 20000

The sites are invented: a field of conical piles, a long embankment and a cut.
"""
from __future__ import annotations

import argparse
import datetime as _dt
import os
import resource
import time

import numpy as np

from fillstress import LoadGrid
from fillstress.solve.cost import (FFT_FLOPS_PER_SECOND, estimate_points, estimate_slices,
                                 format_bytes, largest_tile)
from fillstress.solve.auto import direct_work
from fillstress.solve.direct import vertical_stress
from fillstress.solve.farfield import build_pyramid, evaluate_pyramid
from fillstress.solve.tiled import tiled_slices


def invented_site(n_cells: int, seed: int = 7) -> LoadGrid:
    """About `n_cells` square 1 m cells: piles, an embankment, a cut (kPa)."""
    side = int(round(n_cells ** 0.5))
    rng = np.random.default_rng(seed)
    y, x = np.mgrid[0:side, 0:side].astype(np.float32)
    p = np.zeros((side, side))
    for cx, cy, r, top in zip(rng.uniform(0, side, 12), rng.uniform(0, side, 12),
                              rng.uniform(15, 60, 12), rng.uniform(60, 180, 12)):
        p += np.clip(top * (1.0 - np.hypot(x - cx, y - cy) / r), 0.0, None)
    band = np.abs(y - 0.3 * x - 0.2 * side) < 0.04 * side
    p += 90.0 * band
    p[int(0.7 * side):int(0.8 * side), int(0.1 * side):int(0.3 * side)] -= 40.0
    return LoadGrid(p, 250_000.0, 4_100_000.0, 1.0, 1.0)


def points_on(grid: LoadGrid, n: int, seed: int = 8) -> np.ndarray:
    rng = np.random.default_rng(seed)
    xmin, ymin, xmax, ymax = grid.extent
    return np.column_stack([rng.uniform(xmin, xmax, n), rng.uniform(ymin, ymax, n),
                            rng.uniform(0.0, 40.0, n)])


def timed(fn, *args, **kwargs):
    """(fn(*args, **kwargs), wall-clock seconds)."""
    t0 = time.perf_counter()
    result = fn(*args, **kwargs)
    return result, time.perf_counter() - t0


def far_vs_direct(cells: int, n_points: int, subset: int) -> list[str]:
    return far_figures(cells, n_points, subset)["lines"]


def far_figures(cells: int, n_points: int, subset: int) -> dict:
    """Far field against direct summation: times (s), bound/error ratios and the Markdown
    lines that report them."""
    grid = invented_site(cells)
    pts = points_on(grid, n_points)
    evaluate_pyramid(build_pyramid(LoadGrid(np.ones((4, 4)), 0, 0, 1, 1)), pts[:2])  # compile
    vertical_stress(LoadGrid(np.ones((2, 2)), 0, 0, 1, 1), pts[:2])
    pyr, t_build = timed(build_pyramid, grid)
    (far, bound, work), t_far = timed(evaluate_pyramid, pyr, pts, return_work=True)
    exact, t_sub = timed(vertical_stress, grid, pts[:subset])
    floor = 0.01 * np.abs(grid.pressure).max()
    err = np.abs(far[:subset] - exact)
    rel = err / np.maximum(np.abs(exact), floor)
    # how far below its certified bound the actual error stays (docs/method-farfield.md)
    slack = bound[:subset][err > 0] / err[err > 0]
    load = os.getloadavg()[0]   # the machine is shared: the times scale with the load
    extrapolated = t_sub * n_points / subset
    corners = subset * direct_work(grid, 1)
    lines = [
        f"### Far field: {n_points} points on {grid.ny} × {grid.nx} = {grid.pressure.size} cells",
        "",
        "| step | time |",
        "|---|---|",
        f"| pyramid build | {t_build:.2f} s |",
        f"| far field, all {n_points} points (tol 1e-3) | {t_far:.2f} s |",
        f"| direct summation, first {subset} points | {t_sub:.2f} s |",
        f"| direct summation, all points (extrapolated from the subset) | {extrapolated:.0f} s |",
        f"| speed-up (extrapolated direct / far) | {extrapolated / (t_build + t_far):.0f}× |",
        "",
        f"Pyramid + walk: {t_build + t_far:.2f} s; load average (1 min) at the end {load:.2f}.",
        "",
        f"Largest error / max(|Δσz|, 1 % of max p) on the subset: {rel.max():.2e} "
        f"(bound certified at every point: 1e-3).  Per point on average: "
        f"{work[:, 0].mean():.0f} cells summed exactly, {work[:, 1].mean():.0f} blocks expanded, "
        f"{work[:, 2].mean():.0f} visited.  Estimate said: "
        f"{estimate_points(grid.shape, n_points, algorithm='far').seconds:.0f} s far, "
        f"{estimate_points(grid.shape, n_points).seconds:.0f} s direct (all nodes).",
        "",
        f"Certified bound / actual error on the subset: {_span(slack)}.",
        "",
        f"Rates for the constants in src/fillstress/solve/cost.py: CORNERS_PER_SECOND "
        f"{corners / t_sub:.2g} (direct, {corners} corner evaluations), "
        f"FAR_SECONDS_PER_POINT {t_far / n_points:.2g}.",
        "",
    ]
    return {"build": t_build, "far": t_far, "load": load, "slack_median": float(np.median(slack)),
            "slack_min": float(slack.min()), "slack_max": float(slack.max()), "lines": lines}


def _span(values) -> str:
    if values.size == 0:
        return "no point with a non-zero error"
    lo, med, hi = np.percentile(values, [0, 50, 100])
    return f"{lo:.3g} to {hi:.3g} (median {med:.3g}, {values.size} points)"


def tiled_under_cap(cells: int, cap_gb: float) -> list[str]:
    grid = invented_site(cells)
    depths = [1.0, 3.0, 6.0, 12.0, 24.0]
    est_whole = estimate_slices(grid.shape, len(depths))
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    s, elapsed = timed(tiled_slices, grid, depths, memory_cap=cap_gb * 1e9)
    tile = largest_tile(grid.shape, len(depths), cap_gb * 1e9)
    est_tiled = estimate_slices(grid.shape, len(depths), tile=tile)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    return [
        f"### Tiled slices: {grid.pressure.size} cells, {len(depths)} depths, cap {cap_gb:g} GB",
        "",
        f"Untiled would need {format_bytes(est_whole.bytes)}.  Tiled run: {elapsed:.1f} s, "
        f"peak resident memory of the process {format_bytes(peak)} "
        f"(before the run {format_bytes(before)}, grid itself {format_bytes(grid.pressure.nbytes)}); "
        f"max Δσz {float(s.max()):.1f} kPa.  Estimate said {est_tiled.seconds:.0f} s "
        f"(tiles of {tile[0]} × {tile[1]}), so FFT_FLOPS_PER_SECOND in solve/cost.py would be "
        f"{FFT_FLOPS_PER_SECOND * est_tiled.seconds / elapsed:.2g} on this machine.",
        "",
    ]


def dask_beside_serial(cells: int, n_points: int) -> list[str]:
    from fillstress.solve.distributed import connect, distributed_points
    from fillstress.solve.auto import stress_at_points
    grid = invented_site(cells)
    pts = points_on(grid, n_points)
    serial, t_serial = timed(stress_at_points, grid, pts, algorithm="far")
    rows = [f"| serial (numba threads) | {t_serial:.2f} s | — |"]
    for workers in (1, 2):
        with connect(workers) as client:       # as `fillstress run --workers N` does
            distributed_points(grid, pts[:100], client=client, algorithm="far")  # warm workers
            out, t_dask = timed(distributed_points, grid, pts, client=client, algorithm="far",
                                chunk_size=2000)
            rows.append(f"| Dask, {workers} worker(s) × 1 thread, "
                        f"{max(1, (os.cpu_count() or 1) // workers)} numba thread(s) | "
                        f"{t_dask:.2f} s "
                        f"| {'identical' if np.array_equal(out, serial) else 'DIFFERENT'} |")
    return [f"### Dask: {n_points} points, far field, {grid.pressure.size} cells", "",
            "| run | time | values vs serial |", "|---|---|---|", *rows, ""]


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cells", type=int, default=1_000_000)
    ap.add_argument("--points", type=int, default=100_000)
    ap.add_argument("--subset", type=int, default=200)
    ap.add_argument("--slice-cells", type=int, default=10_000_000)
    ap.add_argument("--cap-gb", type=float, default=2.0)
    ap.add_argument("--dask-points", type=int, default=20_000)
    ap.add_argument("--skip", nargs="*", default=[], choices=["far", "tiled", "dask"])
    args = ap.parse_args(argv)
    lines = [f"## Scale benchmark, {_dt.date.today().isoformat()}, {os.cpu_count()} cores", ""]
    if "far" not in args.skip:
        lines += far_vs_direct(args.cells, args.points, args.subset)
    if "tiled" not in args.skip:
        lines += tiled_under_cap(args.slice_cells, args.cap_gb)
    if "dask" not in args.skip:
        lines += dask_beside_serial(args.cells, args.dask_points)
    print("\n".join(lines))


if __name__ == "__main__":
    main()
