"""The browser scene (scene.html) in headless Chromium: controls in the DOM, pixels that
follow the controls, hover values, and no network request (the browser's request log).

Data come from tests/results_fixture.py (invented site "Quillmere Yard preload trial").
"""
from __future__ import annotations

import json
import re

import numpy as np
import pytest

from browser import CHROMIUM, Browser, require
from fillstress import scene_page, viewer
from fillstress.scene_page import colour_index
from guide_images import keep
from results_fixture import NASTY_ID, write_results_folder


@pytest.fixture(scope="module")
def truth(tmp_path_factory):
    return write_results_folder(tmp_path_factory.mktemp("scene") / "run")


@pytest.fixture(scope="module")
def page(truth, tmp_path_factory):
    require(CHROMIUM, purpose="the browser scene tests")
    html = scene_page.export_scene_html(truth.path, tmp_path_factory.mktemp("html") / "scene.html",
                                    exaggeration=2.0)
    browser = Browser(tmp_path_factory.mktemp("profile"))
    try:
        browser.open(html.as_uri())
        assert browser.evaluate("document.body.dataset.ready") == "yes"
        yield browser, html
    finally:
        browser.close()


def _view_box(browser):
    """Pixel box (x0, y0, x1, y1) of the 3D view in the page."""
    r = browser.evaluate("(() => { const r = document.getElementById('view')"
                         ".getBoundingClientRect(); return [r.left, r.top, r.right, r.bottom]; })()")
    return [int(round(v)) for v in r]


def _view_pixels(browser):
    x0, y0, x1, y1 = _view_box(browser)
    return browser.screenshot()[y0:y1, x0:x1]


def _on_table(img, tol=3) -> float:
    """Share of pixels that are (within `tol`) colours of the Δσz colour table."""
    table = viewer.colour_table("dsz", 255).astype(int)
    colours, inverse = np.unique(img.reshape(-1, 3), axis=0, return_inverse=True)
    hit = np.abs(colours[:, None, :] - table[None]).max(axis=2).min(axis=1) <= tol
    return hit[inverse.ravel()].mean()


def test_title_heading_and_caution_name_the_site_and_date(page, truth):
    browser, html = page
    date = json.loads((truth.path / "manifest.json").read_text())["created"][:10]
    assert browser.evaluate("document.title") == f"Quillmere Yard preload trial — 3D scene — {date}"
    heading = browser.evaluate("document.getElementById('heading').textContent")
    assert heading.startswith("Quillmere Yard preload trial") and "Δσz (kPa)" in heading
    body = browser.evaluate("document.body.innerText")
    assert date in body
    assert "licensed geotechnical engineer" in body and "local codes and regulations govern" in body
    assert "elastic half-space" in body
    assert "PyVista" not in html.read_text(encoding="utf-8")


def test_controls_and_legend_are_on_the_page(page):
    browser, _ = page
    kinds = browser.evaluate("[...document.querySelectorAll('#toggles input')]"
                             ".map(b => b.dataset.layer)")
    assert set(kinds) == {"fill", "slices", "buildings", "pipes", "boreholes"}
    depth = browser.evaluate("(() => { const d = document.getElementById('depth');"
                             " return [d.type, d.min, d.max]; })()")
    assert depth == ["range", "0", "1"]                       # two slices: 2 m and 6 m
    assert browser.evaluate("document.getElementById('depthText').textContent") \
        == "2 m below existing ground"
    assert browser.evaluate("document.getElementById('legendTitle').textContent") == "Δσz (kPa)"
    labels = browser.evaluate("DATA.parts.filter(p => p.kind === 'labels')"
                              ".flatMap(p => p.texts)")
    assert "N" in labels                                       # north arrow
    assert any(re.fullmatch(r"\d+ m", t) for t in labels)      # scale bar
    assert "E (m)" in labels and "N (m)" in labels             # axes in site units


