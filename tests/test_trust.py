"""Outputs you can trust: the same inputs give the same bytes, text cannot run as a
spreadsheet formula, the building summary is taken at the foundation, a headless run is
quiet, and Ctrl-C ends a run (Dask included) with one line."""
from __future__ import annotations

import json
import re
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pandas as pd
import pytest

from fillstress.cli import main
from fillstress.io.results import ResultsFolder
from tiny_site import SITE, tree_hashes, write_site

SRC = Path(__file__).resolve().parents[1] / "src"
FORMULA_ID = '=HYPERLINK(""http://example.invalid"")'
EXTRA = f'''
[[plan_grids]]
name = "p"
depths = [2.0, 4.0]

[[buildings]]
id = "{FORMULA_ID}"
outline = [[500030.0, 5200000.0], [500040.0, 5200000.0], [500040.0, 5200008.0], [500030.0, 5200008.0]]
foundation_depth = 1.0
'''.replace('""', '\\"')


@pytest.fixture(scope="module")
def two_runs(tmp_path_factory):
    root = tmp_path_factory.mktemp("same")
    site = write_site(root, SITE + EXTRA)
    for name in ("a", "b"):
        assert main(["run", str(site), "-o", str(root / name), "-q", "--no-report"]) == 0
    return root / "a", root / "b"


def _without_times(folder: Path, rel: str) -> dict:
    data = json.loads((folder / rel).read_text())
    if rel == "summary.json":
        data.pop("timings_s")
    else:                                   # manifest: when, and the summary's checksum
        data.pop("created")
        data["outputs"].pop("summary.json")
    return data


def test_same_inputs_give_identical_data_files(two_runs):
    a, b = two_runs
    ha, hb = tree_hashes(a), tree_hashes(b)
    assert set(ha) == set(hb)
    timed = {"summary.json", "manifest.json"}
    assert {k: v for k, v in ha.items() if k not in timed} == \
        {k: v for k, v in hb.items() if k not in timed}
    for rel in timed:
        assert _without_times(a, rel) == _without_times(b, rel)
    layer = json.loads((a / "boreholes.geojson").read_text())["name"]
    assert layer == "boreholes"
    header = (a / "vtk" / "stress_p.vtr").read_bytes().split(b"<AppendedData")[0]
    # no memory address in the markup; base64 payloads may spell "0x" by chance
    assert b"0x" not in re.sub(rb">[A-Za-z0-9+/=\s]+<", b"><", header)


def test_formula_text_is_neutralised_and_numbers_stay_numbers(two_runs):
    a, _ = two_runs
    raw = pd.read_csv(a / "buildings_summary.csv", dtype=str)
    assert raw["receptor_id"].iloc[0] == "'" + FORMULA_ID.replace('""', '"')
    assert float(raw["dsz_max_kPa"].iloc[0]) > 0             # a number, not quoted text
    points = pd.read_csv(a / "buildings_points.csv", dtype=str)
    assert points["point_id"].str.startswith("'=").all()
    # fillstress's own reader gives the id back as written
    table = ResultsFolder(a).table("buildings_summary")
    assert table["receptor_id"].iloc[0] == FORMULA_ID.replace('""', '"')


def test_building_summary_is_taken_at_the_foundation(two_runs):
    a, _ = two_runs
    summary = pd.read_csv(a / "buildings_summary.csv")
    points = pd.read_csv(a / "buildings_points.csv")
    footprint = points[points["role"] != "profile"]
    assert summary["depth_at_max_m"].iloc[0] == pytest.approx(1.0)
    assert summary["dsz_max_kPa"].iloc[0] == pytest.approx(footprint["dsz_kPa"].max())
    # the profile below reaches deeper points with a larger Δσz beside the pad
    assert points[points["role"] == "profile"]["depth_m"].max() > 1.0


def test_headless_run_with_report_is_quiet(tmp_path, capfd):
    site = write_site(tmp_path, SITE)
    assert main(["run", str(site), "-o", str(tmp_path / "r"), "-q"]) == 0
    out, err = capfd.readouterr()
    assert out == "" and err == ""                          # no VTK X-server line
    assert (tmp_path / "r" / "scene.html").is_file()


def _interrupted(tmp_path, patch: str, args=()):
    """Run the command in a child whose computation receives SIGINT (as Ctrl-C sends)."""
    site = write_site(tmp_path, SITE)
    code = ("import os, signal, sys, time\nimport fillstress.run.compute as compute\n"
            + textwrap.dedent(patch) + "\nfrom fillstress.cli import main\n"
            'sys.exit(main(["run", sys.argv[1], "-o", sys.argv[2], *sys.argv[3:]]))\n')
    env = {**os.environ, "PYTHONPATH": str(SRC)}
    env.pop("DISPLAY", None)
    return subprocess.run([sys.executable, "-c", code, str(site), str(tmp_path / "out"),
                           *args], env=env, capture_output=True, text=True, timeout=300)


def test_ctrl_c_during_a_run_is_one_line_and_exit_130(tmp_path):
    patch = """
def interrupted(*a, **k):
    os.kill(os.getpid(), signal.SIGINT)
    time.sleep(30)
compute.compute = interrupted
"""
    proc = _interrupted(tmp_path, patch, ("-q",))
    assert proc.returncode == 130, proc.stderr
    assert proc.stderr.count("\n") == 1 and "interrupted" in proc.stderr
    assert not (tmp_path / "out").exists()


def test_ctrl_c_during_a_dask_run_is_one_line_and_exit_130(tmp_path):
    patch = """
real = compute.compute
def interrupted(site, progress, client=None):
    future = client.submit(time.sleep, 30, pure=False)
    time.sleep(0.5)
    os.kill(os.getpid(), signal.SIGINT)
    future.result()
compute.compute = interrupted
"""
    proc = _interrupted(tmp_path, patch, ("-q", "--workers", "1"))
    assert proc.returncode == 130, proc.stderr
    lines = [line for line in proc.stderr.splitlines() if line.strip()]
    assert lines == ["fillstress: error: interrupted; no results were changed"], proc.stderr


def test_surfaces_body_does_not_load_numerical_noise():
    import numpy as np
    from fillstress.grid import GridSpec
    from fillstress.shapes.surfaces import TinSurface, fill_from_surfaces
    ground = TinSurface([(0, 0, 10.0), (40, 0, 10.0), (0, 40, 10.0), (40, 40, 10.0)])
    # the same ground surveyed again, 0.4 mm high everywhere, with a 2 m mound at the centre
    lattice = [(x, y, 12.0 if (x, y) == (20, 20) else 10.0004)
               for x in range(0, 41, 10) for y in range(0, 41, 10)]
    design = TinSurface(lattice)
    spec = GridSpec(0.0, 0.0, 2.0, 2.0, 20, 20)
    noisy, _ = fill_from_surfaces(design, ground, spec)
    clean, report = fill_from_surfaces(design, ground, spec, tolerance=0.001)
    assert (noisy > 0).all()                           # every cell loaded by the noise
    assert 0 < (clean > 0).sum() <= 100                # the mound's four 10 m triangles
    assert clean[0, 0] == 0 and clean[-1, -1] == 0
    assert report.area_fill <= 20 * 20 * 1.0 + 1e-9
    np.testing.assert_allclose(clean.max(), noisy.max(), rtol=1e-3)
