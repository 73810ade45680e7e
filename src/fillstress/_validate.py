"""Small argument checks shared by the public API; each raises InputError naming the argument."""
from __future__ import annotations

import math
import operator

import numpy as np

from .errors import InputError


def finite_array(value, name: str, *, ndim: int | None = None, dtype=np.float64) -> np.ndarray:
    """Return `value` as a float array, refusing NaN/inf and a wrong number of dimensions."""
    try:
        arr = np.asarray(value, dtype=dtype)
    except (TypeError, ValueError) as exc:
        raise InputError(f"must be numeric ({exc})", argument=name) from None
    if ndim is not None and arr.ndim != ndim:
        raise InputError(f"must be {ndim}-dimensional, got shape {arr.shape}", argument=name)
    if not np.all(np.isfinite(arr)):
        bad = int(np.size(arr) - np.count_nonzero(np.isfinite(arr)))
        raise InputError(f"contains {bad} NaN or infinite value(s)", argument=name)
    return arr


def positive(value, name: str) -> float:
    """Return `value` as a float that must be finite and > 0."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"must be a number, got {value!r}", argument=name) from None
    if not math.isfinite(v) or v <= 0:
        raise InputError(f"must be positive and finite, got {value!r}", argument=name)
    return v


def finite(value, name: str) -> float:
    """Return `value` as a finite float."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"must be a number, got {value!r}", argument=name) from None
    if not math.isfinite(v):
        raise InputError(f"must be finite, got {value!r}", argument=name)
    return v


#: Depths below this (m) are the ground surface. In the rectangle formulas a depth of a
#: few denormal ulps next to an edge line leaves thin-strip terms of order one that no
#: longer cancel in floating point; a nanometre is far below any depth that matters.
SURFACE_DEPTH_M = 1e-9


def points_array(points, name: str = "points") -> np.ndarray:
    """Return an (N, 3) float array of x, y, depth with depth >= 0 (depths below
    :data:`SURFACE_DEPTH_M` taken as 0, the surface)."""
    arr = finite_array(points, name)
    if arr.ndim == 1 and arr.shape[0] == 3:
        arr = arr[None, :]
    if arr.ndim != 2 or arr.shape[1] != 3:
        raise InputError(f"must have shape (N, 3) for x, y, depth; got {arr.shape}", argument=name)
    if np.any(arr[:, 2] < 0):
        raise InputError("depth (column 3) must be >= 0 below the ground surface, "
                         f"got minimum {arr[:, 2].min():g}", argument=name)
    arr = np.array(arr, dtype=float)
    arr[arr[:, 2] < SURFACE_DEPTH_M, 2] = 0.0
    return arr


def depths_array(depths, name: str = "depths") -> np.ndarray:
    """Return a 1-D float array of depths >= 0."""
    arr = np.atleast_1d(finite_array(depths, name))
    if arr.ndim != 1 or arr.size == 0:
        raise InputError(f"must be a non-empty 1-D list of depths, got shape {arr.shape}", argument=name)
    if np.any(arr < 0):
        raise InputError(f"depths must be >= 0, got minimum {arr.min():g}", argument=name)
    return np.where(arr < SURFACE_DEPTH_M, 0.0, arr)


def whole_number(value, name: str, *, minimum: int | None = 0, maximum: int | None = None,
                 meaning: str | None = None) -> int:
    """`value` as an int in ``minimum..maximum`` (None: unbounded); bools and floats
    (even 2.0) are refused; numpy integers are accepted.

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
        if (minimum is not None and number < minimum) or (maximum is not None
                                                            and number > maximum):
            number = None
    if number is None:
        if meaning is None:
            meaning = ("a whole number" if minimum is None and maximum is None
                       else f"a whole number >= {minimum}" if maximum is None
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


def regular_file(path, *, what: str = "file", **where):
    """`path` as a Path when it names a regular file (symlinks followed); else InputError
    naming `where` (file=, key= or argument=). Refuses folders, FIFOs, devices such as
    /dev/zero and symlink loops before anything opens them (a FIFO would block a read,
    a device would never end one).

    Examples
    --------
    >>> regular_file("/dev/null", key="ground.points")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: [ground.points] /dev/null is a device, not a regular file
    """
    import os
    import stat
    from pathlib import Path
    path = Path(os.fspath(path))
    try:
        mode = os.stat(path).st_mode
    except FileNotFoundError:
        raise InputError(f"{what} not found: {path}", **where) from None
    except OSError as exc:          # ELOOP, EACCES, ENAMETOOLONG…
        raise InputError(f"{path} cannot be opened ({exc.strerror or exc})", **where) from None
    if stat.S_ISREG(mode):
        return path
    kind = ("a folder" if stat.S_ISDIR(mode) else "a named pipe (FIFO)" if stat.S_ISFIFO(mode)
            else "a device" if stat.S_ISCHR(mode) or stat.S_ISBLK(mode)
            else "a socket" if stat.S_ISSOCK(mode) else "not a file")
    raise InputError(f"{path} is {kind}, not a regular file", **where)
