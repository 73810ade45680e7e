"""The engineering report of one results folder: one self-contained, printable HTML file."""
from __future__ import annotations

from pathlib import Path

from ..errors import InputError
from .html import write_report as _write_html

__all__ = ["write_report"]


def write_report(results_dir, path=None):
    """Write the report; see :func:`fillstress.report.html.write_report`.

    A monitoring folder is refused: its report.html is written by ``fillstress monitor``.
    """
    if (Path(results_dir) / "monitoring.json").is_file():
        raise InputError("is a monitoring folder: its report.html is written by "
                         "`fillstress monitor` (rerun it with --overwrite)", file=results_dir)
    return _write_html(results_dir, path)
