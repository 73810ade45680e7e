"""Δσz on plan slices by FFT convolution — exact, not an approximation.

On a lattice of sample points with the grid's own spacing, the offset from a sample
to a cell depends only on the difference of their indices, so

    Δσz[l, k] = Σ_cells p[j, i] · G[l − j, k − i]

where G is the influence of one unit cell at every possible cell offset, evaluated
with the closed-form corner function (G is the 2-D second difference of F on the
node lattice).  That discrete sum is a linear convolution, which the FFT computes
exactly up to round-off once both arrays are zero-padded to at least the kernel
length (no wrap-around reaches the samples kept).  Nothing is truncated or fitted.
"""
from __future__ import annotations

import math

import numba
import numpy as np
import scipy.fft
import xarray as xr

from .._validate import depths_array, finite, finite_array, positive
from ..errors import InputError
from ..kernels import boussinesq, corner_angle, resolve_method
from .direct import _checked_grid

INV_2PI = boussinesq.INV_2PI


@numba.njit(parallel=True, cache=True)
def _unit_cell_kernel(a_nodes, b_nodes, z, depth_scale, second_term):
    """Unit-cell influence G[j, i] = F(a_i+1, b_j+1) − F(a_i, b_j+1) − F(a_i+1, b_j) + F(a_i, b_j)
    from the corner function F evaluated once on the node lattice (a_i, b_j)."""
    z = abs(z)
    c = depth_scale * z
    inv_c = 1.0 / c if c > 0.0 else math.inf
    na, nb = a_nodes.size, b_nodes.size
    a_sq = np.empty(na)
    a_cross = np.empty(na)
    for i in range(na):
        a_sq[i] = a_nodes[i] * a_nodes[i] + c * c
        a_cross[i] = second_term * boussinesq.cross_ratio(a_nodes[i], z)
    corner = np.empty((nb, na))
    for j in numba.prange(nb):
        b = b_nodes[j]
        b_cross = second_term * boussinesq.cross_ratio(b, z)
        for i in range(na):
            inv_r = 1.0 / max(math.sqrt(a_sq[i] + b * b), 1e-300)  # r = 0 only if a = b = 0
            corner[j, i] = INV_2PI * (corner_angle(a_nodes[i] * (b * inv_r), c, inv_c)
                                      + (b * a_cross[i] + a_nodes[i] * b_cross) * inv_r)
    cell = np.empty((nb - 1, na - 1))
    for j in numba.prange(nb - 1):
        for i in range(na - 1):
            cell[j, i] = (corner[j + 1, i + 1] - corner[j + 1, i]
                          - corner[j, i + 1] + corner[j, i])
    return cell


