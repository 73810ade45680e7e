"""The engineering report of one results folder: one self-contained, printable HTML file."""
from __future__ import annotations

__all__ = ["write_report"]


def write_report(results_dir, path=None):
    """Write the report; see :func:`fillstress.report.html.write_report`."""
    from .html import write_report as _write
    return _write(results_dir, path)
