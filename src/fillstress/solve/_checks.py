"""Argument checks shared by the solvers, the estimates and the Dask layer.

One place for the checks that were written out again in each solver module: whole
numbers (chunk sizes, thread counts, pads, tiles, expansion order, retries), the
re-check of a LoadGrid, and the (ox, oy) sample offset.  Each raises InputError naming
the argument.
"""
from __future__ import annotations

import operator

from .._validate import finite_array, positive
from ..errors import InputError
from ..grid import LoadGrid


def whole_number(value, name: str, *, minimum: int = 0, maximum: int | None = None,
                 meaning: str | None = None) -> int:
    """`value` as an int in ``minimum..maximum``; bools and floats (even 2.0) are refused.

    `meaning` replaces the default wording ("a whole number >= 1") in the message.

    Examples
    --------
    >>> whole_number(3, "chunk", minimum=1)
    3
    >>> whole_number(2.5, "chunk", minimum=1)
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument chunk: must be a whole number >= 1, got 2.5
    """
    number = None
    if not isinstance(value, bool) and hasattr(value, "__index__"):
        number = operator.index(value)
        if number < minimum or (maximum is not None and number > maximum):
            number = None
    if number is None:
        if meaning is None:
            meaning = (f"a whole number >= {minimum}" if maximum is None
                       else f"a whole number from {minimum} to {maximum}")
        raise InputError(f"must be {meaning}, got {value!r}", argument=name)
    return number


def whole_pair(value, name: str, *, minimum: int = 0, meaning: str) -> tuple[int, int]:
    """Two whole numbers >= `minimum` (a pad, a tile or a shape).

    Examples
    --------
    >>> whole_pair((2, 0), "pad_cells", meaning="(pad_x, pad_y) whole cells >= 0")
    (2, 0)
    >>> whole_pair(3, "pad_cells", meaning="(pad_x, pad_y) whole cells >= 0")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument pad_cells: must be (pad_x, pad_y) whole cells >= 0, got 3
    """
    try:
        first, second = value
    except (TypeError, ValueError):
        raise InputError(f"must be {meaning}, got {value!r}", argument=name) from None
    for v in (first, second):
        if isinstance(v, bool) or not hasattr(v, "__index__") or operator.index(v) < minimum:
            raise InputError(f"must be {meaning}, got {value!r}", argument=name)
    return operator.index(first), operator.index(second)


def checked_grid(grid) -> LoadGrid:
    """Re-check a LoadGrid (its pressure array is mutable after construction).

    Examples
    --------
    >>> checked_grid([[1.0]])
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument grid: must be a fillstress.LoadGrid, got list
    """
    if not isinstance(grid, LoadGrid):
        raise InputError(f"must be a fillstress.LoadGrid, got {type(grid).__name__}",
                         argument="grid")
    finite_array(grid.pressure, "grid.pressure", ndim=2)
    positive(grid.dx, "grid.dx")
    positive(grid.dy, "grid.dy")
    return grid


def offset_pair(offset) -> tuple[float, float]:
    """The (ox, oy) shift in metres of slice samples from the cell centres.

    Examples
    --------
    >>> offset_pair([0.5, 0])
    (0.5, 0.0)
    """
    arr = finite_array(offset, "offset")
    if arr.shape != (2,):
        raise InputError(f"must be (ox, oy) in metres, got shape {arr.shape}", argument="offset")
    return float(arr[0]), float(arr[1])


def fft_workers(workers) -> int | None:
    """None (scipy's default) or a positive number of scipy.fft threads.

    Examples
    --------
    >>> fft_workers(None), fft_workers(2)
    (None, 2)
    """
    if workers is None:
        return None
    return whole_number(workers, "workers", minimum=1,
                        meaning="None or a positive number of threads")


def points_per_chunk(chunk, name: str, default: int) -> int:
    """Points per chunk: `default` when `chunk` is None, else a whole number >= 1.

    Examples
    --------
    >>> points_per_chunk(None, "chunk_size", 20_000), points_per_chunk(7, "chunk_size", 1)
    (20000, 7)
    """
    if chunk is None:
        return default
    return whole_number(chunk, name, minimum=1, meaning="a positive whole number of points")
