"""Headroom map benchmark: a template load mapped over a large lattice against many receptors.

    PYTHONPATH=src python benchmarks/bench_headroom.py --cells 1000000 --receptors 1000 --depths 5

Prints Markdown: the time of the FFT slices (one per receptor depth, receptors at cell centres)
and of the pass over the map per receptor. The site is invented: receptors scattered over a
square yard of 1 m cells, a 15 m × 10 m template of 120 kPa.
"""
from __future__ import annotations

import argparse
import time

import numpy as np

from fillstress.decide.headroom import headroom_map, rectangle_template, template_influence
from fillstress.grid import GridSpec


COMMAND = ("PYTHONPATH=src python benchmarks/bench_headroom.py --cells 1000000 --receptors 1000 "
           "--depths 5")


def measure(cells: int, receptors: int, depths: int) -> dict:
    """Seconds of the FFT slices alone and of the whole map, the side of the square lattice
    and the share of cells that a limit bounds."""
    n = int(round(cells ** 0.5))
    spec = GridSpec(0.0, 0.0, 1.0, 1.0, n, n)
    rng = np.random.default_rng(3)
    at = rng.integers(0, n, (receptors, 2))
    z = np.linspace(2.0, 12.0, depths)[rng.integers(0, depths, receptors)]
    pts = np.column_stack([at[:, 1] + 0.5, at[:, 0] + 0.5, z])
    template = rectangle_template(15.0, 10.0, 120.0, 1.0, 1.0)
    start = time.perf_counter()
    for _ in template_influence(template, spec, pts):
        pass
    slices = time.perf_counter() - start
    start = time.perf_counter()
    hm = headroom_map(template, spec, pts, rng.uniform(20.0, 60.0, receptors))
    return {"n": n, "receptors": receptors, "depths": depths, "slices": slices,
            "total": time.perf_counter() - start,
            "finite": float(np.isfinite(hm.multiple).mean())}


def row(fig: dict) -> str:
    n = fig["n"]
    return (f"| {n}×{n} = {n * n} cells, {fig['receptors']} receptors at {fig['depths']} depths "
            f"| slices {fig['slices']:.2f} s | whole map {fig['total']:.2f} s "
            f"| finite cells {fig['finite']:.0%} |")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cells", type=int, default=250_000, help="map cells (a square lattice)")
    ap.add_argument("--receptors", type=int, default=200, help="receptor points")
    ap.add_argument("--depths", type=int, default=5, help="distinct receptor depths")
    args = ap.parse_args()
    print(row(measure(args.cells, args.receptors, args.depths)))


if __name__ == "__main__":
    main()
