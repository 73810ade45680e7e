"""The engineering report of one results folder: one self-contained, printable HTML file
(a run's report, or the comparison of the variants of a batch folder)."""
from __future__ import annotations

from pathlib import Path

from .batch import is_batch_folder, write_batch_report
from .html import write_run_report

__all__ = ["write_report"]


def write_report(results_dir, path=None) -> Path:
    """Write the report of a results folder as one self-contained HTML file: the
    engineering report of a run, or for a `fillstress batch` folder the variants compared.

    Parameters
    ----------
    results_dir : str or path-like
        A results folder (docs/results-folder.md).
    path : str or path-like, optional
        Where to write; default ``<results_dir>/report.html``.

    Returns
    -------
    pathlib.Path
        The file written (via a temporary name, renamed into place).

    Examples
    --------
    >>> write_report("/no/such/folder")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument results_dir: is not a results folder (no such directory)
    """
    if is_batch_folder(results_dir):
        return write_batch_report(results_dir, path)
    return write_run_report(results_dir, path)