class SlicePlan:
    """Everything about a slice that does not depend on depth: the pressure spectrum,
    FFT sizes and node offsets.  Build one plan and call :meth:`at_depth` per depth.

    The sample lattice has ``ny + 2·pad_y`` rows and ``nx + 2·pad_x`` columns; sample
    (l, k) sits at ``((k − pad_x + 0.5)·dx + ox, (l − pad_y + 0.5)·dy + oy)`` relative to
    the south-west corner of the pressure grid.  Arguments are as for
    :func:`slice_at_depth` and are validated here.

    Examples
    --------
    >>> plan = SlicePlan([[10.0, 10.0], [10.0, 10.0]], 1.0, 1.0, pad_cells=(1, 0))
    >>> plan.shape_out, plan.at_depth(0.0).round(9).tolist()
    ((2, 4), [[0.0, 10.0, 10.0, 0.0], [0.0, 10.0, 10.0, 0.0]])
    """

    def __init__(self, pressure, dx, dy, method="boussinesq", poisson=None, *,
                 offset=(0.0, 0.0), pad_cells=(0, 0), workers=None):
        pressure = finite_array(pressure, "pressure", ndim=2)
        if pressure.size == 0:
            raise InputError("must have at least one cell", argument="pressure")
        dx, dy = positive(dx, "dx"), positive(dy, "dy")
        offset = _offset(offset)
        pad_x, pad_y = _pad_cells(pad_cells)
        workers = _workers(workers)
        spec = resolve_method(method, poisson)
        ny, nx = pressure.shape
        self.spec, self.workers, self.shape_in = spec, workers, (ny, nx)
        self.shape_out = (ny + 2 * pad_y, nx + 2 * pad_x)
        my, mx = self.shape_out
        # kernel length nx + mx - 1; an FFT at least that long keeps wrap-around off the samples
        self.fft_shape = (scipy.fft.next_fast_len(ny + my - 1, real=True),
                          scipy.fft.next_fast_len(nx + mx - 1, real=True))
        self.pressure_hat = scipy.fft.rfftn(pressure, s=self.fft_shape, workers=workers)
        # node offsets from the sample, listed in decreasing order so that the second
        # difference of F is directly the convolution kernel (no flip needed)
        self.a_nodes = (pad_x + nx - 0.5 - np.arange(nx + mx)) * dx - offset[0]
        self.b_nodes = (pad_y + ny - 0.5 - np.arange(ny + my)) * dy - offset[1]

    def at_depth(self, depth: float) -> np.ndarray:
        """Δσz (kPa) on the sample lattice at one depth (m, >= 0)."""
        depth = finite(depth, "depth")
        if depth < 0:
            raise InputError(f"must be >= 0 below the ground surface, got {depth!r}",
                             argument="depth")
        kernel = _unit_cell_kernel(self.a_nodes, self.b_nodes, depth,
                                   self.spec.depth_scale, self.spec.second_term)
        spectrum = scipy.fft.rfftn(kernel, s=self.fft_shape, workers=self.workers)
        del kernel
        spectrum *= self.pressure_hat
        full = scipy.fft.irfftn(spectrum, s=self.fft_shape, workers=self.workers)
        del spectrum
        ny, nx = self.shape_in
        my, mx = self.shape_out
        return full[ny - 1:ny - 1 + my, nx - 1:nx - 1 + mx].copy()


def _offset(offset) -> tuple[float, float]:
    arr = finite_array(offset, "offset")
    if arr.shape != (2,):
        raise InputError(f"must be (ox, oy) in metres, got shape {arr.shape}", argument="offset")
    return float(arr[0]), float(arr[1])


def _workers(workers):
    if workers is None:
        return None
    if isinstance(workers, bool) or not isinstance(workers, (int, np.integer)) or workers < 1:
        raise InputError(f"must be None or a positive number of threads, got {workers!r}",
                         argument="workers")
    return int(workers)


def _pad_cells(pad_cells) -> tuple[int, int]:
    try:
        px, py = pad_cells
    except (TypeError, ValueError):
        raise InputError(f"must be (pad_x, pad_y) whole cells, got {pad_cells!r}",
                         argument="pad_cells") from None
    for v in (px, py):
        if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < 0:
            raise InputError(f"must be whole numbers of cells >= 0, got {pad_cells!r}",
                             argument="pad_cells")
    return int(px), int(py)


