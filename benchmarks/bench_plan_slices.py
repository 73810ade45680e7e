"""Plan-grid FFT work of the corridor (5 ft cells, plan grid at 5, 15, 30 ft): the stage
slices and the plan settlement with the kernel shared over the load grids (SliceStack,
the kernel re-centred on the sample, a quarter of it evaluated; the settlement's analysed
nodes alone, on a folded torus) against one slice call per load grid over the whole
padded box with the corner function on every node (the path before, but for the kernel
now written straight into the FFT's zero-padded input), interleaved in one process so
both see the same load of a shared machine.

    PYTHONPATH=src nice python benchmarks/bench_plan_slices.py [--miles 3.0] [--repeats 2]

Prints the wall and CPU seconds (all threads) of each step per repeat, the best of the
repeats last, and the largest difference between the two paths' results, relative to the
largest value. CPU seconds vary less than wall seconds on a loaded machine.
"""
from __future__ import annotations

import argparse
import os
import resource
import sys
import tempfile
import time
from contextlib import contextmanager
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tools"))

from make_corridor_site import write_corridor_site  # noqa: E402

from fillstress.run import compute  # noqa: E402
from fillstress.site.build import load_site  # noqa: E402
from fillstress.solve import slices  # noqa: E402


@contextmanager
def per_grid():
    """The path before: every load grid sliced alone over the whole box, the corner on
    every node."""
    saved = compute.shares_kernel, slices.paired_nodes, compute.folding_layout
    compute.shares_kernel = lambda *args: False
    slices.paired_nodes = lambda nodes: False
    compute.folding_layout = lambda *args: None
    try:
        yield
    finally:
        compute.shares_kernel, slices.paired_nodes, compute.folding_layout = saved


def clock() -> tuple[float, float]:
    """(wall, CPU of all threads) seconds now."""
    use = resource.getrusage(resource.RUSAGE_SELF)
    return time.perf_counter(), use.ru_utime + use.ru_stime


def since(start) -> tuple[float, float]:
    now = clock()
    return now[0] - start[0], now[1] - start[1]


def plan_work(site) -> dict:
    """(wall, CPU) seconds and results of the plan slices of every stage and the plan
    settlement."""
    stages = [site.load_grid(k) for k in site.stages]
    start = clock()
    stack = {p.name: compute._plan_slicer(site, p, stages)(p.depths) for p in site.plan_grids}
    sliced = since(start)
    start = clock()
    settled = compute.plan_settlement(site)
    return {"plan slices": sliced, "plan settlement": since(start), "stack": stack,
            "settled": settled}


def _seconds(r: dict) -> str:
    return ", ".join(f"{step} {r[step][0]:6.2f} s wall, {r[step][1]:6.2f} s CPU"
                     for step in ("plan slices", "plan settlement"))


def _relative_difference(a: dict, b: dict) -> float:
    worst = 0.0
    for name in a["stack"]:
        for x, y in zip(a["stack"][name], b["stack"][name]):
            worst = max(worst, float(np.abs(x.values - y.values).max() / np.abs(y.values).max()))
        s, t = a["settled"][name].values, b["settled"][name].values
        worst = max(worst, float(np.nanmax(np.abs(s - t)) / np.nanmax(np.abs(t))))
    return worst


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--miles", type=float, default=3.0)
    ap.add_argument("--repeats", type=int, default=2)
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        site = load_site(write_corridor_site(Path(tmp) / "site", args.miles, cell_ft=5.0,
                                             plan_depths_ft=(5.0, 15.0, 30.0)))
    print(f"corridor {args.miles:g} miles, {site.spec.nx} x {site.spec.ny} cells, "
          f"{len(site.stages)} stages, load average {os.getloadavg()[0]:.1f}")
    slices.SlicePlan(np.ones((2, 2)), 1.0, 1.0).at_depth(1.0)    # numba's cache loaded
    times = {"shared": [], "per grid": []}
    for _ in range(args.repeats):
        shared = plan_work(site)
        with per_grid():
            before = plan_work(site)
        times["shared"].append(shared)
        times["per grid"].append(before)
        for label, r in (("shared", shared), ("per grid", before)):
            print(f"  {label:8s}: {_seconds(r)}")
    for label, runs in times.items():
        best = {step: (min(r[step][0] for r in runs), min(r[step][1] for r in runs))
                for step in ("plan slices", "plan settlement")}
        print(f"best {label:8s}: {_seconds(best)}")
    print(f"largest difference: {_relative_difference(shared, before):.1e} of the largest "
          f"value; load average at the end {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
