"""Slow, obviously-correct references for every fast path (no numba).

Every fast path (numba node and cell kernels, FFT slices, tiles, Dask, cell coverage) is
compared with these.
The formulas are written out again here on purpose instead of importing the kernels.
"""
from __future__ import annotations

import numpy as np
import shapely


def eta(poisson: float) -> float:
    """Westergaard (1938): η = sqrt((1 − 2ν) / (2 − 2ν))."""
    return np.sqrt((1.0 - 2.0 * poisson) / (2.0 - 2.0 * poisson))


def boussinesq_corner(a, b, z):
    """Holl (1940)-style signed corner factor, guarded where a term is 0/0."""
    a, b, z = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (a, b, z)))
    r = np.sqrt(a * a + b * b + z * z)
    with np.errstate(divide="ignore", invalid="ignore"):
        first = np.arctan2(a * b, z * r)
        second = a * b * z / r * (1.0 / (a * a + z * z) + 1.0 / (b * b + z * z))
    # the second term vanishes wherever a factor a, b or z is zero (its limit there)
    second = np.where((a == 0) | (b == 0) | (z == 0), 0.0, second)
    first = np.where(r == 0, 0.0, first)
    return (first + second) / (2.0 * np.pi)


def westergaard_corner(a, b, z, poisson=0.0):
    """Westergaard (1938) signed corner factor atan2(ab, ηz·sqrt(a²+b²+η²z²)) / 2π."""
    c = eta(poisson) * np.asarray(z, dtype=float)
    return np.arctan2(a * b, c * np.sqrt(a * a + b * b + c * c)) / (2.0 * np.pi)


def corner(a, b, z, method="boussinesq", poisson=None):
    if method == "boussinesq":
        return boussinesq_corner(a, b, z)
    return westergaard_corner(a, b, z, 0.0 if poisson is None else poisson)


def rectangle(x1, x2, y1, y2, z, method="boussinesq", poisson=None):
    """Δσz/q of a uniform rectangle, edges as offsets from the point."""
    f = lambda a, b: corner(a, b, z, method, poisson)  # noqa: E731
    return f(x2, y2) - f(x1, y2) - f(x2, y1) + f(x1, y1)


def grid_stress(pressure, x0, y0, dx, dy, points, method="boussinesq", poisson=None):
    """Δσz (kPa) at points (N, 3) by the per-cell four-corner sum, one point at a time."""
    pressure = np.asarray(pressure, dtype=float)
    ny, nx = pressure.shape
    xe = x0 + np.arange(nx + 1) * dx
    ye = y0 + np.arange(ny + 1) * dy
    out = np.empty(len(points))
    for k, (px, py, z) in enumerate(np.asarray(points, dtype=float)):
        x1 = (xe[:-1] - px)[None, :]
        x2 = (xe[1:] - px)[None, :]
        y1 = (ye[:-1] - py)[:, None]
        y2 = (ye[1:] - py)[:, None]
        out[k] = np.sum(pressure * rectangle(x1, x2, y1, y2, z, method, poisson))
    return out


def boussinesq_point(r, z):
    """Boussinesq (1885): Δσz/Q = 3z³ / (2π (r² + z²)^(5/2))."""
    return 3.0 * z**3 / (2.0 * np.pi * (r * r + z * z) ** 2.5)


def westergaard_point(r, z, poisson=0.0):
    """Westergaard (1938): Δσz/Q = ηz / (2π (η²z² + r²)^(3/2))."""
    c = eta(poisson) * z
    return c / (2.0 * np.pi * (c * c + r * r) ** 1.5)


def terzaghi_average_degree(tv, terms: int = 200):
    """Terzaghi (1925) average degree of consolidation, uniform initial excess pore pressure:
    U = 1 − Σ_{m=0}^{terms−1} 2/M² exp(−M² Tv), M = π(2m+1)/2 (written out, no shortcut)."""
    tv = np.asarray(tv, dtype=float)
    total = np.zeros_like(tv)
    for m in range(terms):
        big_m = np.pi * (2 * m + 1) / 2.0
        total = total + 2.0 / big_m**2 * np.exp(-big_m**2 * tv)
    return 1.0 - total


