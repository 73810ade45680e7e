"""Progress reporting for long steps, decoupled from any display.

A *progress factory* is a callable ``factory(label, total)`` returning a context manager
whose ``advance(n=1)`` marks work done. The library takes one as ``progress=`` and uses
`silent` when none is given; the command line passes a rich progress bar. A factory may
also take ``unit=`` (what one count is: "steps", "points", "tiles", ...), and its bar may
have ``describe(text)``, the step now running; the library uses both where they exist
(:func:`open_bar`, :func:`describe`), so a two-argument factory keeps working.
"""
from __future__ import annotations

from contextlib import contextmanager


import inspect


class _Silent:
    def advance(self, n: int = 1) -> None:
        pass

    def describe(self, text: str) -> None:
        pass


@contextmanager
def silent(label: str, total: int, unit: str = "steps"):
    """A progress factory that shows nothing."""
    yield _Silent()


def open_bar(factory, label: str, total: int, unit: str = "steps"):
    """``factory(label, total, unit=unit)``, or ``factory(label, total)`` for a factory
    that takes no unit.

    Examples
    --------
    >>> with open_bar(lambda label, total: silent(label, total), "tiles", 3) as bar:
    ...     bar.advance()
    """
    try:
        takes_unit = "unit" in inspect.signature(factory).parameters
    except (TypeError, ValueError):     # a builtin or C callable: no signature to read
        takes_unit = False
    return factory(label, total, unit=unit) if takes_unit else factory(label, total)


def describe(bar, text: str) -> None:
    """Show `text` as the step now running, where the bar can."""
    name = getattr(bar, "describe", None)
    if callable(name):
        name(text)
