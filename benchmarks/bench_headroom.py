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


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cells", type=int, default=250_000, help="map cells (a square lattice)")
    ap.add_argument("--receptors", type=int, default=200, help="receptor points")
    ap.add_argument("--depths", type=int, default=5, help="distinct receptor depths")
    args = ap.parse_args()
    n = int(round(args.cells ** 0.5))
    spec = GridSpec(0.0, 0.0, 1.0, 1.0, n, n)
    rng = np.random.default_rng(3)
    cells = rng.integers(0, n, (args.receptors, 2))
    depths = np.linspace(2.0, 12.0, args.depths)[rng.integers(0, args.depths, args.receptors)]
    pts = np.column_stack([cells[:, 1] + 0.5, cells[:, 0] + 0.5, depths])
    template = rectangle_template(15.0, 10.0, 120.0, 1.0, 1.0)
    start = time.perf_counter()
    for _ in template_influence(template, spec, pts):
        pass
    slices = time.perf_counter() - start
    start = time.perf_counter()
    hm = headroom_map(template, spec, pts, rng.uniform(20.0, 60.0, args.receptors))
    total = time.perf_counter() - start
    print(f"| {n}×{n} = {n * n} cells, {args.receptors} receptors at {args.depths} depths "
          f"| slices {slices:.2f} s | whole map {total:.2f} s "
          f"| finite cells {np.isfinite(hm.multiple).mean():.0%} |")


if __name__ == "__main__":
    main()
