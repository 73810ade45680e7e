"""The report and the 3D view on a real run: the bundled bridge_approach sample site.

US customary units in a US-survey-foot CRS, a house that exceeds its settlement limits,
a pipe, a borehole and settlement-time curves. The site is computed once per module
(10–15 s on a 2-core machine: `pytest --durations=3 tests/test_report_real.py`); expected
values are read back from the run's own files.
"""
from __future__ import annotations

import base64
import json
import re
from html.parser import HTMLParser

import numpy as np
import pandas as pd
import pytest
from PIL import Image

from fillstress import viewer
from fillstress.examples import example_site
from fillstress.report import write_report
from fillstress.report.html import SECTIONS
from fillstress.run.compute import run_site_file
from fillstress.units import FOOT


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    out = tmp_path_factory.mktemp("real") / "bridge"
    run_site_file(example_site("bridge_approach"), out, report=False)
    return out


class _Page(HTMLParser):
    """Headings, table header cells (with their class), images and links of a page."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack, self.h2, self.th, self.images, self.links = [], [], [], [], []
        self.captions, self.text = [], []

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        self.stack.append((tag, attrs))
        if tag == "img":
            self.images.append(attrs.get("src", ""))
        if tag in ("a", "link", "script", "iframe") or "href" in attrs:
            self.links.append(tag)
        if tag == "th":
            self.th.append([attrs.get("class") or "", ""])

    def handle_endtag(self, tag):
        while self.stack and self.stack.pop()[0] != tag:
            pass

    def handle_data(self, data):
        self.text.append(data)
        tag = self.stack[-1][0] if self.stack else ""
        if tag == "h2":
            self.h2.append(data)
        elif tag == "th" or any(t == "th" for t, _ in self.stack):
            self.th[-1][1] += data
        elif tag == "figcaption":
            self.captions.append(data)


@pytest.fixture(scope="module")
def page(run):
    text = write_report(run).read_text(encoding="utf-8")
    parsed = _Page()
    parsed.feed(text)
    parsed.close()
    return text, parsed


def test_every_section(page):
    _, parsed = page
    assert parsed.h2 == [heading for _, heading in SECTIONS]


def test_table_headers_carry_the_site_units(page, run):
    _, parsed = page
    heads = " | ".join(text for _, text in parsed.th)
    units = json.loads((run / "manifest.json").read_text())["units"]
    assert units["system"] == "US" and units["plan"] == "ftUS"
    for unit in ("(pcf)", "(yd³)", "(ft²)", "(ft)", "(kip)"):        # bodies.csv
        assert unit in heads
    for unit in ("(psf)", "(in)", "(US survey ft)"):                  # receptor summaries
        assert unit in heads
    # no raw column names with a unit suffix are left in any header
    assert not re.search(r"_(psf|ft|in|pcf|kip|ft2|ft3|yd3|m|kPa|mm)\b", heads)
    assert "(kPa)" not in heads and "(mm)" not in heads and "(m)" not in heads


def test_site_table_has_no_blank_rows_and_stages_once(page):
    text, parsed = page
    body = "\n".join(parsed.text)
    assert "poisson" not in body.lower()                 # Boussinesq run: no Poisson's ratio
    assert text.count("<td>stages</td>") == 1              # one row, not a second list
    site = text.split('id="site"', 1)[1].split("</section>", 1)[0]
    assert "<td></td>" not in site


def test_settings_and_convergence_in_site_units(page, run):
    text, parsed = page
    body = " ".join(parsed.text)
    # 4 significant figures, as the report prints (the cell is 4 US survey feet of the CRS,
    # 4.000008 international feet)
    cell_ft = float(f'{json.loads((run / "manifest.json").read_text())["settings"]["cell_m"] / FOOT:.4g}')
    assert f"{cell_ft:g} ft" in body
    conv = json.loads((run / "summary.json").read_text())["convergence"]
    sentence = (f"Halving the cell size from {cell_ft:g} ft to {cell_ft / 2:g} ft changes Δσz "
                f"at the sample points by at most {100 * conv['max_relative_change']:.2f} %")
    assert sentence in body


def test_settlement_time_figure_per_receptor(page, run):
    _, parsed = page
    ids = pd.read_csv(run / "settlement_time.csv", dtype={"receptor_id": str})["receptor_id"]
    assert ids.nunique() >= 2
    for rid in ids.unique():
        assert any(c.startswith("Settlement (in) against time") and rid in c
                   for c in parsed.captions), rid


def test_building_over_its_limit_is_flagged(page, run):
    text, parsed = page
    summary = pd.read_csv(run / "buildings_summary.csv", dtype={"receptor_id": str})
    over = summary[summary["worst_limit_reached"].astype(str).str.lower() != "none"]
    assert len(over) >= 1                                  # the house next to the embankment
    flagged_heads = [t for cls, t in parsed.th if "flagged" in cls]
    findings = text.split('class="findings"', 1)[1].split("</div>", 1)[0]
    for rec in over.to_dict("records"):
        assert any(rec["receptor_id"] in t for t in flagged_heads)
        assert rec["receptor_id"] in findings
        assert str(rec["worst_limit_reached"]).replace("_", " ") in findings
    assert text.count('class="flag"') >= 2                # worst limit + an exceeds_ cell


def test_image_count_and_embedded_pngs(page, run):
    _, parsed = page
    slices = len(list((run / "slices").glob("*.tif")))
    points = {k: pd.read_csv(run / f"{k}_points.csv", dtype={"receptor_id": str})
              for k in ("buildings", "pipes", "boreholes")}
    profiles = points["buildings"].query("role == 'profile'")["receptor_id"].nunique()
    boreholes = points["boreholes"]["receptor_id"].nunique()
    pipes = points["pipes"]["receptor_id"].nunique()
    curves = pd.read_csv(run / "settlement_time.csv")["receptor_id"].nunique()
    assert len(parsed.images) == slices + profiles + boreholes + pipes + curves
    for src in parsed.images:
        assert src.startswith("data:image/png;base64,")
        assert base64.b64decode(src.split(",", 1)[1])[:8] == b"\x89PNG\r\n\x1a\n"


def test_no_external_references_and_cautions_top_and_bottom(page):
    text, parsed = page
    assert parsed.links == []
    assert "http://" not in text and "https://" not in text
    # in the top box and the bottom box, each saying it once
    assert text.count("licensed geotechnical engineer") == 2
    assert text.count("local codes and regulations govern") == 2
    top, bottom = text.index('id="cautions-top"'), text.index('<section id="cautions"')
    assert top < text.index('<section id="site"') < bottom


def test_offscreen_render_is_not_blank(run, tmp_path):
    path = viewer.render_png(run, tmp_path / "view.png", window_size=(480, 360))
    img = np.asarray(Image.open(path).convert("RGB")).astype(int)
    assert img.shape == (360, 480, 3)
    assert np.any(img < 245, axis=2).mean() > 0.05
    assert len(np.unique(img.reshape(-1, 3), axis=0)) > 300
    plotter = viewer.build_scene(run, layers=("slices",))
    try:
        assert plotter.fillstress_exaggeration > 1.0     # a flat site: depth is stretched
        assert len(plotter.fillstress_slice_depths) == len(list((run / "slices").glob("dsz_*.tif")))
    finally:
        plotter.close()
