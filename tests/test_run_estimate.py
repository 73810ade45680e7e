"""The run estimate (`fillstress check`) counts the work a run really does: every Δσz call
with its points and load, and every FFT slice call with its depths, compared with the
calls counted in a real run of a small site (no clock involved)."""
from __future__ import annotations

import hashlib
import importlib.util
from collections import Counter
from pathlib import Path

import numpy as np
import pytest

from fillstress.examples import example_site
from fillstress.run import compute as run_compute
from fillstress.run.plan import run_estimates, slice_calls, solver_calls
from fillstress.site.build import load_site

ROOT = Path(__file__).resolve().parents[1]


def _corridor_site(folder: Path) -> Path:
    spec = importlib.util.spec_from_file_location("_corridor_tool",
                                                  ROOT / "tools" / "make_corridor_site.py")
    tool = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(tool)
    return tool.write_corridor_site(folder, miles=0.2, cell_ft=10.0)


def _load_key(pressure) -> str:
    """The load a call is made under, by content (a stage's bodies and one body alone may
    be the same load)."""
    return hashlib.sha1(np.ascontiguousarray(pressure, dtype=float).tobytes()).hexdigest()


def _counted_run(site, monkeypatch):
    """Run `compute(site)` and count its solver calls: the sequence of (points, load or
    "fine") of the Δσz calls, in their order, and a Counter of (plan grid, depths, loads, pressure transforms, shared) for FFT
    slices (a SliceStack's calls, or one grid's alone)."""
    slices, sequence = Counter(), []
    real_stress, real_slices = run_compute.stress, run_compute._plan_slices
    real_slicer = run_compute._plan_slicer
    current = []

    def count(grid, xyz):
        if len(xyz):
            key = "fine" if grid.shape != site.spec.shape else _load_key(grid.pressure)
            sequence.append((len(xyz), key))

    def stress(s, grid, xyz, client=None, memory_cap=None):
        count(grid, xyz)
        return real_stress(s, grid, xyz, client, memory_cap)

    class CountedStress(run_compute.RunStress):       # the steps' evaluator
        def __call__(self, grid, xyz):
            count(grid, xyz)
            return super().__call__(grid, xyz)

    def plan_slices(s, grid, plan, client=None):
        slices[(plan.name, len(plan.depths), 1, 1, False, False)] += 1
        return real_slices(s, grid, plan, client)

    def plan_slicer(s, plan, grids, client=None):
        current[:] = [plan.name]
        return real_slicer(s, plan, grids, client)

    class CountedStack(run_compute.SliceStack):
        def __init__(self, *args, **kwargs):
            super().__init__(*args, **kwargs)
            self.plan_name, self.transforms = current[0], len(self.plan.pressure_hat)

        def slices(self, depths, window=(slice(None), slice(None))):
            n = len(self.plan.pressure_hat)
            slices[(self.plan_name, len(depths), n, self.transforms, True, False)] += 1
            self.transforms = 0                  # made once, on the first call
            return super().slices(depths, window)

    monkeypatch.setattr(run_compute, "stress", stress)
    monkeypatch.setattr(run_compute, "RunStress", CountedStress)
    monkeypatch.setattr(run_compute, "_plan_slices", plan_slices)
    monkeypatch.setattr(run_compute, "_plan_slicer", plan_slicer)
    class CountedFolded(run_compute.FoldedSlices):
        def __init__(self, *args, **kwargs):
            super().__init__(*args, **kwargs)
            self.plan_name, self.transforms = current[0], len(self.pressure_hat)

        def slices(self, depths):
            slices[(self.plan_name, len(depths), len(self.pressure_hat), self.transforms,
                    False, True)] += 1
            self.transforms = 0
            return super().slices(depths)

    def kept_slicer(s, plan, grids, keep, client=None):
        current[:] = [plan.name]
        return real_kept(s, plan, grids, keep, client)

    real_kept = run_compute._kept_slicer
    monkeypatch.setattr(run_compute, "SliceStack", CountedStack)
    monkeypatch.setattr(run_compute, "FoldedSlices", CountedFolded)
    monkeypatch.setattr(run_compute, "_kept_slicer", kept_slicer)
    run_compute.compute(site)
    return sequence, slices


def _planned(site):
    body = {b.name: b.pressure for b in site.bodies}
    points = [(c.n, "fine" if c.fine else _load_key(
        body[c.load] if isinstance(c.load, str) else site.load_grid(c.load).pressure))
        for c in solver_calls(site)]          # in the order the run makes them
    slices = Counter((c.plan.name, c.n_depths, c.loads, c.transforms, c.stacked,
                      c.folded is not None) for c in slice_calls(site))
    return points, slices


@pytest.mark.parametrize("which", ["preload_surcharge", "bridge_approach", "corridor"])
def test_the_estimate_counts_every_solver_call_of_a_run(which, tmp_path, monkeypatch):
    path = example_site(which) if which != "corridor" else _corridor_site(tmp_path)
    site = load_site(path)
    counted = _counted_run(site, monkeypatch)
    assert len(counted[0]) > 3                     # the site exercises several steps
    assert _planned(site) == counted
    # the bridge approach's settlement plan goes through the folded torus
    assert any(key[-1] for key in counted[1]) == (which == "bridge_approach")


def test_each_step_of_the_corridor_is_estimated(tmp_path):
    """The alignment's profile and sections and the settlement columns each get an
    estimate line (they were once left out, and `check` said a sixth of the run)."""
    site = load_site(_corridor_site(tmp_path))
    steps = {e.operation: e for e in run_estimates(site)}
    for step in ("receptor points", "settlement columns", "alignment profile",
                 "alignment sections", "convergence check", "bodies on half cells"):
        assert steps[step].seconds > 0, step
    calls = Counter(c.step for c in solver_calls(site))
    assert calls["settlement columns"] > 1 and f"{calls['settlement columns']} calls" in \
        steps["settlement columns"].detail


def test_run_timings_name_every_step_it_ran(tmp_path, capsys):
    """`run --timings` prints the time of each step; summary.json keeps them (values are
    times, so only their presence, order and sum are checked)."""
    import json

    from fillstress.cli import main

    out = tmp_path / "out"
    assert main(["run", str(example_site("preload_surcharge")), "-o", str(out),
                 "--no-report", "--timings"]) == 0
    printed = capsys.readouterr().out
    assert "Time per step" in printed and "plan settlement" in printed
    timings = json.loads((out / "summary.json").read_text())["timings_s"]
    steps = ["site_build_s", "bodies_s", "receptor_points_s", "plan_slices_s",
             "stress_ratios_s", "settlement_s", "plan_settlement_s", "convergence_check_s",
             "compute_s"]
    assert list(timings) == steps
    assert sum(v for k, v in timings.items() if k not in ("site_build_s", "bodies_s",
                                                          "compute_s")) <= timings["compute_s"]
