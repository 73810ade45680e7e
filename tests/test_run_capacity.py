"""A run checks its memory before it starts: point work over the cap is refused with the
numbers; plan slices over the cap are computed in tiles with the same values."""
import shutil

import numpy as np

from fillstress.cli import main
from fillstress.run.plan import run_estimates, slices_need_tiles
from fillstress.examples import example_site
from fillstress.run.compute import compute
from fillstress.site.build import load_site
from fillstress.solve.cost import estimate_slices


def _site_with_cap(tmp_path, cap_gb):
    dst = tmp_path / "site"
    shutil.copytree(example_site("preload_surcharge").parent, dst)
    toml = dst / "site.toml"
    toml.write_text(toml.read_text().replace("margin = 30.0", f"margin = 30.0\nmemory_cap = {cap_gb!r}"))
    return toml


def test_point_work_over_the_cap_is_refused_before_anything_is_written(tmp_path, capsys):
    toml = _site_with_cap(tmp_path, 1e-6)               # 1 kB
    out = tmp_path / "out"
    assert main(["run", str(toml), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert "needs" in err and "cap is" in err and len(err.strip().splitlines()) == 1
    assert not out.exists() and not list(tmp_path.glob(".*partial*"))


def test_slices_over_the_cap_are_tiled_with_the_same_values(tmp_path):
    plain = load_site(example_site("preload_surcharge"))
    est = {e.operation: e.bytes for e in run_estimates(plain)}
    points = max(v for k, v in est.items() if not k.startswith("plan grid"))
    plan = plain.plan_grids[0]
    # one grid's slices alone, the smallest a plan step asks without tiles
    slices = estimate_slices(plain.spec.shape, len(plan.depths)).bytes
    assert points < slices, "the test needs slices to be the largest item"
    capped = load_site(_site_with_cap(tmp_path, (points + slices) / 2 / 1e9))
    assert slices_need_tiles(capped, capped.plan_grids[0])
    a = compute(plain).slices["pad"]
    b = compute(capped).slices["pad"]
    np.testing.assert_allclose(b.values, a.values, rtol=0, atol=1e-10 * float(abs(a).max()))
    assert b.dims == a.dims and np.array_equal(b.x, a.x) and np.array_equal(b.y, a.y)


def test_the_estimate_pads_the_slices_as_the_solver_does():
    """Pad-to-cells is one rule: 2.1 m on 0.3 m cells is 7 cells (2.1 / 0.3 is
    7.000000000000001 in floating point; a bare ceil gives 8)."""
    from types import SimpleNamespace

    from fillstress import LoadGrid
    from fillstress.grid import GridSpec
    from fillstress.run.plan import _pad_cells, plan_pad
    from fillstress.solve.slices import slice_setup

    site = SimpleNamespace(spec=GridSpec(0.0, 0.0, 0.3, 0.3, 10, 10))
    plan = SimpleNamespace(xmin=-2.1, ymin=0.0, xmax=3.0, ymax=3.0)
    grid = LoadGrid(np.ones((10, 10)), 0.0, 0.0, 0.3, 0.3)
    solver = slice_setup(grid, [1.0], pad=plan_pad(site, plan))[1]["pad_cells"]
    assert _pad_cells(site, plan) == solver == (7, 7)
