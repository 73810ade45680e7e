"""A plain `pip install .` (no extras) runs the whole job: with the optional packages'
imports blocked (a None entry in sys.modules makes `import` fail), a run writes every
file, the 3D scene included; a distributed run is refused with the `dask` extra named."""
import json
import sys

import pytest

from fillstress.cli import main
from fillstress.errors import InputError

OPTIONAL = ("dask", "distributed", "trame", "trame_vtk", "trame_pyvista", "nest_asyncio2",
            "compliance_checker", "rioxarray")
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


def test_run_without_any_extra_writes_everything(tmp_path, monkeypatch, capsys):
    for name in OPTIONAL:
        monkeypatch.setitem(sys.modules, name, None)
    (tmp_path / "site.toml").write_text(SITE)
    out = tmp_path / "out"
    assert main(["run", str(tmp_path / "site.toml"), "-o", str(out), "-q"]) == 0
    assert capsys.readouterr().err == ""
    manifest = json.loads((out / "manifest.json").read_text())
    for name in ("report.html", "scene.html", "stress_cube.nc", "fill_thickness.tif",
                 "layers.gpkg", "vtk/run.vtm", "summary.json"):
        assert name in manifest["outputs"], name


@pytest.mark.parametrize("missing", ["distributed", "dask"])
def test_dask_runs_name_the_dask_extra(monkeypatch, missing):
    from fillstress.solve.distributed import connect
    monkeypatch.setitem(sys.modules, missing, None)
    with pytest.raises(InputError, match=r"fillstress\[dask\].*" + missing):
        with connect(2):
            pass
