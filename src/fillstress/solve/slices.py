"""Δσz on plan slices by FFT convolution — exact, not an approximation.

On a lattice of sample points with the grid's own spacing, the offset from a sample
to a cell depends only on the difference of their indices, so

    Δσz[l, k] = Σ_cells p[j, i] · G[l − j, k − i]

where G is the influence of one unit cell at every possible cell offset, evaluated
with the closed-form corner function (G is the 2-D second difference of F on the
node lattice).  That discrete sum is a linear convolution, which the FFT computes
exactly up to round-off once both arrays are zero-padded to at least the kernel
length (no wrap-around reaches the samples kept).  Nothing is truncated or fitted.

On cell centres G is even about its centre cell; re-centred on the sample its transform
is real, the type-I DCT of one quarter of it (:meth:`SlicePlan.kernel_spectrum`), and the
pressure placed at the centre cell keeps the samples where they were.
"""
from __future__ import annotations

import math

import numba
import numpy as np
import scipy.fft
import xarray as xr

from .._validate import depths_array, finite, finite_array, positive
from ..errors import InputError
from ..kernels import resolve_method
from ..kernels.corner import INV_2PI, corner_sum, cross_ratio, inverse_depth
from .._validate import whole_pair
from ._checks import checked_grid, compiled_threads, fft_workers, offset_pair
from .cost import fft_length


@numba.njit(parallel=True, cache=True)
def _corners(a_nodes, b_nodes, z, c, inv_c, second_term, na_eval, nb_eval):
    """F(a_i, b_j) on the first `na_eval` × `nb_eval` nodes."""
    a_sq = np.empty(na_eval)
    a_cross = np.empty(na_eval)
    for i in range(na_eval):
        a_sq[i] = a_nodes[i] * a_nodes[i] + c * c
        a_cross[i] = second_term * cross_ratio(a_nodes[i], z)
    corner = np.empty((nb_eval, na_eval))
    for j in numba.prange(nb_eval):
        b = b_nodes[j]
        b_cross = second_term * cross_ratio(b, z)
        for i in range(na_eval):
            corner[j, i] = INV_2PI * corner_sum(a_nodes[i], b, c, a_sq[i] + b * b, inv_c,
                                                a_cross[i], b_cross)
    return corner


@numba.njit(cache=True)
def _mirrored(corner, node_j, node_i, nb, na):
    """F at node (node_j, node_i) from the evaluated part: beyond it, the negated mirror
    node."""
    # signed: a prange index may come unsigned, and unsigned minus signed is a float
    row, col, sign = np.intp(node_j), np.intp(node_i), 1.0
    if row >= corner.shape[0]:
        row = nb - 1 - row
        sign = -sign
    if col >= corner.shape[1]:
        col = na - 1 - col
        sign = -sign
    return sign * corner[row, col]


@numba.njit(cache=True)
def _second_difference(corner, j, i, nb, na):
    """G[j, i] from the corner function's evaluated part (:func:`_mirrored`)."""
    return (_mirrored(corner, j + 1, i + 1, nb, na) - _mirrored(corner, j + 1, i, nb, na)
            - _mirrored(corner, j, i + 1, nb, na) + _mirrored(corner, j, i, nb, na))


