"""Time and memory of a run, estimated from its sizes before anything is allocated.

Memory figures count the arrays the solvers allocate (numpy and numba), from their
shapes; time figures use throughputs measured on a 2-core development machine and are
meant for "seconds, minutes or hours", not for scheduling.  :func:`check_capacity`
raises :class:`~fillstress.errors.CapacityError` with the numbers when a run cannot fit.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import psutil

from .._validate import positive, whole_number, whole_pair
from ..errors import CapacityError, InputError

# Throughputs on the development machine (2 cores, both threads), common practice to
# keep such constants beside the code that uses them.  benchmarks/calibrate_cost.py
# measures each (the figures are in docs/performance.md, "## The run-time estimate").
CORNERS_PER_SECOND = 5.5e7       # node-kernel corner evaluations, direct summation
DIRECT_SETUP_SECONDS_PER_NODE = 2.0e-8  # a direct call's node weights and rows, per node
FAR_SECONDS_PER_POINT = 5.0e-5   # far-field walk at the default accuracy, per point below a fill
PYRAMID_SECONDS_PER_CELL = 2.0e-7  # a far-field call's block pyramid, per cell
FFT_FLOPS_PER_SECOND = 4.0e9     # scipy.fft real transforms, 5 n log2 n flops each
_FLOAT = 8
_COMPLEX = 16
_MIN_TILE = 16


@dataclass(frozen=True)
class Estimate:
    """What a run needs: peak bytes, seconds and a one-line description.

    Examples
    --------
    >>> e = Estimate("slices", 3 * 2**30, 12.0, "1000 × 1000 cells, 5 depths")
    >>> e.gigabytes
    3.2
    """

    operation: str
    bytes: int
    seconds: float
    detail: str

    @property
    def gigabytes(self) -> float:
        return round(self.bytes / 1e9, 1)

    def __str__(self) -> str:
        return f"{self.operation}: {format_bytes(self.bytes)}, about {self.seconds:.3g} s ({self.detail})"


#: Share of the machine's memory a run may use when no cap is given.
DEFAULT_CAP_FRACTION = 0.6


def memory_cap_bytes(gb: float | None = None) -> float:
    """Bytes a run may use: `gb` (10⁹ bytes) or 60 % of the machine's memory."""
    if gb is not None:
        return gb * 1e9
    return DEFAULT_CAP_FRACTION * psutil.virtual_memory().total