def test_depth_control_changes_the_pixels_and_the_label(page):
    browser, _ = page
    browser.evaluate("window.fillstressScene.setDepth(0)")
    shallow = _view_pixels(browser)
    browser.evaluate("window.fillstressScene.setDepth(1)")
    deep = _view_pixels(browser)
    text = browser.evaluate("document.getElementById('depthText').textContent")
    keep(browser.screenshot(), "scene_page_6m.png")
    browser.evaluate("window.fillstressScene.setDepth(0)")
    keep(browser.screenshot(), "scene_page_2m.png")
    assert text == "6 m below existing ground"
    changed = np.any(np.abs(shallow - deep) > 30, axis=2).mean()
    assert changed > 0.02
    # The 2 m slice is hotter: it shows more of the top (yellow) end of viridis.
    yellow = lambda img: np.mean((img[..., 0] > 180) & (img[..., 1] > 180) & (img[..., 2] < 90))
    assert yellow(shallow) > yellow(deep)


def test_slice_colours_are_the_colour_table(page, truth):
    """The slice pixels are colour-table entries (slices are unlit) of the values shown."""
    browser, _ = page
    for kind in ("fill", "buildings", "pipes", "boreholes"):
        browser.evaluate(f"window.fillstressScene.show('{kind}', false)")
    img = _view_pixels(browser)
    for kind in ("fill", "buildings", "pipes", "boreholes"):
        browser.evaluate(f"window.fillstressScene.show('{kind}', true)")
    table = viewer.colour_table("dsz", 255).astype(int)
    colours, counts = np.unique(img.reshape(-1, 3), axis=0, return_counts=True)
    dist = np.abs(colours[:, None, :] - table[None]).max(axis=2)
    on_table = counts[dist.min(axis=1) <= 3].sum() / counts.sum()
    assert on_table > 0.05                                     # the slice is drawn
    scene = viewer.scene_parts(truth.path, exaggeration=2.0)
    expected = set(colour_index(truth.dsz[0], scene.clim).ravel().tolist())
    seen = set(dist.argmin(axis=1)[dist.min(axis=1) <= 3].tolist())
    # Colours of the slice, not of another range: the two ends of what is seen are the
    # ends of the 2 m slice's own indices.
    assert max(seen) == pytest.approx(max(expected), abs=3)


def test_toggles_hide_their_layer(page):
    browser, _ = page
    before = _view_pixels(browser)
    browser.evaluate("window.fillstressScene.show('slices', false)")
    without = _view_pixels(browser)
    browser.evaluate("window.fillstressScene.show('slices', true)")
    assert _on_table(before) > 0.05 and _on_table(without) < _on_table(before) / 10


def test_hover_shows_a_receptor_and_its_values(page, truth):
    browser, _ = page
    x0, y0, _, _ = _view_box(browser)
    for k in range(40):
        xy = browser.evaluate(f"window.fillstressScene.pointAt({k})")
        if xy is None:
            break
        browser.call("Input.dispatchMouseEvent", session=True, type="mouseMoved",
                     x=x0 + xy[0], y=y0 + xy[1])
        text = browser.evaluate("document.getElementById('tip').textContent")
        if text:
            break
    assert browser.evaluate("getComputedStyle(document.getElementById('tip')).display") == "block"
    assert "Δσz" in text and "kPa" in text and "deep" in text
    ids = [NASTY_ID, *truth.building_ids, truth.pipe_id, truth.borehole_id]
    assert any(i in text for i in ids)                    # text from inputs shown literally


def test_no_network_request(page):
    browser, html = page
    browser.evaluate("window.fillstressScene.setDepth(1)")
    urls = browser.requests()
    assert urls == [html.as_uri()]
    text = html.read_text(encoding="utf-8")
    assert not re.search(r"(src|href)\s*=\s*[\"']?(https?:)?//", text)


def test_input_text_cannot_break_out_of_the_script(truth):
    scene = viewer.scene_parts(truth.path)
    from fillstress.scene_page import page_html
    text = page_html(scene)
    assert "<script>alert" not in text                   # the nasty building id, escaped
    assert text.count("<script>") == 1


