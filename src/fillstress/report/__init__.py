"""The engineering report of one results folder: one self-contained, printable HTML file."""
from __future__ import annotations

__all__ = ["write_report"]


def write_report(results_dir, path=None):
    """Write the report; see :func:`fillstress.report.html.write_report`."""
    from pathlib import Path

    from ..errors import InputError
    if (Path(results_dir) / "monitoring.json").is_file():
        raise InputError("is a monitoring folder: its report.html is written by "
                         "`fillstress monitor` (rerun it with --overwrite)", file=results_dir)
    from .html import write_report as _write
    return _write(results_dir, path)
