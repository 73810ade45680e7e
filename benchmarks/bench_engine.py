"""Stress-engine benchmark: direct summation throughput, FFT slice time, slice memory.

Run from the repository root (warms the numba cache first, prints a Markdown table):

    PYTHONPATH=src python benchmarks/bench_engine.py
    PYTHONPATH=src python benchmarks/bench_engine.py --cells 300 --points 8000 --slice-size 1000

Targets on the 2-core development machine: direct >= 1.0e8 cell-point pairs/s and
>= 4x the numpy reference; one 1000x1000 slice <= 1 s; <= 1.5 GB peak for 20 slices.
"""
from __future__ import annotations

import argparse
import json
import math
import os
import resource
import subprocess
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))
sys.path.insert(0, str(ROOT / "tests"))

import reference  # noqa: E402
from ceiling import ceiling_stress  # noqa: E402
from fillstress import LoadGrid  # noqa: E402
from fillstress.kernels import resolve_method  # noqa: E402
from fillstress.solve import stress_slices, vertical_stress  # noqa: E402


def best_time(fn, repeat: int) -> float:
    """Shortest of `repeat` runs (s): the least disturbed by other load on the machine."""
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def fills(n: int, seed: int = 0):
    """A ragged fill (every node weight non-zero) and a uniform one, n x n cells of 1 m."""
    rng = np.random.default_rng(seed)
    ragged = LoadGrid(rng.uniform(10.0, 120.0, (n, n)), 0.0, 0.0, 1.0, 1.0)
    uniform = LoadGrid(np.full((n, n), 60.0), 0.0, 0.0, 1.0, 1.0)
    return {"ragged": ragged, "uniform": uniform}


def sample_points(n: int, extent: float, seed: int = 1) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return np.column_stack([rng.uniform(-5, extent + 5, n), rng.uniform(-5, extent + 5, n),
                            rng.uniform(0.5, 20.0, n)])


def bench_direct(args) -> list[tuple[str, str, str]]:
    rows = []
    for name, grid in fills(args.cells).items():
        n_cells = grid.pressure.size
        pts = sample_points(args.points, args.cells)
        few = pts[:args.reference_points]
        # numpy reference, same fill, fewer points
        t_ref = best_time(lambda: reference.grid_stress(grid.pressure, 0, 0, 1, 1, few), 1)
        ref_rate = n_cells * len(few) / t_ref
        for kernel, n_pts in (("nodes", args.points), ("cells", args.cell_points)):
            p = pts[:n_pts]
            vertical_stress(grid, p[:2], kernel=kernel)            # compiled code warm
            t = best_time(lambda: vertical_stress(grid, p, kernel=kernel), args.repeat)
            rate = n_cells * n_pts / t
            rows.append((f"direct, {kernel} kernel, {name} fill {args.cells}x{args.cells}, "
                         f"{n_pts} points", f"{rate:.3g} pairs/s", f"{rate / ref_rate:.1f}x numpy"))
        rows.append((f"direct, numpy reference, {name} fill, {len(few)} points",
                     f"{ref_rate:.3g} pairs/s", "1.0x"))
    return rows


