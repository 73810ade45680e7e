"""Edit → redraw on the design page, measured from a browser, for every sample site.

    PYTHONPATH=src python benchmarks/bench_design.py                       # print Markdown
    PYTHONPATH=src python benchmarks/bench_design.py --write docs/performance.md

For each sample site (a copy in a temporary folder): the time to read the site and compute
every body's contribution (`fillstress design` before it prints the address), the page load
in headless Chromium (navigation until the page has drawn), and for each movable body the
time from the click on "move" (5 site units east, then back, `--repeat` times) to the end
of the redraw, as the page measures it (performance.now), with the server's breakdown:
rasterising the body, its FFT slice, Δσz at the receptor points. The best of the repeats
is reported, and the median. Needs chromium, chromium-driver and selenium.

`--write` replaces only the "## Design page" section of the file (between its markers,
`write_section`), so the figures of benchmarks/run_all.py stay as they are.
"""
from __future__ import annotations

import argparse
import datetime
import os
import platform
import shutil
import statistics
import sys
import tempfile
import threading
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))

from fillstress.design.engine import movable_geometry  # noqa: E402
from fillstress.design.server import DesignServer  # noqa: E402
from fillstress.design.state import DesignSession  # noqa: E402
from fillstress.examples import example_site, list_examples  # noqa: E402

BEGIN, END = "<!-- design page: benchmarks/bench_design.py -->", "<!-- end of design page -->"
COMMAND = "PYTHONPATH=src python benchmarks/bench_design.py --write docs/performance.md"


def browser():
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service
    options = webdriver.ChromeOptions()
    options.binary_location = "/usr/bin/chromium"
    for arg in ("--headless=new", "--no-sandbox", "--disable-gpu", "--window-size=1300,980",
                "--no-proxy-server", f"--user-data-dir={tempfile.mkdtemp()}"):
        options.add_argument(arg)
    return webdriver.Chrome(options=options, service=Service("/usr/bin/chromedriver"))


def wait(driver, script, value, timeout=120):
    from selenium.webdriver.support.ui import WebDriverWait
    WebDriverWait(driver, timeout).until(lambda d: d.execute_script(script) == value)


def one_edit(driver, request: dict) -> tuple[float, dict]:
    done = driver.execute_script("return Number(document.body.dataset.edits || 0)")
    driver.execute_script("edit(arguments[0])", request)
    wait(driver, "return document.body.dataset.edits", str(done + 1))
    ms = float(driver.execute_script("return document.getElementById('timing').dataset.ms"))
    return ms, driver.execute_script("return S.timing")


def measure_site(name: str, driver, repeat: int) -> list[dict]:
    folder = Path(tempfile.mkdtemp()) / name
    shutil.copytree(example_site(name).parent, folder)
    t0 = time.perf_counter()
    session = DesignSession(folder / "site.toml")
    open_s = time.perf_counter() - t0
    server = DesignServer(session)
    thread = threading.Thread(target=server.serve_forever, kwargs={"poll_interval": 0.05})
    thread.start()
    rows = []
    try:
        t0 = time.perf_counter()
        driver.get(server.url)
        wait(driver, "return document.body.dataset.ready", "yes")
        load_s = time.perf_counter() - t0
        lay = session.layout
        shape = f"{lay.spec.nx} × {lay.spec.ny} cells of {lay.spec.dx:g} m"
        for body in list(lay.parts):
            if movable_geometry(lay, body) is None:
                continue
            cell = lay.spec.dx / lay.site.metres_per_unit
            kind = lay.doc["bodies"][body]["kind"]
            for how, step in ((f"drag {body} ({kind}) 2 cells", 2 * cell),
                              (f"move {body} ({kind}) 2.5 units typed", 2.5)):
                runs = [one_edit(driver, {"op": "move", "body": body, "dy": 0.0,
                                          "dx": step if k % 2 == 0 else -step})
                        for k in range(2 * repeat)]
                best = min(runs, key=lambda r: r[0])
                rows.append({"site": name, "what": how, "ms": best[0],
                             "median": statistics.median(r[0] for r in runs),
                             "timing": best[1], "open_s": open_s, "load_s": load_s,
                             "grid": shape})
        runs = [one_edit(driver, {"op": "depth", "depth": d}) for d in (3.0, 6.0) * repeat]
        best = min(runs, key=lambda r: r[0])
        rows.append({"site": name, "what": "new slice depth (every body)", "ms": best[0],
                     "median": statistics.median(r[0] for r in runs), "timing": best[1],
                     "open_s": open_s, "load_s": load_s, "grid": shape})
    finally:
        server.shutdown()
        server.server_close()
        thread.join()
    return rows