def slice_at_depth(pressure, dx, dy, depth, method="boussinesq", poisson=None, *,
                   offset=(0.0, 0.0), pad_cells=(0, 0), workers=None) -> np.ndarray:
    """Δσz (kPa) at one depth on the cell-centre lattice of a pressure array.

    Parameters
    ----------
    pressure : array_like, shape (ny, nx)
        Cell pressures (kPa), row 0 south.
    dx, dy : float
        Cell size (m).
    depth : float
        Depth (m, >= 0); 0 gives the surface limit (q inside, q/2 on an edge, ...).
    method, poisson
        As for :func:`fillstress.solve.vertical_stress`.
    offset : (float, float)
        Shift (m) of every sample from the cell centres.
    pad_cells : (int, int)
        Extra sample columns (x) and rows (y) on each side of the grid.
    workers : int, optional
        Threads for scipy.fft.

    Returns
    -------
    numpy.ndarray, shape (ny + 2·pad_y, nx + 2·pad_x)
        Sample (l, k) lies at ``((k − pad_x + 0.5)·dx + ox, (l − pad_y + 0.5)·dy + oy)``
        from the grid's south-west corner.

    Examples
    --------
    >>> slice_at_depth([[100.0, 100.0]], 1.0, 1.0, 0.0, offset=(0.5, 0.0)).round(9).tolist()
    [[100.0, 50.0]]
    """
    plan = SlicePlan(pressure, dx, dy, method, poisson, offset=offset, pad_cells=pad_cells,
                     workers=workers)
    return plan.at_depth(depth)


def stress_slices(grid, depths, method="boussinesq", poisson=None, *, offset=(0.0, 0.0),
                  pad=0.0, workers=None) -> xr.DataArray:
    """Δσz (kPa) on plan slices at several depths, exact to round-off.

    Parameters
    ----------
    grid : LoadGrid
        Surface pressure per cell (kPa).
    depths : float or sequence of float
        Depths (m, >= 0).
    method, poisson
        As for :func:`fillstress.solve.vertical_stress`.
    offset : (float, float)
        Shift (m) of every sample point from the cell centres (sub-cell shifts are the
        usual use; any shift is exact).
    pad : float
        Extend the sample lattice this far (m) beyond the grid on every side, rounded
        up to whole cells.
    workers : int, optional
        Threads for scipy.fft.

    Returns
    -------
    xarray.DataArray
        Dims ("depth", "y", "x"); coordinates in m (cell centres + offset), attrs
        ``units="kPa"``, ``long_name``, ``method``, ``poisson``.  Depths are
        processed one at a time, so the peak memory is the output plus a few arrays
        of the padded FFT size.

    Examples
    --------
    >>> from fillstress import LoadGrid
    >>> g = LoadGrid([[50.0]], x0=10.0, y0=20.0, dx=2.0, dy=2.0)
    >>> s = stress_slices(g, [0.0, 1.0], pad=2.0)
    >>> s.dims, s.shape, float(s.x[0]), round(float(s.sel(depth=0.0, x=11.0, y=21.0)), 9)
    (('depth', 'y', 'x'), (2, 3, 3), 9.0, 50.0)
    """
    grid = _checked_grid(grid)
    z = depths_array(depths)
    spec = resolve_method(method, poisson)
    ox, oy = _offset(offset)
    workers = _workers(workers)
    pad = finite(pad, "pad")
    if pad < 0:
        raise InputError(f"must be >= 0 m, got {pad!r}", argument="pad")
    pad_x = int(math.ceil(round(pad / grid.dx, 9)))
    pad_y = int(math.ceil(round(pad / grid.dy, 9)))
    plan = SlicePlan(grid.pressure, grid.dx, grid.dy, method, poisson, offset=(ox, oy),
                     pad_cells=(pad_x, pad_y), workers=workers)
    my, mx = plan.shape_out
    values = np.empty((z.size, my, mx))
    for k, depth in enumerate(z):
        values[k] = plan.at_depth(depth)
    x = grid.x0 + (np.arange(mx) - pad_x + 0.5) * grid.dx + ox
    y = grid.y0 + (np.arange(my) - pad_y + 0.5) * grid.dy + oy
    attrs = {"units": "kPa", "long_name": "vertical stress increase (delta sigma z)",
             "method": spec.method,
             "poisson": spec.poisson if spec.poisson is not None else "not used"}
    return xr.DataArray(values, dims=("depth", "y", "x"),
                        coords={"depth": ("depth", z, {"units": "m"}),
                                "y": ("y", y, {"units": "m"}), "x": ("x", x, {"units": "m"})},
                        name="dsz", attrs=attrs)
