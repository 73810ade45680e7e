"""The report as PDF: the HTML report printed by headless Chromium (``--print-to-pdf``),
so the PDF carries every table and figure of the HTML page (its print style sheet applies).
"""
from __future__ import annotations

import shutil
import subprocess
import tempfile
from pathlib import Path

from ..errors import InputError
from ..io.atomic import write_atomic

BROWSERS = ("chromium", "chromium-browser", "google-chrome")
_TIMEOUT_S = 180


def find_browser() -> str:
    """Path of a headless-capable Chromium, or InputError saying how to get one."""
    for name in BROWSERS:
        found = shutil.which(name)
        if found:
            return found
    raise InputError("needs Chromium to print the report (apt-get install chromium)",
                     argument="pdf")


def write_pdf(html_path, pdf_path=None, folder=None) -> Path:
    """Print an HTML report to PDF (default: beside it, same stem) and return the path.

    A PDF written into its results `folder` gets its checksum in the folder's manifest.

    Examples
    --------
    >>> write_pdf("/no/such/report.html")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument html_path: no such report file
    """
    html = Path(html_path)
    if not html.is_file():
        raise InputError("no such report file", argument="html_path")
    pdf = html.with_suffix(".pdf") if pdf_path is None else Path(pdf_path)
    browser = find_browser()

    def print_to(tmp: Path) -> None:
        with tempfile.TemporaryDirectory(prefix="fillstress-pdf-") as profile:
            cmd = [browser, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
                   "--no-pdf-header-footer", f"--user-data-dir={profile}",
                   f"--print-to-pdf={tmp}", html.resolve().as_uri()]
            try:
                subprocess.run(cmd, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
                               stderr=subprocess.DEVNULL, timeout=_TIMEOUT_S, check=False)
            except subprocess.TimeoutExpired:
                raise InputError(f"Chromium did not print the report within {_TIMEOUT_S} s",
                                 argument="pdf") from None
        if not tmp.is_file() or tmp.stat().st_size == 0:
            raise InputError(f"Chromium ({browser}) wrote no PDF", argument="pdf")

    write_atomic(pdf, print_to)
    if folder is not None:
        from .html import _record_in_manifest
        _record_in_manifest(Path(folder), pdf)
    return pdf