def test_large_lattices_are_thinned_for_the_browser(truth, monkeypatch):
    """A slice with more nodes than MAX_LATTICE_NODES is sent at every k-th node."""
    import base64
    from fillstress import scene_page
    scene = viewer.scene_parts(truth.path, exaggeration=2.0)
    full = [p for p in scene_page.scene_data(scene)["parts"] if p["kind"] == "grid"]
    monkeypatch.setattr(scene_page, "MAX_LATTICE_NODES", 100)
    thin = [p for p in scene_page.scene_data(scene)["parts"] if p["kind"] == "grid"]
    for a, b in zip(full, thin):
        assert b["n0"] * b["n1"] <= 100 < a["n0"] * a["n1"]
        assert len(base64.b64decode(b["z"])) == 4 * b["n0"] * b["n1"]
        step = scene_page.lattice_step(a["n0"] * a["n1"])
        za = np.frombuffer(base64.b64decode(a["z"]), np.float32).reshape(a["n1"], a["n0"])
        zb = np.frombuffer(base64.b64decode(b["z"]), np.float32).reshape(b["n1"], b["n0"])
        np.testing.assert_array_equal(zb, za[::step, ::step])


def test_bounds_are_those_of_all_points_together(truth):
    """Part by part least and greatest points = those of one concatenation (the earlier
    way, hundreds of MB on a corridor)."""
    scene = viewer.scene_parts(truth.path, exaggeration=2.0)
    pts = np.concatenate([np.asarray(p.mesh.points) for p in scene.parts])
    lo, hi = pts.min(axis=0), pts.max(axis=0)
    expected = (lo[0], hi[0], lo[1], hi[1], lo[2] / 2.0, hi[2] / 2.0)
    assert scene_page._bounds(scene) == tuple(float(v) for v in expected)


def _lattice_before(part, scene):
    """scene_page._lattice as it was: every point copied, then thinned."""
    mesh = part.mesh
    n0, n1, _ = mesh.dimensions
    step = scene_page.lattice_step(n0 * n1)
    pts = scene_page._unexaggerated(mesh.points, scene.exaggeration)
    values = np.asarray(part.values)
    if step > 1:
        keep = np.arange(n0 * n1).reshape(n1, n0)[::step, ::step]
        n1, n0 = keep.shape
        pts, values = pts[keep.ravel()], values[keep.ravel()]
    first, second = pts[:n0, :2], pts[::n0, :2][:n1]
    index = (np.where(np.isfinite(values), 0, scene_page.HOLE).astype(np.uint8)
             if part.layer == "fill" else colour_index(values, scene.clim))
    b64 = scene_page._b64
    return {"n0": int(n0), "n1": int(n1), "a": b64(first.astype(np.float32)),
            "b": b64(second.astype(np.float32)), "z": b64(pts[:, 2]), "c": b64(index)}


@pytest.mark.parametrize("most", [100, 10**6])
def test_lattices_thinned_before_copying_are_those_copied_then_thinned(truth, monkeypatch,
                                                                       most):
    scene = viewer.scene_parts(truth.path, exaggeration=2.0)
    monkeypatch.setattr(scene_page, "MAX_LATTICE_NODES", most)
    grids = [p for p in scene.parts if p.kind == "grid"]
    assert grids
    for part in grids:
        assert scene_page._lattice(part, scene) == _lattice_before(part, scene)


def test_footer_says_the_core_caution_once(truth, tmp_path):
    """The folder's cautions follow the bold caution without repeating its first sentence."""
    import shutil

    from fillstress.cautions import CORE_CAUTION
    copy = tmp_path / "folder"
    shutil.copytree(truth.path, copy)
    manifest = json.loads((copy / "manifest.json").read_text())
    manifest["cautions"] = CORE_CAUTION + " Check stability separately."
    (copy / "manifest.json").write_text(json.dumps(manifest))
    text = scene_page.export_scene_html(copy, tmp_path / "scene.html").read_text(
        encoding="utf-8")
    footer = text.split("<footer>", 1)[1].split("</footer>", 1)[0]
    assert footer.count("licensed geotechnical engineer") == 1
    assert "Check stability separately." in footer