def format_bytes(n: float) -> str:
    """Bytes in decimal units with one decimal.

    Examples
    --------
    >>> format_bytes(31.2e9), format_bytes(2048), format_bytes(12)
    ('31.2 GB', '2.0 kB', '12 B')
    """
    for unit, size in (("PB", 1e15), ("TB", 1e12), ("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if n >= size:
            return f"{n / size:.1f} {unit}"
    return f"{int(n)} B"


def _shape(shape, name: str = "shape") -> tuple[int, int]:
    return whole_pair(shape, name, minimum=1, meaning="(ny, nx), whole numbers >= 1")


def _pad(pad_cells) -> tuple[int, int]:
    return whole_pair(pad_cells, "pad_cells", meaning="(pad_x, pad_y) whole cells >= 0")


def _fft_seconds(n: int) -> float:
    return 5.0 * n * math.log2(max(n, 2)) / FFT_FLOPS_PER_SECOND


def fft_length(n: int) -> int:
    """The slices' transform length for a kernel of n cells: the shortest even fast length
    of a real transform (scipy.fft.next_fast_len) >= n.  Even, because a kernel even about
    its centre then transforms as a type-I DCT of its half (solve.slices); scipy.fft is
    loaded on first use (reading a site needs none).

    Examples
    --------
    >>> fft_length(74), fft_length(75), fft_length(1)
    (80, 80, 2)
    """
    from scipy.fft import next_fast_len
    length = next_fast_len(n, real=True)
    while length % 2:
        length = next_fast_len(length + 1, real=True)
    return length


def fft_working_bytes(tile_shape, out_shape, loads: int = 1, centred: bool = False) -> int:
    """Peak bytes of one exact FFT slice of a (ny, nx) load array onto an (my, mx) lattice.

    Counts the pressure spectrum of each of `loads` loads sharing the kernel (a
    :class:`~fillstress.solve.slices.SlicePlan` of a stack of loads keeps them all), the
    node corner array and the unit-cell kernel, the kernel spectrum, a product spectrum
    (more than one load: the kernel spectrum is kept for the next), a transform
    temporary and the inverse transform.  `centred` (samples on the cell centres,
    ``SlicePlan.centred``): one product spectrum (or, making the pressure spectra, the
    transform's output), the padded pressure or the inverse transform, a quarter of the
    corner array, the kernel quarter and its real transform (in place).

    Examples
    --------
    >>> fft_working_bytes((100, 100), (100, 100)) > 0
    True
    >>> fft_working_bytes((100, 100), (100, 100), loads=3) > fft_working_bytes((100, 100), (100, 100))
    True
    >>> fft_working_bytes((100, 100), (100, 100), centred=True) < fft_working_bytes((100, 100), (100, 100))
    True
    """
    ny, nx = _shape(tile_shape, "tile_shape")
    my, mx = _shape(out_shape, "out_shape")
    loads = whole_number(loads, "loads", minimum=1)
    fy = fft_length(ny + my - 1)
    fx = fft_length(nx + mx - 1)
    spectrum = _COMPLEX * fy * (fx // 2 + 1)
    real = _FLOAT * fy * fx
    if centred:
        quarter = _FLOAT * (fy // 2 + 1) * (fx // 2 + 1)
        corners = _FLOAT * ((ny + my + 1) // 2) * ((nx + mx + 1) // 2)
        return (loads + 1) * spectrum + real + 2 * quarter + corners
    nodes = _FLOAT * (ny + my) * (nx + mx)
    return (loads + 2 + (loads > 1)) * spectrum + 2 * real + 2 * nodes


def _evaluated_corners(n: int, paired: bool) -> int:
    """Corner evaluations along one axis of n nodes: half of them when they come in ±
    pairs (solve.slices._unit_cell_kernel mirrors the rest)."""
    return (n + 1) // 2 if paired else n


def estimate_slices(shape, n_depths: int, *, pad_cells=(0, 0), tile=None, offset=(0.0, 0.0),
                    loads: int = 1, transforms: int | None = None,
                    kept: int | None = None) -> Estimate:
    """Estimate exact FFT slices of an (ny, nx) grid at `n_depths` depths.

    Parameters
    ----------
    shape : (int, int)
        Grid cells (ny, nx).
    n_depths : int
        Number of depths.
    pad_cells : (int, int)
        Extra sample columns and rows on each side (``pad_x, pad_y``).
    tile : (int, int), optional
        Tile size (ty, tx) in cells for :func:`fillstress.solve.tiled.tiled_slices`;
        None for one untiled transform.
    offset : (float, float)
        Shift of the samples from the cell centres; along an axis with none the corner
        function is evaluated on half the nodes (untiled).
    loads : int
        Load grids sharing each depth's kernel and its transform
        (:class:`~fillstress.solve.slices.SliceStack`, untiled): one inverse transform
        and one output each.
    transforms : int, optional
        Pressure transforms the call makes (default `loads`; 0 when a stack made earlier
        holds them).
    kept : int, optional
        Samples kept of each slice (a window of the lattice); default all of them.

    Examples
    --------
    >>> e = estimate_slices((1000, 1000), 5)
    >>> e.bytes > 5 * 1000 * 1000 * 8      # output plus the transforms
    True
    >>> estimate_slices((1000, 1000), 5, tile=(250, 250)).bytes < e.bytes
    True
    >>> estimate_slices((1000, 1000), 5, loads=2).seconds < 2 * e.seconds
    True
    """
    ny, nx = _shape(shape)
    n_depths = whole_number(n_depths, "n_depths", minimum=1)
    pad_x, pad_y = _pad(pad_cells)
    my, mx = ny + 2 * pad_y, nx + 2 * pad_x
    if tile is None:
        loads = whole_number(loads, "loads", minimum=1)
        transforms = loads if transforms is None else whole_number(transforms, "transforms")
        samples = my * mx if kept is None else whole_number(kept, "kept")
        output = _FLOAT * loads * n_depths * samples
        work = fft_working_bytes((ny, nx), (my, mx), loads, centred=offset == (0.0, 0.0))
        fy = fft_length(ny + my - 1)
        fx = fft_length(nx + mx - 1)
        ox, oy = offset
        # each depth also evaluates the corner function on the (ny+my) × (nx+mx) nodes
        corners = (_evaluated_corners(ny + my, oy == 0.0)
                   * _evaluated_corners(nx + mx, ox == 0.0))
        seconds = ((transforms + (1 + loads) * n_depths) * _fft_seconds(fy * fx)
                   + n_depths * corners / CORNERS_PER_SECOND)
        shared = f", {loads} loads sharing each kernel" if loads > 1 else ""
        return Estimate("slices", output + work, seconds,
                        f"{ny} × {nx} cells, {n_depths} depth(s){shared}, one transform of "
                        f"{fy} × {fx}")
    output = _FLOAT * n_depths * my * mx
    ty, tx = _shape(tile, "tile")
    pairs = math.ceil(ny / ty) * math.ceil(nx / tx) * math.ceil(my / ty) * math.ceil(mx / tx)
    fy = fft_length(2 * ty - 1)
    fx = fft_length(2 * tx - 1)
    work = fft_working_bytes((ty, tx), (ty, tx)) + _FLOAT * n_depths * ty * tx
    seconds = pairs * ((1 + 2 * n_depths) * _fft_seconds(fy * fx)
                       + n_depths * 4 * ty * tx / CORNERS_PER_SECOND)
    return Estimate("slices-tiled", output + work, seconds,
                    f"{ny} × {nx} cells, {n_depths} depth(s), tiles of {ty} × {tx}, "
                    f"at most {pairs} tile pairs")


def estimate_folded(torus, reach, n_depths: int, *, loads: int = 1,
                    transforms: int | None = None, samples: int = 1) -> Estimate:
    """Estimate Δσz at `samples` chosen samples by a folded convolution
    (:class:`~fillstress.solve.folded.FoldedSlices`) on a (Ly, Lx) `torus`, the corner
    function evaluated out to `reach` (y, x) cells, `loads` loads, at `n_depths` depths.

    Memory: a spectrum per load, the corner array, the folded kernel, its spectrum, a
    product spectrum and the inverse; the output of every load at every sample and depth.

    Examples
    --------
    >>> small = estimate_folded((512, 512), (300, 300), 10, samples=1000)
    >>> small.seconds < estimate_slices((1000, 1000), 10).seconds
    True
    """
    ly, lx = _shape(torus, "torus")
    ry, rx = _shape(reach, "reach")
    n_depths = whole_number(n_depths, "n_depths", minimum=1)
    loads = whole_number(loads, "loads", minimum=1)
    transforms = loads if transforms is None else whole_number(transforms, "transforms")
    spectrum = _COMPLEX * ly * (lx // 2 + 1)
    work = (loads + 2) * spectrum + 2 * _FLOAT * ly * lx + _FLOAT * (ry + 1) * (rx + 1)
    output = _FLOAT * loads * n_depths * whole_number(samples, "samples", minimum=1)
    seconds = ((transforms + (1 + loads) * n_depths) * _fft_seconds(ly * lx)
               + n_depths * (ry + 1) * (rx + 1) / CORNERS_PER_SECOND)
    return Estimate("slices-folded", output + work, seconds,
                    f"{samples} nodes, {n_depths} depth(s), {loads} load(s) on a folded "
                    f"torus of {ly} × {lx}")


def estimate_points(shape, n_points: int, *, algorithm: str = "direct", order: int = 4,
                    active_nodes: int | None = None, prepared: bool = False) -> Estimate:
    """Estimate one call of Δσz at `n_points` points below an (ny, nx) grid.

    The time includes what the call prepares before its points (the node weights of
    direct summation, the block pyramid of the far field), unless `prepared` (a later
    call of a ``solve.auto.PointSolver`` on the same grid).  ``algorithm="direct"``
    counts `active_nodes` corner evaluations a point — the grid
    nodes with a non-zero weight, when the caller knows them (``solve.auto.direct_work``
    counts them) — or every grid node (an upper bound: nodes inside uniform fill are
    skipped); ``"far"`` the block pyramid and a per-point walk.

    Examples
    --------
    >>> d = estimate_points((1000, 1000), 100_000, algorithm="direct")
    >>> f = estimate_points((1000, 1000), 100_000, algorithm="far")
    >>> d.seconds > 100 * f.seconds
    True
    """
    ny, nx = _shape(shape)
    n_points = whole_number(n_points, "n_points")
    cells, nodes = ny * nx, (ny + 1) * (nx + 1)
    point_arrays = n_points * (3 + 1 + 1) * _FLOAT
    if algorithm == "direct":
        # node weights, padded pressure, compressed rows (int64 column + float value)
        memory = _FLOAT * nodes + _FLOAT * (ny + 2) * (nx + 2) + 16 * nodes + point_arrays
        evaluated = nodes if active_nodes is None else whole_number(active_nodes, "active_nodes")
        seconds = direct_seconds(n_points * evaluated, nodes, prepared=prepared)
        return Estimate("points-direct", memory, seconds,
                        f"{cells} cells, {n_points} points, direct summation")
    if algorithm == "far":
        from .farfield import BOUND_ORDERS, pyramid_blocks   # numba: only when priced
        kept = order + BOUND_ORDERS   # moments and terms kept for the bound as well
        n_mom = (kept + 1) * (kept + 2) // 2
        n_terms = sum(n - 2 * m + 1 for n in range(kept + 1) for m in range(n // 2 + 1))
        blocks = pyramid_blocks(nx, ny)
        # level-0 boxes, masses and moments while building; blocks keep centre,
        # half-diagonal, mass, radial moment and weights; two levels of raw moments at a time
        build = cells * _FLOAT * (4 + 2 + 2 + n_mom)
        memory = build + blocks * _FLOAT * (5 + n_terms + n_mom) + point_arrays + n_points * 24
        seconds = far_seconds(cells, n_points, prepared=prepared)
        return Estimate("points-far", memory, seconds,
                        f"{cells} cells, {n_points} points, far-field order {order}")
    raise InputError(f"must be 'direct' or 'far', got {algorithm!r}", argument="algorithm")


def direct_seconds(work: int, nodes: int, *, prepared: bool = False) -> float:
    """Seconds of direct summation: `work` corner evaluations on a grid of `nodes` nodes
    (its node weights and rows included unless `prepared`)."""
    return work / CORNERS_PER_SECOND + (not prepared) * nodes * DIRECT_SETUP_SECONDS_PER_NODE


def far_seconds(cells: int, n_points: int, *, prepared: bool = False) -> float:
    """Seconds of the far field at `n_points` points below `cells` cells (the block
    pyramid included unless `prepared`)."""
    walk = n_points * FAR_SECONDS_PER_POINT * max(1.0, math.log2(max(cells, 2)) / 20.0)
    return walk + (not prepared) * cells * PYRAMID_SECONDS_PER_CELL


def check_capacity(estimate: Estimate, memory_cap, *, hint: str = "") -> Estimate:
    """Raise CapacityError when `estimate` needs more than `memory_cap` bytes.

    Examples
    --------
    >>> check_capacity(Estimate("slices", 31_200_000_000, 1.0, ""), 8e9, hint="use tiles")
    Traceback (most recent call last):
    ...
    fillstress.errors.CapacityError: slices needs 31.2 GB, cap is 8.0 GB; use tiles
    """
    if memory_cap is None:
        return estimate
    cap = positive(memory_cap, "memory_cap")
    if estimate.bytes > cap:
        tail = f"; {hint}" if hint else ""
        raise CapacityError(f"{estimate.operation} needs {format_bytes(estimate.bytes)}, "
                            f"cap is {format_bytes(cap)}{tail}")
    return estimate


def largest_tile(shape, n_depths: int, memory_cap, *, pad_cells=(0, 0)) -> tuple[int, int]:
    """The largest square-ish tile (ty, tx) whose tiled slice run fits in `memory_cap` bytes.

    Raises CapacityError when even the output alone, or a tile of 16 × 16 cells, does not fit.

    Examples
    --------
    >>> largest_tile((4000, 4000), 5, 2e9)
    (2000, 2000)
    >>> largest_tile((4000, 4000), 5, 1e8)
    Traceback (most recent call last):
    ...
    fillstress.errors.CapacityError: slices-tiled needs 640.0 MB, cap is 100.0 MB; the output alone does not fit: fewer depths or a coarser cell
    """
    ny, nx = _shape(shape)
    cap = positive(memory_cap, "memory_cap")
    pad_x, pad_y = _pad(pad_cells)
    output = Estimate("slices-tiled", _FLOAT * whole_number(n_depths, "n_depths", minimum=1)
                      * (ny + 2 * pad_y) * (nx + 2 * pad_x), 0.0, "output only")
    check_capacity(output, cap, hint="the output alone does not fit: fewer depths or a coarser cell")
    parts = 1  # halve the tile side until the working set fits
    while True:
        ty, tx = math.ceil(ny / parts), math.ceil(nx / parts)
        est = estimate_slices((ny, nx), n_depths, pad_cells=(pad_x, pad_y), tile=(ty, tx))
        if est.bytes <= cap:
            return ty, tx
        if max(ty, tx) <= _MIN_TILE:
            check_capacity(est, cap, hint="a coarser cell or fewer depths")
        parts *= 2


__all__ = ["Estimate", "estimate_slices", "estimate_points", "check_capacity",
           "largest_tile", "fft_working_bytes", "format_bytes"]


#: Grid-sized float arrays a site build holds at once besides one per body: the load
#: grid, the coverage fractions and the rasteriser's index and mask arrays.
GRID_ARRAYS = 4


def estimate_grid(shape, n_bodies: int, cell_label: str = "") -> Estimate:
    """Memory to rasterise `n_bodies` fill bodies on an analysis grid of `shape` (ny, nx):
    one float array per body plus :data:`GRID_ARRAYS`. Known from the bounds alone, so a
    grid that cannot fit is refused before any array is made.

    Examples
    --------
    >>> e = estimate_grid((12_000_000, 20_000_000), 1, "1e-06 m")
    >>> e.operation
    'the analysis grid (20,000,000 × 12,000,000 cells of 1e-06 m)'
    >>> format_bytes(e.bytes)
    '9.6 PB'
    """
    ny, nx = (int(v) for v in shape)
    if ny < 1 or nx < 1:
        raise InputError(f"must be (ny, nx) >= 1, got {shape!r}", argument="shape")
    of = f" of {cell_label}" if cell_label else ""
    cells = float(ny) * float(nx)
    return Estimate(f"the analysis grid ({nx:,} × {ny:,} cells{of})",
                    cells * _FLOAT * (n_bodies + GRID_ARRAYS), cells * 1e-8,
                    f"{cells:.3g} cells × {n_bodies + GRID_ARRAYS} arrays")
