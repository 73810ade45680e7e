"""A plain `pip install .` (no extras) runs the whole job: with the optional packages'
imports blocked (a None entry in sys.modules makes `import` fail), a run writes every
file but the 3D scene and the VTK files, and says they need the `view` extra; a
distributed run, the 3D view and those files asked for explicitly are refused with their
extra named."""
import json
import subprocess
import sys

import pytest

from fillstress.errors import InputError

OPTIONAL = ("dask", "distributed", "trame", "trame_vtk", "trame_pyvista", "nest_asyncio2",
            "compliance_checker", "rioxarray", "pyvista", "vtk")
SITE = """
# Invented: a stockpile pad on a US-foot state-plane CRS.
[site]
name = "Marlow Creek pad"
crs = "EPSG:2277"
units = "US"

[grid]
cell = 4.0
margin = 20.0
convergence_check = false

[bodies.pad]
kind = "footprint"
outline = [[3115400.0, 10071800.0], [3115480.0, 10071800.0], [3115480.0, 10071860.0],
           [3115400.0, 10071860.0]]
height = 8.0
unit_weight = 120.0

[[boreholes]]
id = "B-1"
x = 3115440.0
y = 10071830.0
top = 2.0
bottom = 30.0
step = 4.0

[[plan_grids]]
name = "pad"
depths = [5.0, 15.0]
"""


def _without_extras(*argv: str) -> subprocess.CompletedProcess:
    """`fillstress argv` in a fresh interpreter with the extras blocked: in this process
    earlier tests have loaded them, and libraries (xarray) remember what they found."""
    script = ("import sys\n"
              f"for name in {OPTIONAL!r}:\n    sys.modules[name] = None\n"
              "from fillstress.cli import main\n"
              f"sys.exit(main({list(argv)!r}))\n")
    return subprocess.run([sys.executable, "-c", script], capture_output=True, text=True,
                          timeout=600)


def test_run_without_any_extra_writes_everything(tmp_path):
    (tmp_path / "site.toml").write_text(SITE)
    out = tmp_path / "out"
    said = _without_extras("run", str(tmp_path / "site.toml"), "-o", str(out))
    assert said.returncode == 0, said.stderr[-2000:]
    assert "Traceback" not in said.stderr
    assert "fillstress[view]" in said.stdout + said.stderr
    manifest = json.loads((out / "manifest.json").read_text())
    for name in ("report.html", "stress_cube.nc", "fill_thickness.tif",
                 "layers.gpkg", "summary.json"):
        assert name in manifest["outputs"], name
    assert not any(name.startswith("vtk/") or name == "scene.html"
                   for name in manifest["outputs"])
    assert not (out / "vtk").exists() and not (out / "scene.html").exists()
    warnings = json.loads((out / "summary.json").read_text())["warnings"]
    for what in ("vtk/", "scene.html"):
        assert any(what in w and "fillstress[view]" in w for w in warnings), what
    for option, name in (("--png", "v.png"), ("--html", "s.html")):
        said = _without_extras("view", str(out), option, str(tmp_path / name))
        assert said.returncode == 2 and "needs the 'view' extra" in said.stderr
        assert not (tmp_path / name).exists()


@pytest.mark.parametrize("key", ["vtk", "scene"])
def test_view_output_asked_for_without_its_extra_is_refused_before_any_work(tmp_path, key):
    (tmp_path / "site.toml").write_text(SITE + f"\n[outputs]\n{key} = true\n")
    out = tmp_path / "out"
    said = _without_extras("run", str(tmp_path / "site.toml"), "-o", str(out))
    err = said.stderr
    assert said.returncode == 2 and f"[outputs.{key}] needs the 'view' extra" in err and "Traceback" not in err
    assert not out.exists()


@pytest.mark.parametrize("missing", ["distributed", "dask"])
def test_dask_runs_name_the_dask_extra(monkeypatch, missing):
    from fillstress.solve.distributed import connect
    monkeypatch.setitem(sys.modules, missing, None)
    with pytest.raises(InputError, match=r"fillstress\[dask\].*" + missing):
        with connect(2):
            pass
