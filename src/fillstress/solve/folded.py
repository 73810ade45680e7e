"""Δσz at chosen samples of the cell-centre lattice by convolution on a smaller torus —
exact, as the zero-padded FFT slices (solve/slices.py) are.

A circular convolution of lengths L = (Ly, Lx) computes Σ_j p[j]·K[(m − j) mod L]. At a
sample m it equals the linear sum Σ_j p[j]·G(m − j) of the unit-cell influences G when
each offset d = m − j between a kept sample and a loaded cell has a residue mod L of its
own: the folded kernel K[d mod L] = G(d) then holds the right value for every pair (cells
that land on one residue simply add up their pressures). Zero padding to the full length
of the offsets is one such L; a fill that runs diagonally or curves across its bounding
box, with the samples wanted only near it, has far fewer offsets than the box, and a torus
several times smaller serves them.

The offsets are bounded block by block (B cells a side): a sample in block S and a cell
in block C are apart by an offset within the blocks S − C − 1 and S − C. L is taken as
a multiple of B, so blocks fold onto blocks, and the cheapest 5-smooth transform shape on
which those offset blocks do not collide is chosen.
"""
from __future__ import annotations

import math
from typing import NamedTuple

import numba
import numpy as np
import scipy.fft

from ..errors import InputError
from ..kernels import resolve_method
from ..kernels.corner import inverse_depth
from ._checks import compiled_threads, fft_workers
from .slices import _corners

BLOCK = 16                  # cells a side of an offset block; every torus length is a multiple


class FoldedSlices:
    """Δσz (kPa) of a stack of loads at chosen samples, depth after depth.

    Parameters
    ----------
    pressures : sequence of arrays (ny, nx)
        Cell pressures (kPa) of each load, on the same cells of size `dx` × `dy` (m).
    rows, cols : int arrays (N,)
        The samples, as lattice indices: sample (r, c) lies on the centre of cell (r, c),
        and indices beyond the grid (negative, or ≥ ny or nx) are allowed.
    method, poisson, workers
        As for :class:`fillstress.solve.slices.SlicePlan`.
    layout : FoldLayout, optional
        The torus (:func:`fold_layout` of these samples and loaded cells), when the
        caller has made it already to decide on folding.

    Examples
    --------
    >>> fs = FoldedSlices([np.full((1, 2), 10.0)], 1.0, 1.0, [0, 0], [0, 2])
    >>> fs.at_depth(0.0).round(9).tolist()          # inside the load, and beyond its edge
    [[10.0, 0.0]]
    """

    def __init__(self, pressures, dx, dy, rows, cols, method="boussinesq", poisson=None, *,
                 layout=None, workers=None):
        loads = np.asarray(pressures, float)
        if loads.ndim != 3 or loads.shape[0] == 0 or not np.isfinite(loads).all():
            raise InputError("must be a non-empty stack (E, ny, nx) of finite pressures",
                             argument="pressures")
        self.rows, self.cols = (np.asarray(v, np.int64).ravel() for v in (rows, cols))
        if self.rows.shape != self.cols.shape or self.rows.size == 0:
            raise InputError("rows and cols must be equal-length, non-empty index arrays",
                             argument="rows")
        self.spec, self.dx, self.dy = resolve_method(method, poisson), float(dx), float(dy)
        self.layout = layout or fold_layout(self.rows, self.cols, np.any(loads != 0, axis=0))
        self.torus = self.layout.torus
        self.workers = fft_workers(workers, size=math.prod(self.torus))
        self.pressure_hat = scipy.fft.rfft2(np.stack([fold(p, self.torus) for p in loads]),
                                            workers=self.workers)
        self._at = (self.rows % self.torus[0], self.cols % self.torus[1])   # their residues

    def slices(self, depths) -> np.ndarray:
        """Δσz (kPa) at the samples at each of `depths`, shape (E, depth, N)."""
        return np.stack([self.at_depth(d) for d in depths], axis=1)

    def at_depth(self, depth: float) -> np.ndarray:
        """Δσz (kPa) at the samples at one depth (m, >= 0), shape (E, N)."""
        z = abs(float(depth))
        c = self.spec.depth_scale * z
        reach_y, reach_x = self.layout.reach
        a = (np.arange(reach_x + 1) + 0.5) * self.dx
        b = (np.arange(reach_y + 1) + 0.5) * self.dy
        blocks = self.layout.blocks
        with compiled_threads(self.workers):
            corner = _corners(a, b, z, c, inverse_depth(c), self.spec.second_term,
                              a.size, b.size)
            kernel = _folded_kernel(corner, blocks[:, 0], blocks[:, 1], BLOCK, *self.torus)
        spectrum = scipy.fft.rfft2(kernel, workers=self.workers)
        out = np.empty((len(self.pressure_hat), self.rows.size))
        for e, load in enumerate(self.pressure_hat):
            out[e] = scipy.fft.irfft2(spectrum * load, s=self.torus,
                                      workers=self.workers)[self._at]
        return out


class FoldLayout(NamedTuple):
    """The offset blocks (Q, 2), the torus (Ly, Lx) they fold onto without collisions, and
    the reach (y, x): the largest |offset| in cells, out to which the corner function is
    evaluated."""

    blocks: np.ndarray
    torus: tuple[int, int]
    reach: tuple[int, int]


def fold_layout(rows, cols, loaded: np.ndarray) -> FoldLayout:
    """The :class:`FoldLayout` of samples (`rows`, `cols`, lattice indices) and the loaded
    cells (`loaded`, bool (ny, nx)).

    Examples
    --------
    >>> loaded = np.eye(64, dtype=bool)                    # a diagonal line of cells
    >>> fold_layout(np.arange(64), np.arange(64), loaded).torus
    (48, 128)
    """
    blocks = offset_blocks(np.asarray(rows, np.int64), np.asarray(cols, np.int64), loaded)
    reach = tuple(int(np.abs(blocks[:, k] * BLOCK).max() + BLOCK) for k in (0, 1))
    return FoldLayout(blocks, torus_shape(blocks), reach)


