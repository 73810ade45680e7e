"""The engineering report and the results-folder reader it stands on.

Data come from tests/results_fixture.py (invented site); expected values are read back
from the fixture's own files or from the arrays it wrote, never typed in here.
"""
from __future__ import annotations

import base64
import json
import shutil
from html.parser import HTMLParser

import numpy as np
import pandas as pd
import pytest

from fillstress.errors import InputError
from fillstress.report import write_report
from fillstress.io.results import ResultsFolder
from fillstress.report.html import SECTIONS, esc
from fillstress.report.tables import _fmt
from results_fixture import NASTY_ID, write_results_folder


@pytest.fixture(scope="module")
def truth(tmp_path_factory):
    return write_results_folder(tmp_path_factory.mktemp("report") / "run")


@pytest.fixture(scope="module")
def page(truth, tmp_path_factory):
    path = write_report(truth.path, tmp_path_factory.mktemp("out") / "report.html")
    text = path.read_text(encoding="utf-8")
    parsed = _Page()
    parsed.feed(text)
    parsed.close()
    return text, parsed


class _Page(HTMLParser):
    """Collects what the tests look at: tags, section ids, headings, images, text."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags, self.sections, self.images, self.links = [], {}, [], []
        self.text, self._heading_for = [], None
        self.flagged_rows = 0
        self.flagged_receptors = 0

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        self.tags.append(tag)
        if tag == "section":
            self._heading_for = attrs.get("id")
            self.sections[self._heading_for] = ""
        if tag == "img":
            self.images.append(attrs.get("src", ""))
        if tag in ("a", "link", "script", "iframe") or "href" in attrs:
            self.links.append((tag, attrs))
        if tag == "tr" and "flagged" in (attrs.get("class") or ""):
            self.flagged_rows += 1
        if tag == "th" and "flagged" in (attrs.get("class") or ""):
            self.flagged_receptors += 1

    def handle_data(self, data):
        self.text.append(data)
        if self._heading_for and self.tags and self.tags[-1] == "h2":
            self.sections[self._heading_for] += data
            self._heading_for = None


def test_report_has_every_section(page):
    _, parsed = page
    for key, heading in SECTIONS:
        assert parsed.sections.get(key) == heading


def test_images_are_embedded_pngs(page, truth):
    _, parsed = page
    # 2 plan slices + 2 building profiles + 1 borehole + 1 pipe in the fixture, and one
    # settlement-time curve per receptor id in settlement_time.csv
    curves = pd.read_csv(truth.path / "settlement_time.csv")["receptor_id"].nunique()
    assert curves == len(truth.building_ids) + 1
    assert len(parsed.images) == len(truth.depths) + len(truth.building_ids) + 2 + curves
    for src in parsed.images:
        assert src.startswith("data:image/png;base64,")
        assert base64.b64decode(src.split(",", 1)[1])[:8] == b"\x89PNG\r\n\x1a\n"


def test_report_is_self_contained(page):
    text, parsed = page
    assert parsed.links == []                       # no <a>, <link>, <script>, href
    assert "script" not in parsed.tags
    assert "http://" not in text and "https://" not in text


def test_text_from_input_files_is_escaped(page):
    text, parsed = page
    assert NASTY_ID in "".join(parsed.text)        # shown, as text
    assert "<script>" not in text
    assert esc(NASTY_ID) in text
    assert "<b>draft</b>" not in text and "<i>only</i>" not in text
    assert "&lt;b&gt;draft&lt;/b&gt;" in text


def test_flags_and_values_in_tables(page, truth):
    text, parsed = page
    flagged = 0
    for kind in ("buildings", "pipes", "boreholes"):
        df = pd.read_csv(truth.path / f"{kind}_summary.csv", keep_default_na=False)
        flagged += int((df["flag"].astype(str).str.strip() != "").sum())
        for value in df["dsz_max_kPa"]:
            assert _fmt(value) in text
    assert flagged >= 1                               # the fixture has a flagged building
    assert parsed.flagged_receptors == flagged        # receptor tables: one column each
    findings = text.split('class="findings"', 1)[1].split("</div>", 1)[0]
    assert "Limits reached" in findings
    df = pd.read_csv(truth.path / "buildings_summary.csv", keep_default_na=False)
    for rid in df.loc[df["flag"].astype(str).str.strip() != "", "receptor_id"]:
        assert esc(rid) in findings


def test_inputs_convergence_provenance_cautions(page, truth):
    text, parsed = page
    body = "".join(parsed.text)
    bodies = pd.read_csv(truth.path / "bodies.csv")
    for col in ("volume_m3", "footprint_area_m2", "max_height_m", "total_load_kN"):
        assert _fmt(bodies[col][0]) in body
    assert "soft grey clay" in body                   # soil layers from summary.json
    manifest = json.loads((truth.path / "manifest.json").read_text())
    for sha in manifest["inputs"].values():
        assert sha in body
    assert manifest["version"] in body and manifest["created"] in body
    conv = json.loads((truth.path / "summary.json").read_text())["convergence"]
    assert _fmt(conv["max_relative_change"]) in body
    assert (f"Halving the cell size from {conv['cell_m']:g} m to {conv['fine_cell_m']:g} m "
            f"changes Δσz at the sample points by at most "
            f"{100 * conv['max_relative_change']:.2f} % (at point {conv['at_point']})") in body
    assert "licensed geotechnical engineer" in body
    assert "local codes and regulations govern" in body
    assert "Westergaard" in body and "superposition" in body


def test_limits_reached_box_names_a_site_limit_the_summaries_do_not_flag(truth, tmp_path):
    """A [limits] row at or over its limit (limits.csv) is named in the box at the top, not
    only in the Limits section further down; rows within their limit are not."""
    copy = tmp_path / "limits"
    shutil.copytree(truth.path, copy)
    pd.DataFrame([
        {"receptor_kind": "pipe", "receptor_id": "main-9", "limit": "pipe_differential",
         "quantity": "pipe_differential", "value": 31.5, "limit_value": 15.0, "unit": "mm",
         "utilisation": 2.1, "source": "site file [limits]", "governing": True},
        {"receptor_kind": "pipe", "receptor_id": "main-9", "limit": "settlement",
         "quantity": "settlement", "value": 40.0, "limit_value": 150.0, "unit": "mm",
         "utilisation": 0.27, "source": "site file [limits]", "governing": False},
    ]).to_csv(copy / "limits.csv", index=False)
    text = write_report(copy).read_text(encoding="utf-8")
    box = text.split("<strong>Limits reached</strong>", 1)[1].split("</div>", 1)[0]
    assert "pipe main-9: pipe differential 31.5 of 15 mm (utilisation 2.1)" in box
    assert "settlement 40" not in box


def test_method_section_states_the_soil_model_of_the_run(page, truth, tmp_path):
    """A Boussinesq run is said to be on a homogeneous half-space; a Westergaard run on
    the layered one, not opened with the homogeneous wording."""
    body = "".join(page[1].text)
    assert "homogeneous, isotropic, linear-elastic half-space" in body
    assert "Boussinesq, 1885" in body and "Westergaard, 1938" not in body
    copy = tmp_path / "layered"
    shutil.copytree(truth.path, copy)
    manifest = json.loads((copy / "manifest.json").read_text())
    manifest["settings"]["method"] = "westergaard"
    (copy / "manifest.json").write_text(json.dumps(manifest))
    text = write_report(copy).read_text(encoding="utf-8")
    assert "Westergaard, 1938" in text and "thin, rigid horizontal layers" in text
    assert "homogeneous, isotropic, linear-elastic half-space below" not in text


def test_print_css(page):
    text, _ = page
    assert "@media print" in text and "break-before: page" in text and "@page" in text


def test_default_path_and_missing_parts(truth, tmp_path):
    copy = tmp_path / "copy"
    shutil.copytree(truth.path, copy)
    summary = json.loads((copy / "summary.json").read_text())
    del summary["convergence"], summary["soil"]
    (copy / "summary.json").write_text(json.dumps(summary))
    path = write_report(copy)
    assert path == copy / "report.html"
    text = path.read_text(encoding="utf-8")
    assert "No convergence check in this results folder" in text
    assert "No soil profile" in text
    assert not list(copy.glob(".*report.html*"))       # no temporary left
    with pytest.raises(InputError, match="no_such_folder: folder does not exist"):
        write_report(copy, copy / "no_such_folder" / "report.html")


# --- the reader ---------------------------------------------------------------

def test_cube_slices_match_what_was_written(truth):
    folder = ResultsFolder(truth.path)
    slices = folder.plan_slices("dsz")
    assert [s.depth for s in slices] == list(truth.depths)
    for s, expected in zip(slices, truth.dsz):
        np.testing.assert_allclose(s.x, truth.x)
        np.testing.assert_allclose(s.y, truth.y)
        np.testing.assert_allclose(s.values, expected)


def test_geotiff_slices_are_read_north_up(truth, tmp_path):
    """Without the cube, the slices come from the north-up GeoTIFFs: same values, row 0 south."""
    copy = tmp_path / "copy"
    shutil.copytree(truth.path, copy)
    (copy / "stress_cube.nc").unlink()
    slices = ResultsFolder(copy).plan_slices("dsz")
    assert [(s.grid, s.depth) for s in slices] == [("plan", d) for d in truth.depths]
    for s, expected in zip(slices, truth.dsz):
        np.testing.assert_allclose(s.y, truth.y)
        np.testing.assert_allclose(s.values, expected, rtol=1e-6)   # float32 on disk
    fill = ResultsFolder(copy).fill_thickness()
    np.testing.assert_allclose(fill.values, truth.thickness, rtol=1e-6)


def test_each_file_is_read_once(truth, tmp_path, monkeypatch):
    """The report asks for the cube from several sections: it is read from disk once."""
    import rasterio
    import xarray as xr
    opened = []
    for module, name in ((xr, "open_dataset"), (rasterio, "open"), (pd, "read_csv")):
        original = getattr(module, name)
        monkeypatch.setattr(module, name, lambda path, *a, _f=original, **k:
                            opened.append(str(path)) or _f(path, *a, **k))
    copy = tmp_path / "copy"
    shutil.copytree(truth.path, copy)
    (copy / "fill_thickness.tif").unlink()        # the fill then comes from the cube too
    write_report(copy, tmp_path / "report.html")
    assert opened and len(opened) == len(set(opened)), sorted(opened)
    assert sum(p.endswith("stress_cube.nc") for p in opened) == 1


def test_missing_manifest(tmp_path):
    with pytest.raises(InputError, match="manifest.json: is missing"):
        ResultsFolder(tmp_path)


def test_bad_json(tmp_path):
    (tmp_path / "manifest.json").write_text("{not json")
    with pytest.raises(InputError, match="not valid JSON"):
        ResultsFolder(tmp_path)


def test_missing_unit_labels(tmp_path):
    (tmp_path / "manifest.json").write_text(json.dumps({"units": {"length": "m"}}))
    with pytest.raises(InputError, match=r"\[units\] lacks label\(s\) pressure"):
        ResultsFolder(tmp_path)


def test_unknown_unit_system(tmp_path):
    units = {"system": "imperial", "length": "m", "pressure": "kPa", "unit_weight": "kN/m3",
             "settlement": "mm"}
    (tmp_path / "manifest.json").write_text(json.dumps({"units": units}))
    with pytest.raises(InputError, match=r"\[units.system\] unknown unit system 'imperial'"):
        ResultsFolder(tmp_path)
    (tmp_path / "manifest.json").write_text(json.dumps({"units": {**units, "system": "US"}}))
    with pytest.raises(InputError, match=r"system 'US' does not match the labels.*SI"):
        ResultsFolder(tmp_path)
    units["pressure"] = "psi"
    (tmp_path / "manifest.json").write_text(json.dumps({"units": {**units, "system": "SI"}}))
    with pytest.raises(InputError, match=r"\[units\] labels m, psi.*not those of a unit system"):
        ResultsFolder(tmp_path)


def test_missing_column_is_named(truth, tmp_path):
    copy = tmp_path / "copy"
    shutil.copytree(truth.path, copy)
    p = copy / "boreholes_points.csv"
    pd.read_csv(p).drop(columns=["depth_m"]).to_csv(p, index=False)
    with pytest.raises(InputError, match=r"boreholes_points.csv: \[depth_m\]"):
        write_report(copy)


def test_boolean_flag_columns_mark_rows():
    from fillstress.report.html import html_table
    table = html_table(["receptor_id", "exceeds_panel_wall_cracking", "worst_limit_reached"],
                       [["a", False, "none"], ["b", True, "panel wall cracking"]])
    rows = table.split("<tr")[2:]                     # skip the header row
    assert 'class="flagged"' not in rows[0]
    assert 'class="flagged"' in rows[1]


def test_maps_sharing_a_layout_are_drawn_as_each_alone(truth):
    """plan_maps places the later maps of a grid where the first's constrained layout put
    its axes: each image equals the map drawn alone (its own layout), pixel for pixel."""
    import io

    from matplotlib.image import imread

    from fillstress.report import figures
    folder = ResultsFolder(truth.path)
    slices, pipes = folder.plan_slices("dsz"), folder.features("pipes")
    assert len(slices) >= 2
    levels = figures.nice_levels(min(s.value_range()[0] for s in slices),
                                 max(s.value_range()[1] for s in slices))
    shared = figures.plan_maps(slices, levels=levels, pipes=pipes, fill=folder.fill_thickness())
    for s, png in zip(slices, shared):
        alone = figures.plan_map(s, levels=levels, pipes=pipes, fill=folder.fill_thickness())
        np.testing.assert_array_equal(imread(io.BytesIO(png)), imread(io.BytesIO(alone)))


def _pixels(png):
    import io

    from matplotlib.image import imread
    return imread(io.BytesIO(png))


def _corridor_field():
    """A 3000 x 1100-node plan field (a corridor's size): a winding embankment's Δσz."""
    from fillstress.io.results import PlanField
    x, y = np.arange(3000) * 1.5, np.arange(1100) * 1.5
    centre = 800 + 500 * np.sin(x / 900.0)
    dist = np.abs(y[:, None] - centre[None, :])
    values = 120.0 / (1.0 + (dist / 60.0) ** 2) * (1 + 0.3 * np.cos(x / 400.0))
    fill = PlanField("fill_thickness", "analysis", None, x, y, np.where(dist < 45, 3.0, 0.0), "m")
    return PlanField("dsz", "plan", 5.0, x, y, values, "kPa"), fill


def test_large_plan_fields_are_drawn_from_every_kth_node(monkeypatch):
    """Above DISPLAY_NODES a plan map is drawn from every k-th node (first and last kept:
    same extent), says so on the map, and looks like the map of every node; below it the
    map is the one drawn from every node, pixel for pixel."""
    from fillstress.report import figures
    field, fill = _corridor_field()
    levels = figures.nice_levels(*field.value_range())
    ny, nx = field.values.shape
    shown, k = figures.display_field(field)
    assert k == 3 == -(-nx // figures.DISPLAY_NODES)
    rows, cols = sorted({*range(0, ny, k), ny - 1}), sorted({*range(0, nx, k), nx - 1})
    np.testing.assert_array_equal(shown.values, field.values[np.ix_(rows, cols)])
    assert (shown.x[[0, -1]] == field.x[[0, -1]]).all()
    assert (shown.y[[0, -1]] == field.y[[0, -1]]).all()
    fig, _ = figures._plan_figure(field, levels, fill=fill)
    assert [t.get_text() for t in fig.texts] == [
        "drawn from 1 node in 3 along x and y (display only; the files hold every node)"]
    thin = _pixels(figures.plan_map(field, levels=levels, fill=fill))

    monkeypatch.setattr(figures, "DISPLAY_NODES", nx)               # every node: the old way
    fig, _ = figures._plan_figure(field, levels, fill=fill)
    assert not fig.texts
    every = _pixels(figures.plan_map(field, levels=levels, fill=fill))
    assert thin.shape == every.shape
    changed = np.abs(thin - every).max(axis=2) > 0.1
    assert changed.mean() < 0.03       # the note, moved contour labels, phase of the dashes


def test_small_plan_fields_are_drawn_from_every_node(truth, monkeypatch):
    """Below DISPLAY_NODES nothing is thinned: the map is the old one, pixel for pixel."""
    from fillstress.report import figures
    folder = ResultsFolder(truth.path)
    field, fill = folder.plan_slices("dsz")[0], folder.fill_thickness()
    assert figures.display_field(field) == (field, 1)
    levels = figures.nice_levels(*field.value_range())
    now = figures.plan_map(field, levels=levels, fill=fill)
    monkeypatch.setattr(figures, "display_field", lambda f, most=None: (f, 1))
    np.testing.assert_array_equal(_pixels(now),
                                  _pixels(figures.plan_map(field, levels=levels, fill=fill)))


def test_report_and_scene_from_one_view_equal_each_from_the_folder(truth, tmp_path):
    """The run hands the report and then the scene one ResultsFolder (the cube and rasters
    read once): both pages equal those each written from the folder's path (the report's
    clock times aside), and the manifest records the report alike."""
    import re

    from fillstress.report.html import write_run_report
    from fillstress.scene_page import export_scene_html
    shared, alone = tmp_path / "a" / "run", tmp_path / "b" / "run"     # the page names it
    shutil.copytree(truth.path, shared)
    shutil.copytree(truth.path, alone)
    view = ResultsFolder(shared)
    write_run_report(view, shared / "report.html")
    export_scene_html(view, shared / "scene.html")
    write_run_report(alone, alone / "report.html")
    export_scene_html(alone, alone / "scene.html")
    assert view._read_once                       # the scene used what the report read
    clock = re.compile(r"\d{4}-\d\d-\d\d[ T]\d\d:\d\d(:\d\d)?( UTC|Z)")
    for name in ("report.html", "scene.html", "manifest.json"):
        a, b = ((d / name).read_text(encoding="utf-8") for d in (shared, alone))
        if name == "report.html":
            a, b = clock.sub("", a), clock.sub("", b)
        if name == "manifest.json":
            a, b = (json.loads(t)["outputs"] for t in (a, b))
            assert a["report.html"] == hashlib_of(shared / "report.html")
            a.pop("report.html"), b.pop("report.html")
        assert a == b, name


def hashlib_of(path):
    import hashlib
    return hashlib.sha256(path.read_bytes()).hexdigest()
