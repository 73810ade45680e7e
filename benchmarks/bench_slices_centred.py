"""Exact slices on cell centres, the kernel re-centred on the sample (its real transform a
type-I DCT of one quarter, solve/slices.py) against the slices of a git revision before it
(default ae27fd8: the kernel mirrored into its full zero-padded array and its complex
rfftn), on the heavy corridor's plan settlement (5 ft cells, plan grid at 5, 15, 30 ft;
two load states sharing each depth's kernel).  Both run in one process, interleaved, so
both see the same load of a shared machine.

    PYTHONPATH=src nice python benchmarks/bench_slices_centred.py [--miles 3.0] [--repeats 3] [--before ae27fd8]

Prints per repeat the wall and CPU seconds (all threads) of one depth of the plan
settlement's SliceStack and of the whole plan settlement step, then the medians and the
best, and the largest difference between the two results relative to the largest value.
The revision's slices.py is loaded beside the current package (it must import only what
the current package still has: the kernels and solve/_checks.py).
"""
from __future__ import annotations

import argparse
import importlib.util
import os
import subprocess
import sys
import tempfile
from contextlib import contextmanager
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tools"))

from make_corridor_site import write_corridor_site  # noqa: E402

from bench_plan_slices import clock, since  # noqa: E402
from fillstress.run import compute, plan as run_plan, settle  # noqa: E402
from fillstress.site.build import load_site  # noqa: E402
from fillstress.solve import slices  # noqa: E402

DEPTHS = (1.5, 4.6, 12.0)      # m: one call each, as the plan settlement calls the stack


def slices_at(revision: str, folder: Path):
    """solve/slices.py of a git revision, as a module of the current package."""
    text = subprocess.run(["git", "show", f"{revision}:src/fillstress/solve/slices.py"],
                          cwd=ROOT, check=True, capture_output=True, text=True).stdout
    path = folder / "slices_before.py"
    path.write_text(text)
    spec = importlib.util.spec_from_file_location("fillstress.solve._slices_before", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@contextmanager
def stack_from(module):
    saved = compute.SliceStack
    compute.SliceStack = module.SliceStack
    try:
        yield
    finally:
        compute.SliceStack = saved


def per_depth(site, module) -> tuple[tuple[float, float], list]:
    """(wall, CPU) seconds of one depth of the plan settlement's stack, the mean over
    DEPTHS (the stack made before the clock starts), and the slices."""
    plan = site.plan_grids[0]
    stack = module.SliceStack(settle.state_grids(site), site.method, site.poisson,
                              pad=run_plan.plan_pad(site, plan))
    window = run_plan.plan_window(site, plan)
    start = clock()
    out = [stack.slices([z], window) for z in DEPTHS]
    wall, cpu = since(start)
    return (wall / len(DEPTHS), cpu / len(DEPTHS)), out


def plan_settlement(site, module) -> tuple[tuple[float, float], dict]:
    with stack_from(module):
        start = clock()
        settled = settle.plan_settlement(
            site, lambda p, grids: compute._plan_slicer(site, p, grids))
        return since(start), settled


def _difference(a, b) -> float:
    return float(np.nanmax(np.abs(a - b)) / np.nanmax(np.abs(b)))


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--miles", type=float, default=3.0)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--before", default="ae27fd8", help="git revision of the slices before")
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        before = slices_at(args.before, Path(tmp))
        site = load_site(write_corridor_site(Path(tmp) / "site", args.miles, cell_ft=5.0,
                                             plan_depths_ft=(5.0, 15.0, 30.0)))
        print(f"corridor {args.miles:g} miles, {site.spec.nx} x {site.spec.ny} cells, "
              f"load average {os.getloadavg()[0]:.1f}")
        paths = {"centred": slices, f"before ({args.before})": before}
        for module in paths.values():             # numba compiled or its cache loaded
            module.SlicePlan(np.ones((2, 2)), 1.0, 1.0).at_depth(1.0)
        times = {label: {"one depth": [], "plan settlement": []} for label in paths}
        results = {}
        for _ in range(args.repeats):
            for label, module in paths.items():
                depth_s, depth_out = per_depth(site, module)
                settle_s, settled = plan_settlement(site, module)
                times[label]["one depth"].append(depth_s)
                times[label]["plan settlement"].append(settle_s)
                results[label] = depth_out, settled
                print(f"  {label:20s}: " + ", ".join(
                    f"{step} {s[0]:6.3f} s wall, {s[1]:6.3f} s CPU"
                    for step, s in (("one depth", depth_s), ("plan settlement", settle_s))))
    for label, steps in times.items():
        for how, pick in (("median", np.median), ("best", np.min)):
            print(f"{how:6s} {label:20s}: " + ", ".join(
                f"{step} {pick([s[0] for s in runs]):6.3f} s wall, "
                f"{pick([s[1] for s in runs]):6.3f} s CPU" for step, runs in steps.items()))
    (new_depths, new_settled), (old_depths, old_settled) = results.values()
    worst = max(_difference(x.values, y.values)
                for a, b in zip(new_depths, old_depths) for x, y in zip(a, b))
    worst = max([worst] + [_difference(new_settled[n].values, old_settled[n].values)
                           for n in new_settled])
    print(f"largest difference: {worst:.1e} of the largest value; load average at the end "
          f"{os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
