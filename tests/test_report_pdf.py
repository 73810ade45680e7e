"""`fillstress report --pdf`: the HTML report printed by headless Chromium; its pages are
rendered text that pypdf extracts. Data: tests/results_fixture.py (invented site)."""
from __future__ import annotations

import json

import pypdf
import pytest

from fillstress.cli import main
from fillstress.errors import InputError
from fillstress.report.html import SECTIONS
from fillstress.report.pdf import find_browser, write_pdf
from browser import missing_part
from results_fixture import write_results_folder


def test_report_pdf_carries_every_section_and_is_checksummed(tmp_path):
    try:
        find_browser()
    except InputError:
        missing_part("Chromium", purpose="printing the report to PDF")
    truth = write_results_folder(tmp_path / "run")
    assert main(["report", str(truth.path), "--pdf", "--quiet"]) == 0
    pdf = truth.path / "report.pdf"
    reader = pypdf.PdfReader(str(pdf))
    assert len(reader.pages) >= 3
    text = " ".join(page.extract_text() for page in reader.pages)
    for _, title in SECTIONS:
        assert title.split()[0] in text, title
    assert "licensed geotechnical engineer" in text
    manifest = json.loads((truth.path / "manifest.json").read_text())
    assert "report.pdf" in json.dumps(manifest["outputs"])


def test_pdf_of_a_missing_report_is_refused(tmp_path):
    with pytest.raises(InputError, match="no such report file"):
        write_pdf(tmp_path / "none.html")
