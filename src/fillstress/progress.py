"""Progress reporting for long steps, decoupled from any display.

A *progress factory* is a callable ``factory(label, total)`` returning a context manager
whose ``advance(n=1)`` marks work done. The library takes one as ``progress=`` and uses
`silent` when none is given; the command line passes a rich progress bar.
"""
from __future__ import annotations

from contextlib import contextmanager


class _Silent:
    def advance(self, n: int = 1) -> None:
        pass


@contextmanager
def silent(label: str, total: int):
    """A progress factory that shows nothing."""
    yield _Silent()