def markdown(rows: list[dict], repeat: int) -> str:
    load = os.getloadavg()
    lines = [BEGIN, "## Design page", "",
             f"Measured by `{COMMAND}` on {datetime.datetime.now(datetime.timezone.utc):%Y-%m-%d %H:%M} "
             f"UTC, {platform.machine()} with {os.cpu_count()} cores, load average "
             f"{load[0]:.1f} / {load[1]:.1f} / {load[2]:.1f} at the end. Edit → redraw is "
             "measured in headless Chromium from sending the edit to the end of the redraw "
             f"(best and median of {2 * repeat} moves there and back); the server's share is split "
             "into the edited body's cells, its FFT slice and Δσz at the receptor points. A drag "
             "snaps to whole cells, so the body's cells are shifted; a typed offset that is not "
             "whole cells rasterises the body again on the cells around it. Targets (issue 18): "
             "edit → redraw ≤ 0.5 s, page load ≤ 3 s.",
             "",
             "| site | lattice | site read + every body (s) | page load (s) | edit | edit → redraw best / median (ms) | server: body, slice, receptors (ms) | target 0.5 s |",
             "|---|---|---|---|---|---|---|---|"]
    for r in rows:
        t = r["timing"]
        lines.append(
            f"| {r['site']} | {r['grid']} | {r['open_s']:.2f} | {r['load_s']:.2f} | {r['what']} | "
            f"{r['ms']:.0f} / {r['median']:.0f} | {1000 * t['raster_s']:.0f}, "
            f"{1000 * t['slice_s']:.0f}, {1000 * t['points_s']:.0f} | "
            f"{'met' if r['ms'] <= 500 else '**not met**'} |")
    missed = [f"{r['site']}: {r['what']}" for r in rows if r["ms"] > 500]
    if missed:
        lines += ["", f"Where the target is missed ({'; '.join(missed)}), the time goes into "
                  "rasterising the body: its cell averages (16 sub-samples a cell; "
                  "shapes/stockpile.py, shapes/embankment.py) on the cells around it, an "
                  "embankment's window widened by half its reach for the toe corners. The "
                  "other edits that rasterise (height, slopes, a turn) cost about as much as a "
                  "typed move; a drag shifts the cells and stays well inside the target."]
    lines.append(END)
    return "\n".join(lines)


def write_section(path: Path, text: str, begin: str = BEGIN, end: str = END) -> None:
    """Put `text` (which starts with `begin` and ends with `end`) in place of the marked
    section of `path`, everything outside it kept; appended when the file has no such
    section. benchmarks/run_all.py writes its own section with it, so neither script
    overwrites the other's figures."""
    if not (text.startswith(begin) and text.rstrip("\n").endswith(end)):
        raise ValueError(f"the section must run from {begin!r} to {end!r}")
    old = path.read_text(encoding="utf-8") if path.exists() else ""
    if begin in old and end in old[old.index(begin):]:
        start = old.index(begin)
        stop = old.index(end, start) + len(end)
        new = old[:start] + text.rstrip("\n") + old[stop:]
    else:
        new = (old.rstrip("\n") + "\n\n" if old else "") + text.rstrip("\n") + "\n"
    path.write_text(new, encoding="utf-8")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--sites", nargs="*", default=[n for n, _ in list_examples()])
    ap.add_argument("--write", type=Path)
    args = ap.parse_args()
    driver = browser()
    try:
        rows = [r for name in args.sites for r in measure_site(name, driver, args.repeat)]
    finally:
        driver.quit()
    text = markdown(rows, args.repeat)
    if args.write:
        write_section(args.write, text)
        print(f"wrote the design page section of {args.write}")
    else:
        print(text)


if __name__ == "__main__":
    main()
