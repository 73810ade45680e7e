"""The design page in a real browser (headless Chromium driven by WebDriver: Debian's
chromium-driver and the selenium package): drag a pile by a known distance, move it by a
typed offset, read the receptor value the page shows, save, and compare with
`fillstress point` on the saved file at that receptor, to the printed precision; an
invalid edit shows the site file's message and changes nothing; no request leaves
127.0.0.1.

Site: a copy of the sample site stockpile_yard (invented "Kestrel Quay ore yard").
"""
from __future__ import annotations

import contextlib
import io
import json
import shutil
import threading

import numpy as np
import pytest

from browser import CHROMIUM, missing_part, require
from fillstress.cli import main
from fillstress.design.engine import movable_geometry
from fillstress.design.server import DesignServer
from fillstress.design.state import DesignSession
from fillstress.examples import example_site
from guide_images import keep

CHROMEDRIVER = "/usr/bin/chromedriver"
INSTALL = "apt-get install -y chromium chromium-driver && pip install selenium"
BOREHOLE = "BH-K1"


@pytest.fixture(scope="module")
def page(tmp_path_factory):
    require(CHROMIUM, CHROMEDRIVER, purpose="the design-page browser test", install=INSTALL)
    try:
        from selenium import webdriver
        from selenium.webdriver.chrome.service import Service
    except ImportError:
        missing_part("the selenium package", purpose="the design-page browser test",
                     install=INSTALL)
    folder = tmp_path_factory.mktemp("yard") / "yard"
    shutil.copytree(example_site("stockpile_yard").parent, folder)
    server = DesignServer(DesignSession(folder / "site.toml", ratio_limit=0.1, stress_limit=50))
    thread = threading.Thread(target=server.serve_forever, kwargs={"poll_interval": 0.05})
    thread.start()
    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    for arg in ("--headless=new", "--no-sandbox", "--disable-gpu", "--window-size=1300,980",
                "--no-proxy-server", "--disable-background-networking",
                f"--user-data-dir={tmp_path_factory.mktemp('profile')}"):
        options.add_argument(arg)
    options.set_capability("goog:loggingPrefs", {"performance": "ALL"})
    driver = webdriver.Chrome(options=options, service=Service(CHROMEDRIVER))
    try:
        driver.get(server.url)
        _wait(driver, "return document.body.dataset.ready", "yes")
        yield driver, server, folder
    finally:
        driver.quit()
        server.shutdown()
        server.server_close()
        thread.join()


def _wait(driver, script: str, value, timeout=90):
    from selenium.webdriver.support.ui import WebDriverWait
    WebDriverWait(driver, timeout).until(lambda d: d.execute_script(script) == value)


def _edit(driver, action) -> None:
    """Do `action` (which sends one edit) and wait until the page has redrawn."""
    done = int(driver.execute_script("return Number(document.body.dataset.edits || 0)"))
    action()
    _wait(driver, "return document.body.dataset.edits", str(done + 1))


def _shown(driver, receptor: str) -> dict:
    cells = driver.execute_script(
        "return [...document.querySelector(`#receptors tr[data-id='${arguments[0]}']`)"
        ".cells].map(c => c.textContent)", receptor)
    return dict(zip(["receptor", "point", "x", "y", "depth", "dsz"], cells))


def _outline(server, name):
    return np.array(server.session.layout.doc["bodies"][name]["outline"], float)


def _fill(driver, element_id: str, value) -> None:
    box = driver.find_element("id", element_id)
    box.clear()
    box.send_keys(str(value))


