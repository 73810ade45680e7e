"""One exception family for bad input.

Every message names where the problem is (file, table/key or argument) and what is
wrong, on one line, so the command line can print it without a traceback.
"""
from __future__ import annotations


class FillstressError(Exception):
    """Base of every error fillstress raises on purpose.

    Examples
    --------
    Catch it to handle every error of the package's own making at once:

    >>> try:
    ...     raise InputError("must be positive, got -1.0", argument="dx")
    ... except FillstressError as exc:
    ...     print(type(exc).__name__, exc)
    InputError argument dx: must be positive, got -1.0
    """


class InputError(FillstressError, ValueError):
    """Bad input: a file, a site-file key or a function argument is wrong.

    Parameters
    ----------
    reason : str
        What is wrong, phrased for the engineer ("must be positive, got -2.0").
    file : str or path-like, optional
        The file the bad value came from.
    key : str, optional
        The site-file key ("bodies.north_pile.repose_angle_deg") or column name.
    argument : str, optional
        The Python argument name, for errors raised by the library API.

    Examples
    --------
    >>> str(InputError("must be positive, got -1", argument="dx"))
    'argument dx: must be positive, got -1'
    >>> str(InputError("unknown key", file="site.toml", key="grid.cell"))
    'site.toml: [grid.cell] unknown key'
    """

    def __init__(self, reason: str, *, file=None, key: str | None = None,
                 argument: str | None = None):
        self.reason = reason
        self.file = None if file is None else str(file)
        self.key = key
        self.argument = argument
        super().__init__(self._message())

    def _message(self) -> str:
        parts = []
        if self.file:
            parts.append(f"{self.file}:")
        if self.key:
            parts.append(f"[{self.key}]")
        if self.argument:
            parts.append(f"argument {self.argument}:")
        parts.append(self.reason)
        return " ".join(parts).replace("\n", " ")


class CapacityError(FillstressError):
    """A computation would exceed the memory cap; raised before allocating.

    Examples
    --------
    >>> from fillstress.solve.cost import Estimate, check_capacity
    >>> try:
    ...     check_capacity(Estimate("slices", 3e9, 1.0, ""), 1e9, hint="use tiles")
    ... except CapacityError as exc:
    ...     print(exc)
    slices needs 3.0 GB, cap is 1.0 GB; use tiles
    """


class ClusterError(FillstressError):
    """A Dask cluster died or lost its workers past the retries; nothing was written."""


class FillstressWarning(UserWarning):
    """Something the engineer should know that does not stop the work (a recovered folder,
    a grid far larger than the loads, an implausible value). The command prints each as
    one ``fillstress: warning:`` line on stderr."""