@numba.njit(parallel=True, cache=True)
def _unit_cell_kernel(a_nodes, b_nodes, z, depth_scale, second_term, a_paired, b_paired,
                      rows, cols):
    """Unit-cell influence G[j, i] = F(a_i+1, b_j+1) − F(a_i, b_j+1) − F(a_i+1, b_j) + F(a_i, b_j)
    from the corner function F evaluated once on the node lattice (a_i, b_j), zero-padded
    to `rows` × `cols` (at least (nb − 1) × (na − 1): the FFT's input, so no copy pads it).

    F is odd in a and in b (in floating point too: every term changes sign exactly), so
    along an axis whose nodes come in ± pairs (`a_paired`: a[na − 1 − i] == −a[i], the
    sample on a cell centre with symmetric padding) F is evaluated on the first half of
    the nodes and G, even there, on the first half of the cells, the rest mirrored: the
    full evaluation's floats but for the order of G's four terms.
    """
    z = abs(z)
    c = depth_scale * z
    inv_c = inverse_depth(c)
    na, nb = a_nodes.size, b_nodes.size
    corner = _corners(a_nodes, b_nodes, z, c, inv_c, second_term,
                      (na + 1) // 2 if a_paired else na, (nb + 1) // 2 if b_paired else nb)
    ma, mb = na - 1, nb - 1
    ma_eval = (ma + 1) // 2 if a_paired else ma
    mb_eval = (mb + 1) // 2 if b_paired else mb
    cell = np.zeros((rows, cols))
    for j in numba.prange(mb_eval):
        for i in range(ma_eval):
            cell[j, i] = _second_difference(corner, j, i, nb, na)
        for i in range(ma - ma_eval):
            cell[j, ma - 1 - i] = cell[j, i]
    for j in numba.prange(mb - mb_eval):
        for i in range(ma):
            cell[mb - 1 - j, i] = cell[j, i]
    return cell


@numba.njit(parallel=True, cache=True)
def _centred_kernel(a_nodes, b_nodes, z, depth_scale, second_term, rows, cols):
    """The unit-cell kernel of ± paired nodes on both axes, re-centred on the sample:
    ``Q[t, s] = G[cb + t, ca + s]`` at the cell offsets t, s >= 0 (G is even about its
    centre cell (cb, ca), so this quarter is all of it), zero beyond up to `rows` × `cols`.
    The floats are those of :func:`_unit_cell_kernel` (the same evaluated half)."""
    z = abs(z)
    c = depth_scale * z
    inv_c = inverse_depth(c)
    na, nb = a_nodes.size, b_nodes.size
    corner = _corners(a_nodes, b_nodes, z, c, inv_c, second_term, (na + 1) // 2, (nb + 1) // 2)
    ca, cb = (na - 2) // 2, (nb - 2) // 2     # kernel lengths na − 1 = 2·ca + 1, nb − 1
    quarter = np.zeros((rows, cols))
    for t in numba.prange(cb + 1):
        j = cb - np.intp(t)          # signed: a prange index may come unsigned
        for s in range(ca + 1):
            quarter[t, s] = _second_difference(corner, j, ca - s, nb, na)
    return quarter


@numba.njit(parallel=True, cache=True)
def _times_even(spectrum, even, out):
    """``out[k] = spectrum[k] · R[k]`` for a real R even along axis 0 (R[L − k] = R[k],
    L = spectrum.shape[0]), given by its rows 0 … L/2 (`even`)."""
    rows, cols = spectrum.shape
    for k in numba.prange(rows):
        r = np.intp(k) if k < even.shape[0] else rows - np.intp(k)
        for i in range(cols):
            v = spectrum[k, i]
            w = even[r, i]
            out[k, i] = complex(v.real * w, v.imag * w)


def paired_nodes(nodes: np.ndarray) -> bool:
    """True when the nodes come in ± pairs, ``nodes[n − 1 − i] == −nodes[i]`` exactly
    (what lets :func:`_unit_cell_kernel` mirror the corner function).

    Examples
    --------
    >>> paired_nodes(np.array([1.5, 0.5, -0.5, -1.5])), paired_nodes(np.array([1.0, -0.5]))
    (True, False)
    """
    return bool(np.array_equal(nodes, -nodes[::-1]))


def distinct_loads(pressures) -> tuple[list, list[int]]:
    """The distinct arrays of `pressures` (equal arrays once, in first-seen order) and
    for each input the index of its distinct array.

    Examples
    --------
    >>> distinct, index = distinct_loads([np.ones(2), np.zeros(2), np.ones(2)])
    >>> len(distinct), index
    (2, [0, 1, 0])
    """
    distinct, index = [], []
    for p in pressures:
        k = next((k for k, d in enumerate(distinct) if np.array_equal(d, p)), len(distinct))
        if k == len(distinct):
            distinct.append(p)
        index.append(k)
    return distinct, index


class SlicePlan:
    """Everything about a slice that does not depend on depth: the pressure spectrum,
    FFT sizes and node offsets.  Build one plan and call :meth:`at_depth` per depth (or
    :meth:`at_depths` for several).

    The sample lattice has ``ny + 2·pad_y`` rows and ``nx + 2·pad_x`` columns; sample
    (l, k) sits at ``((k − pad_x + 0.5)·dx + ox, (l − pad_y + 0.5)·dy + oy)`` relative to
    the south-west corner of the pressure grid.  Arguments are as for
    :func:`slice_at_depth` and are validated here; `pressure` may also be a stack
    (E, ny, nx) of loads on the same cells: the unit-cell kernel and its transform depend
    only on the depth and the lattice, so each depth computes them once for all E loads
    (E pressure spectra are kept: ``cost.fft_working_bytes(..., loads=E)``).

    Examples
    --------
    >>> plan = SlicePlan([[10.0, 10.0], [10.0, 10.0]], 1.0, 1.0, pad_cells=(1, 0))
    >>> plan.shape_out, plan.at_depth(0.0).round(9).tolist()
    ((2, 4), [[0.0, 10.0, 10.0, 0.0], [0.0, 10.0, 10.0, 0.0]])
    >>> SlicePlan(np.ones((3, 2, 2)), 1.0, 1.0).at_depth(1.0).shape     # three loads
    (3, 2, 2)
    """

    def __init__(self, pressure, dx, dy, method="boussinesq", poisson=None, *,
                 offset=(0.0, 0.0), pad_cells=(0, 0), workers=None):
        pressure = finite_array(pressure, "pressure", ndim=3 if np.ndim(pressure) == 3 else 2)
        if pressure.size == 0:
            raise InputError("must have at least one cell", argument="pressure")
        dx, dy = positive(dx, "dx"), positive(dy, "dy")
        offset = offset_pair(offset)
        pad_x, pad_y = whole_pair(pad_cells, "pad_cells", meaning="(pad_x, pad_y) whole cells >= 0")
        spec = resolve_method(method, poisson)
        ny, nx = pressure.shape[-2:]
        self.spec, self.shape_in = spec, (ny, nx)
        self.shape_out = (ny + 2 * pad_y, nx + 2 * pad_x)
        my, mx = self.shape_out
        # kernel length nx + mx - 1; an FFT at least that long keeps wrap-around off the samples
        self.fft_shape = (fft_length(ny + my - 1), fft_length(nx + mx - 1))
        self.workers = workers = fft_workers(workers, size=math.prod(self.fft_shape))
        # node offsets from the sample, listed in decreasing order so that the second
        # difference of F is directly the convolution kernel (no flip needed)
        self.a_nodes = (pad_x + nx - 0.5 - np.arange(nx + mx)) * dx - offset[0]
        self.b_nodes = (pad_y + ny - 0.5 - np.arange(ny + my)) * dy - offset[1]
        self.paired = (paired_nodes(self.a_nodes), paired_nodes(self.b_nodes))
        # paired on both axes, the kernel is even about its centre cell (ny + pad_y − 1,
        # nx + pad_x − 1): re-centred on index 0 its transform is real (kernel_spectrum),
        # and the pressure placed that many cells later keeps the samples where they were
        self.centred = all(self.paired)
        shift = (ny + pad_y - 1, nx + pad_x - 1) if self.centred else (0, 0)
        self.pressure_hat = _padded_spectrum(pressure, shift, self.fft_shape, workers)

    def kernel_spectrum(self, depth: float) -> np.ndarray:
        """The transform of the unit-cell kernel at one depth (m, >= 0): complex, in the
        layout of :attr:`pressure_hat`; for a :attr:`centred` plan real, the transform of
        the re-centred kernel on rows 0 … fy/2 (the rest mirror them: row fy − k is row k).

        The re-centred kernel is real and even about index 0 on both axes, so its
        transform is the type-I DCT of its quarter at offsets 0 … f/2 (zero beyond the
        kernel: f is even and longer than it): a quarter of the kernel evaluated and
        transformed, none of it mirrored."""
        depth = finite(depth, "depth")
        if depth < 0:
            raise InputError(f"must be >= 0 below the ground surface, got {depth!r}",
                             argument="depth")
        fy, fx = self.fft_shape
        with compiled_threads(self.workers):
            if self.centred:
                quarter = _centred_kernel(self.a_nodes, self.b_nodes, depth,
                                          self.spec.depth_scale, self.spec.second_term,
                                          fy // 2 + 1, fx // 2 + 1)
                return scipy.fft.dctn(quarter, type=1, overwrite_x=True, workers=self.workers)
            kernel = _unit_cell_kernel(self.a_nodes, self.b_nodes, depth, self.spec.depth_scale,
                                       self.spec.second_term, *self.paired, fy, fx)
        return scipy.fft.rfftn(kernel, workers=self.workers)

    def at_depth(self, depth: float, window=(slice(None), slice(None))) -> np.ndarray:
        """Δσz (kPa) on the sample lattice at one depth (m, >= 0): shape (my, mx), or
        (E, my, mx) for a stack of loads; `window` (rows, columns of the lattice, slices)
        keeps part of it."""
        return self.at_depths([depth], window)[..., 0, :, :]

    def at_depths(self, depths, window=(slice(None), slice(None))) -> np.ndarray:
        """Δσz (kPa) at each of `depths` (m, >= 0), cut to `window` as :meth:`at_depth`:
        shape (K, my, mx), or (E, K, my, mx) for a stack of loads.  One product array
        serves every depth and load (a fresh array of that size costs its page faults).

        Examples
        --------
        >>> SlicePlan(np.ones((3, 2, 2)), 1.0, 1.0).at_depths([0.0, 1.0, 2.0]).shape
        (3, 3, 2, 2)
        """
        loads = self.pressure_hat.reshape((-1,) + self.pressure_hat.shape[-2:])
        rows, cols = (np.arange(n)[cut] for n, cut in zip(self.shape_out, window))
        out = np.empty((len(loads), len(depths), rows.size, cols.size))
        # a single load of a full kernel spectrum multiplies that in place
        alone = len(loads) == 1 and not self.centred
        product = None
        for k, depth in enumerate(depths):
            spectrum = self.kernel_spectrum(depth)
            if alone:
                product = spectrum
            elif product is None:
                product = np.empty_like(loads[0])
            for e, load in enumerate(loads):
                if self.centred:
                    with compiled_threads(self.workers):
                        _times_even(load, spectrum, product)
                else:
                    np.multiply(spectrum, load, out=product)
                out[e, k] = self._inverse(product, window)
        return out if self.pressure_hat.ndim == 3 else out[0]

    def _inverse(self, product: np.ndarray, window) -> np.ndarray:
        """The samples `window` of the inverse transform of `product` (overwritten): along
        y for every column, then along x for the rows kept only (scipy's irfftn would
        transform every row, and more slowly)."""
        ny, nx = self.shape_in
        my, mx = self.shape_out
        rows, cols = window
        along_y = scipy.fft.ifft(product, axis=0, overwrite_x=True, workers=self.workers)
        kept = along_y[ny - 1:ny - 1 + my][rows]
        full = scipy.fft.irfft(kept, n=self.fft_shape[1], axis=1, workers=self.workers)
        return full[:, nx - 1:nx - 1 + mx][:, cols]


def _padded_spectrum(pressure, shift, fft_shape, workers) -> np.ndarray:
    """rfft over the last two axes of `pressure` placed `shift` (rows, columns) into zeros
    of `fft_shape`, one load at a time through one padded array."""
    (sy, sx), (ny, nx) = shift, pressure.shape[-2:]
    loads = pressure.reshape((-1, ny, nx))
    placed = np.zeros(fft_shape)
    spectra = np.empty((len(loads), fft_shape[0], fft_shape[1] // 2 + 1), dtype=complex)
    for e, load in enumerate(loads):
        placed[sy:sy + ny, sx:sx + nx] = load
        spectra[e] = scipy.fft.rfft2(placed, workers=workers)
    return spectra.reshape(pressure.shape[:-2] + spectra.shape[1:])


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
    method : {"boussinesq", "westergaard"}
        Stress distribution (as for :func:`fillstress.solve.vertical_stress`).
    poisson : float, optional
        Poisson's ratio for Westergaard (default 0); None for Boussinesq.
    offset : (float, float)
        Shift (m) of every sample from the cell centres.
    pad_cells : (int, int)
        Extra sample columns (x) and rows (y) on each side of the grid.
    workers : int, optional
        Threads for scipy.fft (default: the cores this process may run on, for large
        transforms; the values do not depend on it).

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
    method : {"boussinesq", "westergaard"}
        Stress distribution (as for :func:`fillstress.solve.vertical_stress`).
    poisson : float, optional
        Poisson's ratio for Westergaard (default 0); None for Boussinesq.
    offset : (float, float)
        Shift (m) of every sample point from the cell centres (sub-cell shifts are the
        usual use; any shift is exact).
    pad : float
        Extend the sample lattice this far (m) beyond the grid on every side, rounded
        up to whole cells.
    workers : int, optional
        Threads for scipy.fft (default: the cores this process may run on, for large
        transforms; the values do not depend on it).

    Returns
    -------
    xarray.DataArray
        Dims ("depth", "y", "x"); coordinates in m (cell centres + offset), attrs
        ``units="kPa"``, ``long_name``, ``method``, ``poisson``; with ``grid.crs`` a
        ``spatial_ref`` grid mapping of that CRS (a site's load grid carries the metre
        form of the site CRS; ``RunResults.plan_grid`` gives a run's slices in site
        units). Depths are processed one at a time, so the peak memory is the output
        plus a few arrays of the padded FFT size.

    Examples
    --------
    >>> from fillstress import LoadGrid
    >>> g = LoadGrid([[50.0]], x0=10.0, y0=20.0, dx=2.0, dy=2.0)
    >>> s = stress_slices(g, [0.0, 1.0], pad=2.0)
    >>> s.dims, s.shape, float(s.x[0]), round(float(s.sel(depth=0.0, x=11.0, y=21.0)), 9)
    (('depth', 'y', 'x'), (2, 3, 3), 9.0, 50.0)
    """
    grid, frame = slice_setup(grid, depths, method, poisson, offset=offset, pad=pad)
    plan = SlicePlan(grid.pressure, grid.dx, grid.dy, method, poisson, offset=frame["offset"],
                     pad_cells=frame["pad_cells"], workers=workers)
    return slice_array(plan.at_depths(frame["depth"]), frame)


class SliceStack:
    """Slices of several load grids on the cells of one lattice, depth after depth.

    Each distinct pressure is transformed once (when the stack is made) and every call
    of :meth:`slices` reuses the transforms; per depth one unit-cell kernel and one kernel
    transform serve every grid (:class:`SlicePlan` with a stack of loads).  Grids with
    equal pressures are computed once.  Arguments are as for :func:`stress_slices`; the
    grids must share their cells (shape, origin and size).

    Examples
    --------
    >>> from fillstress import LoadGrid
    >>> grids = [LoadGrid([[q]], x0=0.0, y0=0.0, dx=1.0, dy=1.0) for q in (10.0, 30.0)]
    >>> one, three = SliceStack(grids, pad=1.0).slices([0.0, 2.0])
    >>> one.dims, one.shape, bool(np.allclose(3 * one, three, rtol=1e-12))
    (('depth', 'y', 'x'), (2, 3, 3), True)
    """

    def __init__(self, grids, method="boussinesq", poisson=None, *, offset=(0.0, 0.0),
                 pad=0.0, workers=None):
        grids = [checked_grid(g) for g in grids]
        if not grids:
            raise InputError("must hold at least one load grid", argument="grids")
        first = grids[0]
        cells = [(g.shape, g.x0, g.y0, g.dx, g.dy) for g in grids]
        if any(c != cells[0] for c in cells):
            raise InputError("the load grids must share their cells (shape, origin, size)",
                             argument="grids")
        distinct, self.index = distinct_loads([g.pressure for g in grids])
        _, self.frame = slice_setup(first, [0.0], method, poisson, offset=offset, pad=pad)
        self.plan = SlicePlan(np.stack(distinct), first.dx, first.dy, method, poisson,
                              offset=self.frame["offset"], pad_cells=self.frame["pad_cells"],
                              workers=workers)

    def slices(self, depths, window=(slice(None), slice(None))) -> list[xr.DataArray]:
        """Δσz (kPa) of every grid at `depths`, one DataArray (depth, y, x) per grid as
        :func:`stress_slices` gives it, cut to `window` (rows and columns of the sample
        lattice, slices).  Grids with equal pressures share their values array."""
        z = depths_array(depths)
        rows, cols = window
        frame = {**self.frame, "depth": z, "y": self.frame["y"][rows], "x": self.frame["x"][cols]}
        values = self.plan.at_depths(z, window)
        return [slice_array(values[e], frame) for e in self.index]


def slice_lattice(grid, pad_cells, offset) -> tuple[np.ndarray, np.ndarray]:
    """x and y (m) of the slice samples: cell centres + offset, `pad_cells` beyond the grid.

    Examples
    --------
    >>> from fillstress import LoadGrid
    >>> x, y = slice_lattice(LoadGrid(np.ones((1, 2)), 10.0, 0.0, 1.0, 1.0), (1, 0), (0.25, 0.0))
    >>> x.tolist(), y.tolist()
    ([9.75, 10.75, 11.75, 12.75], [0.5])
    """
    pad_x, pad_y = pad_cells
    x = grid.x0 + (np.arange(grid.nx + 2 * pad_x) - pad_x + 0.5) * grid.dx + offset[0]
    y = grid.y0 + (np.arange(grid.ny + 2 * pad_y) - pad_y + 0.5) * grid.dy + offset[1]
    return x, y


def pad_cells(pad: float, dx: float, dy: float) -> tuple[int, int]:
    """Whole cells (x, y) that cover a padding of `pad` m: rounded up, except that a pad
    within round-off of a whole number of cells is that number.

    Examples
    --------
    >>> pad_cells(2.1, 0.3, 0.3), pad_cells(2.2, 0.3, 1.0)   # 2.1 / 0.3 = 7.000000000000001
    ((7, 7), (8, 3))
    """
    return (int(math.ceil(round(pad / dx, 9))), int(math.ceil(round(pad / dy, 9))))


def slice_setup(grid, depths, method="boussinesq", poisson=None, *, offset=(0.0, 0.0), pad=0.0):
    """Validate the arguments of a slice run (:func:`stress_slices` and its tiled and Dask
    variants) and lay out its sample lattice.

    Returns ``(grid, frame)`` where `frame` holds ``depth``, ``x``, ``y`` (sample
    coordinates, m), ``spec``, ``offset`` and ``pad_cells`` (`pad` rounded up to whole
    cells).

    Examples
    --------
    >>> from fillstress import LoadGrid
    >>> _, frame = slice_setup(LoadGrid(np.ones((2, 2)), 0, 0, 1, 1), [1.0], pad=1.0)
    >>> frame["x"].tolist(), frame["pad_cells"]
    ([-0.5, 0.5, 1.5, 2.5], (1, 1))
    """
    grid = checked_grid(grid)
    z = depths_array(depths)
    spec = resolve_method(method, poisson)
    ox, oy = offset_pair(offset)
    pad = finite(pad, "pad")
    if pad < 0:
        raise InputError(f"must be >= 0 m, got {pad!r}", argument="pad")
    cells = pad_cells(pad, grid.dx, grid.dy)
    x, y = slice_lattice(grid, cells, (ox, oy))
    return grid, {"depth": z, "y": y, "x": x, "spec": spec, "offset": (ox, oy),
                  "pad_cells": cells, "crs": grid.crs}


def slice_array(values: np.ndarray, frame) -> xr.DataArray:
    """Δσz values of shape (depth, y, x) as the DataArray :func:`stress_slices` returns,
    with the coordinates and attributes of `frame` (from :func:`slice_setup`).

    Examples
    --------
    >>> from fillstress import LoadGrid
    >>> _, frame = slice_setup(LoadGrid(np.ones((1, 1)), 0, 0, 1, 1), [2.0])
    >>> slice_array(np.zeros((1, 1, 1)), frame).attrs["units"]
    'kPa'
    """
    spec = frame["spec"]
    attrs = {"units": "kPa", "long_name": "vertical stress increase (delta sigma z)",
             "method": spec.method,
             "poisson": spec.poisson if spec.poisson is not None else "not used"}
    depth = {"units": "m", "standard_name": "depth", "long_name": "depth below the loaded "
             "surface", "positive": "down", "axis": "Z"}
    coords = {"depth": ("depth", frame["depth"], depth),
              "y": ("y", frame["y"], _plan_attrs("y")), "x": ("x", frame["x"], _plan_attrs("x"))}
    if frame.get("crs") is not None:        # CF grid mapping, as rioxarray reads it
        from ..crs import cf_grid_mapping
        coords["spatial_ref"] = ((), 0, cf_grid_mapping(frame["crs"]))
        attrs["grid_mapping"] = "spatial_ref"
    return xr.DataArray(values, dims=("depth", "y", "x"), coords=coords, name="dsz",
                        attrs=attrs)


def _plan_attrs(axis: str) -> dict:
    return {"units": "m", "standard_name": f"projection_{axis}_coordinate",
            "long_name": {"x": "easting", "y": "northing"}[axis], "axis": axis.upper()}