def test_drag_move_save_and_the_saved_file_gives_the_numbers_shown(page, tmp_path):
    from selenium.webdriver.common.action_chains import ActionChains
    driver, server, folder = page
    slice_before = driver.execute_script("return S.slice.values")
    start = np.array(movable_geometry(server.session.layout, "coal_west")[1])

    # drag the coal pile 60 px west from a point inside it (its centroid, on screen)
    k, u, v = driver.execute_script(
        "const b = S.bodies.find(b => b.name === 'coal_west'), r = b.rings[0];"
        "const cx = r.reduce((a, p) => a + p[0], 0) / r.length,"
        "      cy = r.reduce((a, p) => a + p[1], 0) / r.length;"
        "const [u, v] = px(cx, cy); return [view.k, u, v];")
    canvas = driver.find_element("id", "plan")
    w, h = canvas.size["width"], canvas.size["height"]
    _edit(driver, lambda: ActionChains(driver).move_to_element_with_offset(
        canvas, int(round(u - w / 2)), int(round(v - h / 2))).click_and_hold()
        .move_by_offset(-60, 0).release().perform())
    shift = _outline(server, "coal_west") - start          # in whole 1 m cells
    np.testing.assert_allclose(shift, [[round(-60 / k), 0.0]] * len(start), atol=1e-9)
    assert server.session.layout.timing.shifted

    # then 20 m west by the typed offset: exactly that far
    dragged = _outline(server, "coal_west")
    _fill(driver, "move-dx", -20)
    _fill(driver, "move-dy", 0)
    _edit(driver, lambda: driver.find_element("id", "move").click())
    np.testing.assert_allclose(_outline(server, "coal_west") - dragged, [[-20.0, 0.0]] * len(start),
                               atol=1e-9)
    assert driver.find_element("id", "message").text == ""
    assert driver.find_element("id", "timing").get_attribute("data-ms")
    shown = _shown(driver, BOREHOLE)
    assert driver.execute_script("return S.slice.values") != slice_before     # redrawn
    keep(_screenshot(driver), "design_page.png")

    # save, and `fillstress point` on the saved file at the receptor's point
    _fill(driver, "save-name", "yard-tried.toml")
    driver.find_element("id", "save").click()
    _wait(driver, "return document.getElementById('saved').textContent.startsWith('saved')", True)
    saved = folder / "yard-tried.toml"
    assert saved.is_file() and (folder / "site.toml").read_text().count("pile_toes") == 3
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert main(["point", str(saved), shown["x"], shown["y"], shown["depth"], "--json"]) == 0
    answer = json.loads(out.getvalue())["points"][0]["dsz"]
    assert f"{answer:.2f}" == shown["dsz"]


def test_an_invalid_edit_shows_the_site_file_message_and_changes_nothing(page):
    driver, server, _ = page
    _edit(driver, lambda: driver.find_element("id", "add-rectangle").click())
    name = list(server.session.layout.parts)[-1]
    assert name.startswith("rectangle_")
    driver.find_element("css selector", f"#bodies button[data-name='{name}']").click()
    shown, doc = _shown(driver, BOREHOLE), server.session.layout.bodies_raw()
    _fill(driver, "key-height", -1)
    _edit(driver, lambda: driver.find_element("id", "apply").click())
    message = driver.find_element("id", "message").text
    assert message.endswith(f"[bodies.{name}.height] must be ≥ 0, got -1"), message
    assert _shown(driver, BOREHOLE) == shown and server.session.layout.bodies_raw() == doc
    # undo takes the rectangle away again
    _edit(driver, lambda: driver.find_element("id", "undo").click())
    assert name not in server.session.layout.parts


def test_no_request_leaves_the_machine(page):
    driver, server, _ = page
    hosts = set()
    for entry in driver.get_log("performance"):
        msg = json.loads(entry["message"])["message"]
        if msg.get("method") == "Network.requestWillBeSent":
            url = msg["params"]["request"]["url"]
            if url.split(":")[0] in ("http", "https", "ws", "wss"):   # not chrome:, data:
                hosts.add(url.split("/")[2])
    assert hosts == {f"127.0.0.1:{server.server_address[1]}"}


def _screenshot(driver) -> np.ndarray:
    from PIL import Image
    return np.asarray(Image.open(io.BytesIO(driver.get_screenshot_as_png())).convert("RGB"))
