"""`fillstress view`: the same options as the Python API, checks before rendering, quiet
headless runs. Data from tests/results_fixture.py (invented site)."""
from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from PIL import Image

from fillstress import viewer
from fillstress.cli import main
from guide_images import keep
from results_fixture import write_results_folder

SRC = str(Path(__file__).resolve().parents[1] / "src")


@pytest.fixture(scope="module")
def truth(tmp_path_factory):
    return write_results_folder(tmp_path_factory.mktemp("cli") / "run")


def test_help_lists_the_api_options(capsys):
    with pytest.raises(SystemExit):
        main(["view", "--help"])
    text = capsys.readouterr().out
    for option in ("--layers", "--depth", "--camera", "--colour-range", "--quantity", "--html"):
        assert option in text
    for quantity in ("dsz", "stress_ratio", "settlement", "sigma_v0"):
        assert quantity in text


def test_options_reach_the_picture(truth, tmp_path):
    """--camera xy --layers slices --depth 6 draws the 6 m slice seen from above: its
    pixels are viridis colours that stop short of the top of the colour bar."""
    out = tmp_path / "plan.png"
    assert main(["view", str(truth.path), "--png", str(out), "--camera", "xy",
                 "--layers", "slices", "--depth", "6", "--colour-range", "0", "100"]) == 0
    img = np.asarray(Image.open(out).convert("RGB")).astype(int)
    keep(out, "view_plan_6m.png")
    h, w, _ = img.shape
    body = img[int(0.12 * h):int(0.88 * h), :int(0.8 * w)]
    from matplotlib import colormaps
    table = np.round(colormaps["viridis"](np.linspace(0, 1, 256))[:, :3] * 255).astype(int)
    colours, inverse = np.unique(body.reshape(-1, 3), axis=0, return_inverse=True)
    dist = np.abs(colours[:, None, :] - table[None]).max(axis=2)
    hit = dist.min(axis=1) <= 4
    assert hit[inverse.ravel()].mean() > 0.2
    shown = dist.argmin(axis=1)[hit] / 255 * 100.0
    slice6 = truth.dsz[truth.depths.index(6.0)]
    assert shown.max() == pytest.approx(slice6.max(), abs=1.5)     # --colour-range 0 100 applied
    # the title band and the caution band carry text
    assert np.any(img[: int(0.04 * h)] < 100) and np.any(img[int(0.96 * h):] < 100)


def _exit_code(argv) -> int:
    try:
        return main(argv)
    except SystemExit as exc:          # argparse refuses a value outside its choices
        return exc.code


def test_bad_view_options_are_refused(truth, tmp_path, capsys):
    png = str(tmp_path / "x.png")
    for args, needle in [(["--layers", "slices,clouds"], "layers"),
                         (["--camera", "top"], "camera"), (["--quantity", "heave"], "quantity"),
                         (["--depth", "3"], "depth"), (["--colour-range", "9", "1"], "colour_range")]:
        assert _exit_code(["view", str(truth.path), "--png", png, *args]) == 2
        assert needle in capsys.readouterr().err
    assert not (tmp_path / "x.png").exists()


def test_missing_png_folder_is_reported_before_rendering(truth, tmp_path, capsys, monkeypatch):
    def no_render(*a, **k):
        raise AssertionError("rendered before checking the output folder")
    monkeypatch.setattr(viewer, "build_scene", no_render)
    monkeypatch.setattr(viewer, "scene_parts", no_render)
    for flag in ("--png", "--html"):
        target = tmp_path / "no_such_folder" / "view.out"
        assert main(["view", str(truth.path), flag, str(target)]) == 2
        err = capsys.readouterr().err
        assert "no_such_folder" in err and "folder does not exist" in err


def test_window_without_a_display_says_so(truth, capsys, monkeypatch):
    monkeypatch.delenv("DISPLAY", raising=False)
    monkeypatch.delenv("WAYLAND_DISPLAY", raising=False)
    monkeypatch.setattr(sys, "platform", "linux")
    assert main(["view", str(truth.path)]) == 2
    err = capsys.readouterr().err
    assert "no display" in err and "--png" in err and "Traceback" not in err


def test_headless_render_prints_nothing_on_stderr(truth, tmp_path):
    env = {k: v for k, v in os.environ.items() if k not in ("DISPLAY", "WAYLAND_DISPLAY")}
    env["PYTHONPATH"] = SRC
    out = tmp_path / "quiet.png"
    proc = subprocess.run([sys.executable, "-m", "fillstress.cli", "view", str(truth.path),
                           "--png", str(out), "--quantity", "stress_ratio"],
                          env=env, capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    assert "bad X server" not in proc.stderr and proc.stderr.strip() == ""
    assert out.stat().st_size > 10_000
    keep(out, "view_stress_ratio.png")
