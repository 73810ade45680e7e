"""What a run will compute and roughly what it costs, before computing anything."""
from __future__ import annotations

import numpy as np

# Throughput of direct summation measured on a 2-core machine (docs/performance.md):
# conservative figures for estimates, not promises.
PAIRS_PER_SECOND = 1.0e8
FFT_CELLS_PER_SECOND = 1.0e7


def run_cost(site) -> dict:
    """Counts, estimated seconds and peak bytes of a run of `site`."""
    cells = site.spec.nx * site.spec.ny
    active = int(np.count_nonzero(site.load_grid().pressure))
    n_points = len(site.points)
    sublayer_points = 0
    if site.soil is not None:
        from .settlement import sublayers
        settle = site.points[site.points["role"] != "profile"]
        for depth, g in settle.groupby("depth"):
            sublayer_points += len(g) * len(sublayers(site.soil, top_depth=float(depth))[0])
        sublayer_points *= len(site.stages)
    slice_depths = sum(len(p.depths) for p in site.plan_grids)
    pairs = active * (n_points * 2 + sublayer_points)        # ×2: convergence check on 4× cells
    fft_cells = 4 * cells * slice_depths
    seconds = pairs / PAIRS_PER_SECOND + fft_cells * np.log2(max(fft_cells, 2)) / FFT_CELLS_PER_SECOND / 20
    peak = 8 * (4 * cells * 6 + slice_depths * cells + 20 * max(n_points, 1))
    return {"cells": cells, "loaded_cells": active, "points": n_points,
            "settlement_points": sublayer_points, "slice_depths": slice_depths,
            "seconds": float(seconds), "peak_bytes": int(peak)}


def describe_run(site) -> list[list]:
    """Rows (item, value) for `fillstress check`."""
    c = run_cost(site)
    u = site.units
    kinds = site.points["receptor_kind"].value_counts().to_dict() if len(site.points) else {}
    rows = [
        ["site", site.name],
        ["CRS", site.crs.to_string() if site.crs is not None else "none stated"],
        ["units", f"{u.name} ({u.length}, {u.pressure}, {u.unit_weight})"],
        ["method", site.method + (f", ν = {site.poisson:g}" if site.poisson is not None else "")],
        ["analysis grid", f"{site.spec.nx} × {site.spec.ny} cells of "
                          f"{u.length_out(site.spec.dx):g} {u.length} ({c['loaded_cells']:,} loaded)"],
        ["construction stages", ", ".join(map(str, site.stages))],
        ["receptor points", ", ".join(f"{n} {k}" for k, n in kinds.items()) or "none"],
        ["plan-grid slices", str(c["slice_depths"])],
        ["soil profile", "none" if site.soil is None else
         ", ".join(L.name for L in site.soil.layers)],
        ["estimated run time", f"{c['seconds']:.1f} s (2-core machine)"],
        ["estimated peak memory", f"{c['peak_bytes'] / 2**20:.0f} MiB"],
    ]
    return rows