def terzaghi_excess_pore_pressure(z_over_h, tv, terms: int = 200):
    """Terzaghi (1925) isochrone u/u0 at Z = z/H_dr (z from a drained face):
    Σ 2/M sin(M Z) exp(−M² Tv), M = π(2m+1)/2."""
    z = np.asarray(z_over_h, dtype=float)
    total = np.zeros(np.broadcast(z, np.asarray(tv)).shape)
    for m in range(terms):
        big_m = np.pi * (2 * m + 1) / 2.0
        total = total + 2.0 / big_m * np.sin(big_m * z) * np.exp(-big_m**2 * np.asarray(tv))
    return total


def coverage(geom, spec):
    """Covered fraction of every cell: one shapely intersection per cell over the grid."""
    out = spec.zeros()
    for j in range(spec.ny):
        for i in range(spec.nx):
            x0, y0 = spec.x0 + i * spec.dx, spec.y0 + j * spec.dy
            out[j, i] = shapely.box(x0, y0, x0 + spec.dx, y0 + spec.dy).intersection(geom).area
    return out / spec.cell_area


def slice_stress(grid, da, method="boussinesq", poisson=None):
    """Δσz (kPa) at every node of a slice DataArray (depth, y, x), point by point."""
    z, y, x = np.meshgrid(da["depth"].values, da["y"].values, da["x"].values, indexing="ij")
    pts = np.column_stack([x.ravel(), y.ravel(), z.ravel()])
    return grid_stress(grid.pressure, grid.x0, grid.y0, grid.dx, grid.dy, pts, method,
                       poisson).reshape(z.shape)


def _row_samples(spec, j, samples):
    offs = (np.arange(samples) + 0.5) / samples
    xs = spec.x0 + (np.arange(spec.nx)[:, None] + offs[None, :]).ravel() * spec.dx
    ys = spec.y0 + (j + offs) * spec.dy
    return np.meshgrid(xs, ys, indexing="xy")  # (samples, nx*samples)


def fill_from_surfaces(design, existing, spec, cut="ignore", samples=4, tolerance=0.0):
    """Fill between two surfaces sampled on every cell of the lattice, row by row (the
    full-lattice evaluation the fast path replaces): (thickness, CutReport fields)."""
    noise = max(tolerance, 1e-9)
    thickness = spec.zeros()
    sums = np.zeros(5)  # fill volume, cut volume, fill count, cut count, compared count
    sub_area = spec.cell_area / samples**2
    design_only, missing_at = 0, None
    for j in range(spec.ny):
        x, y = _row_samples(spec, j, samples)
        top, base = design.sample(x, y), existing(x, y)
        diff = top - base
        valid = np.isfinite(diff)
        gap = np.isfinite(top) & ~np.isfinite(base)
        if gap.any():
            design_only += gap.sum()
            missing_at = missing_at or (float(x[gap][0]), float(y[gap][0]))
        diff = np.where(valid, diff, 0.0)
        diff[np.abs(diff) < noise] = 0.0
        load = diff if cut == "unload" else np.maximum(diff, 0.0)
        thickness[j] = load.reshape(samples, spec.nx, samples).mean(axis=(0, 2))
        sums += [np.maximum(diff, 0).sum() * sub_area, np.maximum(-diff, 0).sum() * sub_area,
                 (diff > 0).sum(), (diff < 0).sum(), valid.sum()]
    return thickness, {"volume_fill": sums[0], "volume_cut": sums[1],
                       "area_fill": sums[2] * sub_area, "area_cut": sums[3] * sub_area,
                       "area_compared": sums[4] * sub_area,
                       "area_design_only": design_only * sub_area, "missing_at": missing_at}


def resample_to_grid(surface, spec, samples=4):
    """Cell mean of a surface over its valid samples, every cell sampled (NaN: none)."""
    out = np.full(spec.shape, np.nan)
    for j in range(spec.ny):
        x, y = _row_samples(spec, j, samples)
        z = surface.sample(x, y).reshape(samples, spec.nx, samples)
        n = np.isfinite(z).sum(axis=(0, 2))
        total = np.where(np.isfinite(z), z, 0.0).sum(axis=(0, 2))
        out[j] = np.where(n > 0, total / np.maximum(n, 1), np.nan)
    return out