def terraced_fill(n: int) -> LoadGrid:
    """A smooth load: a square pile in 8 flat terraces (most node weights are zero)."""
    ii, jj = np.meshgrid(np.arange(n), np.arange(n))
    ring = np.minimum(np.minimum(ii, n - 1 - ii), np.minimum(jj, n - 1 - jj))
    return LoadGrid(18.0 * np.minimum(ring * 8 // n + 1, 8).astype(float), 0.0, 0.0, 1.0, 1.0)


def interleaved_ratios(first, second, repeat: int) -> np.ndarray:
    """time(first) / time(second) for `repeat` runs taken in turn, so both see the same
    load on the machine."""
    ratios = []
    for _ in range(repeat):
        t = time.perf_counter()
        first()
        t_first = time.perf_counter() - t
        t = time.perf_counter()
        second()
        ratios.append(t_first / (time.perf_counter() - t))
    return np.asarray(ratios)


def bench_ceiling(args) -> list[tuple[str, str, str]]:
    """Direct summation (node kernel) against the dense ceiling kernel of benchmarks/
    ceiling.py, as speed ratios (ceiling time / package time) from interleaved runs."""
    loads = {"ragged": fills(args.cells)["ragged"], "terraced": terraced_fill(args.cells)}
    pts = sample_points(args.ceiling_points, args.cells)
    rows = []
    for method, poisson in (("boussinesq", None), ("westergaard", 0.0)):
        spec = resolve_method(method, poisson)
        for name, grid in loads.items():
            package = lambda: vertical_stress(grid, pts, method, poisson)  # noqa: E731
            ceiling = lambda: ceiling_stress(grid, pts, spec)  # noqa: E731
            diff = np.abs(package() - ceiling()).max() / grid.pressure.max()
            ratios = interleaved_ratios(ceiling, package, args.ratio_repeat)
            rows.append((f"direct vs dense ceiling, {method}, {name} fill "
                         f"{args.cells}x{args.cells}, {len(pts)} points",
                         f"{np.median(ratios):.2f}x the ceiling (median of {ratios.size})",
                         f"range {ratios.min():.2f}-{ratios.max():.2f}; "
                         f"max diff {diff:.0e} of max p"))
    return rows


def bench_slice(args) -> list[tuple[str, str, str]]:
    n = args.slice_size
    grid = fills(n)["ragged"]
    stress_slices(LoadGrid(np.ones((8, 8)), 0, 0, 1, 1), [1.0])      # compiled code warm
    t = best_time(lambda: stress_slices(grid, [5.0], workers=args.workers), args.repeat)
    return [(f"FFT slice, {n}x{n} grid at {n}x{n} points, 1 depth", f"{t:.3f} s",
             "target <= 1 s"), slice_accuracy()]


def slice_accuracy() -> tuple[str, str, str]:
    """Largest |FFT slice − direct sum| over 3 depths of a ragged 60 × 80 fill padded by
    20 cells, as a share of the largest pressure (docs/method-engine.md, FFT slices)."""
    ragged = fills(80)["ragged"]
    grid = ragged.with_pressure(ragged.pressure[:60])
    worst = 0.0
    for z in (0.5, 5.0, 40.0):
        s = stress_slices(grid, [z], pad=20.0)
        xx, yy = np.meshgrid(s.x.values, s.y.values)
        direct = vertical_stress(grid, np.column_stack([xx.ravel(), yy.ravel(),
                                                        np.full(xx.size, z)]))
        worst = max(worst, float(np.abs(s.values[0].ravel() - direct).max()))
    return ("FFT slice vs direct sum, 60x80 fill, pad 20 cells, depths 0.5/5/40 m",
            f"{worst / grid.pressure.max():.1e} of max p", "absolute error")


def bench_arctangent(args) -> list[tuple[str, str, str]]:
    """ns per call of the arctangent the kernels need, atan2(y, c) for c > 0, three ways
    (`--only arctangent`): numba's math.atan2, and math.atan and the
    kernels' fast_atan on y·(1/c) with 1/c computed beforehand, as the kernels do once
    per point.  One thread, the same 10^6 arguments, the best of --repeat runs."""
    import numba
    from fillstress.kernels.corner import fast_atan

    @numba.njit
    def with_atan2(y, c, inv_c):
        total = 0.0
        for k in range(y.size):
            total += math.atan2(y[k], c[k])
        return total

    @numba.njit
    def with_atan(y, c, inv_c):
        total = 0.0
        for k in range(y.size):
            total += math.atan(y[k] * inv_c[k])
        return total

    @numba.njit
    def with_fast_atan(y, c, inv_c):
        total = 0.0
        for k in range(y.size):
            total += fast_atan(y[k] * inv_c[k])
        return total

    rng = np.random.default_rng(3)
    y = rng.standard_normal(1_000_000) * 10.0
    c = rng.uniform(0.01, 10.0, y.size)
    inv_c = 1.0 / c
    rows = []
    for name, fn in (("math.atan2(y, c)", with_atan2), ("math.atan(y/c)", with_atan),
                     ("fast_atan(y/c)", with_fast_atan)):
        fn(y[:2], c[:2], inv_c[:2])                                 # compiled
        t = best_time(lambda: fn(y, c, inv_c), args.repeat)
        rows.append((f"arctangent, {name}, {y.size} calls", f"{t / y.size * 1e9:.1f} ns",
                     "per call"))
    return rows


def memory_child(n: int, n_depths: int, workers) -> dict:
    """Run in a fresh process: peak memory of `n_depths` slices of an n x n grid."""
    grid = fills(n)["ragged"]
    stress_slices(LoadGrid(np.ones((8, 8)), 0, 0, 1, 1), [1.0])
    base_rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    tracemalloc.start()
    t = time.perf_counter()
    da = stress_slices(grid, np.linspace(1.0, 20.0, n_depths), workers=workers)
    elapsed = time.perf_counter() - t
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return {"base_rss_mb": base_rss,
            "peak_rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
            "traced_peak_mb": peak / 2**20, "output_mb": da.nbytes / 2**20, "seconds": elapsed}


def bench_memory(args) -> list[tuple[str, str, str]]:
    cmd = [sys.executable, __file__, "--memory-child", "--slice-size", str(args.slice_size),
           "--depths", str(args.depths)] + (["--workers", str(args.workers)] if args.workers else [])
    env = dict(os.environ, PYTHONPATH=str(ROOT / "src"))
    out = json.loads(subprocess.run(cmd, check=True, capture_output=True, text=True,
                                    env=env).stdout.strip().splitlines()[-1])
    n = args.slice_size
    label = f"{args.depths} slices of {n}x{n}"
    return [(f"peak RSS, {label} (process, after imports {out['base_rss_mb']:.0f} MB)",
             f"{out['peak_rss_mb']:.0f} MB", "target <= 1536 MB"),
            (f"peak traced allocations, {label} (output {out['output_mb']:.0f} MB)",
             f"{out['traced_peak_mb']:.0f} MB", ""),
            (f"time, {label}", f"{out['seconds']:.2f} s", "")]


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cells", type=int, default=200, help="direct: fill is cells x cells")
    parser.add_argument("--points", type=int, default=5000, help="direct: points, node kernel")
    parser.add_argument("--cell-points", type=int, default=500, help="direct: points, cell kernel")
    parser.add_argument("--reference-points", type=int, default=20, help="numpy reference points")
    parser.add_argument("--slice-size", type=int, default=1000, help="slice grid is n x n")
    parser.add_argument("--depths", type=int, default=20, help="slices in the memory run")
    parser.add_argument("--workers", type=int, default=None, help="scipy.fft threads")
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--ceiling-points", type=int, default=1000,
                        help="points of the package-vs-ceiling comparison")
    parser.add_argument("--ratio-repeat", type=int, default=7,
                        help="interleaved runs behind each ratio")
    parser.add_argument("--only", nargs="*", default=None,
                        help="run only these parts: direct ceiling slice arctangent memory")
    parser.add_argument("--skip-memory", action="store_true")
    parser.add_argument("--memory-child", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.memory_child:
        print(json.dumps(memory_child(args.slice_size, args.depths, args.workers)))
        return
    parts = {"direct": bench_direct, "ceiling": bench_ceiling, "slice": bench_slice,
             "arctangent": bench_arctangent, "memory": bench_memory}
    chosen = args.only or [k for k in parts if not (k == "memory" and args.skip_memory)]
    rows = [row for name in chosen for row in parts[name](args)]
    print("| case | result | note |\n|---|---|---|")
    for case, result, note in rows:
        print(f"| {case} | {result} | {note} |")


if __name__ == "__main__":
    main()