def offset_blocks(rows: np.ndarray, cols: np.ndarray, loaded: np.ndarray) -> np.ndarray:
    """(Q, 2) block indices (row, col) whose B × B offsets hold every offset (sample −
    cell) from a sample (`rows`, `cols`) to a loaded cell (`loaded`, bool (ny, nx))."""
    cj, ci = np.nonzero(loaded)
    if cj.size == 0:                                # no load: one block keeps shapes valid
        return np.zeros((1, 2), np.int64)
    samples, s0 = _block_mask(rows, cols)
    cells, c0 = _block_mask(cj, ci)
    # S − C for every pair of occupied blocks: a correlation of the two masks (counts ≥ 1)
    pairs = _convolve(samples, cells[::-1, ::-1]) > 0.5
    qy, qx = np.nonzero(pairs)
    qy = qy + s0[0] - c0[0] - (cells.shape[0] - 1)
    qx = qx + s0[1] - c0[1] - (cells.shape[1] - 1)
    both = {(y - dy, x - dx) for y, x in zip(qy.tolist(), qx.tolist())
            for dy in (0, 1) for dx in (0, 1)}
    return np.array(sorted(both), dtype=np.int64)


def _convolve(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """The full linear convolution of two small real arrays by FFT."""
    shape = [n + m - 1 for n, m in zip(a.shape, b.shape)]
    fast = [scipy.fft.next_fast_len(n, real=True) for n in shape]
    product = scipy.fft.rfft2(a, fast) * scipy.fft.rfft2(b, fast)
    return scipy.fft.irfft2(product, fast)[:shape[0], :shape[1]]


def _block_mask(rows: np.ndarray, cols: np.ndarray) -> tuple[np.ndarray, tuple[int, int]]:
    """Occupied blocks of a set of lattice indices as a float mask and its first block."""
    by, bx = np.floor_divide(rows, BLOCK), np.floor_divide(cols, BLOCK)
    y0, x0 = int(by.min()), int(bx.min())
    mask = np.zeros((int(by.max()) - y0 + 1, int(bx.max()) - x0 + 1))
    mask[by - y0, bx - x0] = 1.0
    return mask, (y0, x0)


def torus_shape(blocks: np.ndarray) -> tuple[int, int]:
    """The cheapest (Ly, Lx), multiples of BLOCK and 5-smooth (fast transforms), on which
    no two offset `blocks` fall on one residue. The search ends at the lengths spanning
    the blocks on each axis, where every block has a residue of its own."""
    span = blocks.max(axis=0) - blocks.min(axis=0) + 1
    pairs = sorted((y * x * math.log2(y * x), y, x)
                   for y in _lengths(BLOCK * int(span[0])) for x in _lengths(BLOCK * int(span[1])))
    return next((y, x) for _, y, x in pairs if _distinct_residues(blocks, y // BLOCK, x // BLOCK))


def _lengths(full: int) -> list[int]:
    """5-smooth multiples of BLOCK up to the first at or beyond `full`: the FFT lengths
    whose blocks fold onto blocks."""
    out, n = [], BLOCK
    while True:
        n = scipy.fft.next_fast_len(n, real=True)
        if n % BLOCK == 0:
            out.append(n)
            if n >= full:
                return out
        n += 1


def _distinct_residues(blocks: np.ndarray, my: int, mx: int) -> bool:
    if len(blocks) > my * mx:
        return False
    keys = (blocks[:, 0] % my) * mx + blocks[:, 1] % mx
    return int(np.bincount(keys, minlength=my * mx).max()) <= 1


def fold(pressure: np.ndarray, torus: tuple[int, int]) -> np.ndarray:
    """Cell pressures summed onto the torus: cell (j, i) on residue (j mod Ly, i mod Lx)."""
    ly, lx = torus
    ny, nx = pressure.shape
    padded = np.zeros((-(-ny // ly) * ly, -(-nx // lx) * lx))
    padded[:ny, :nx] = pressure
    return padded.reshape(padded.shape[0] // ly, ly, padded.shape[1] // lx, lx).sum(axis=(0, 2))


@numba.njit(cache=True)
def _signed(corner, j, i):
    """F at node (j, i), node −1 being the mirror of node 0 (F is odd in each axis)."""
    sign = 1.0
    if j < 0:
        j, sign = 0, -sign
    if i < 0:
        i, sign = 0, -sign
    return sign * corner[j, i]


@numba.njit(parallel=True, cache=True)
def _folded_kernel(corner, q_rows, q_cols, block, ly, lx):
    """The unit-cell influence G at every offset of the blocks (q_rows, q_cols), each on
    its residue of the (ly, lx) torus. G is even, so the offset (dy, dx) reads the corner
    function F at the nodes |d| ± ½ (node n at (n + ½) cells): G = F(i, j) − F(i−1, j) −
    F(i, j−1) + F(i−1, j−1) with i = |dx|, j = |dy|."""
    torus = np.zeros((ly, lx))
    for n in numba.prange(q_rows.size):
        for u in range(block):
            dy = q_rows[n] * block + u
            j, ty = abs(dy), dy % ly
            for v in range(block):
                dx = q_cols[n] * block + v
                i = abs(dx)
                torus[ty, dx % lx] = (_signed(corner, j, i) - _signed(corner, j, i - 1)
                                      - _signed(corner, j - 1, i)
                                      + _signed(corner, j - 1, i - 1))
    return torus
