"""Writing a results folder (run/files.py): the tables, rasters, cube and VTK files, then
the report's sections and the scene, shared with a forked second process make the folder
made by one process alone."""
from __future__ import annotations

import json
import os
import re

import pytest

from fillstress.examples import example_site
from fillstress.io.atomic import ResultsWriter
from fillstress.io.manifest import verify_folder
from fillstress.report import forked
from fillstress.run.compute import compute, write_results
from fillstress.site.build import load_site


@pytest.fixture(scope="module")
def results():
    return compute(load_site(example_site("preload_surcharge")))


def _write(res, path, fork, monkeypatch):
    monkeypatch.setattr(forked, "can_fork", lambda: fork)
    forks = []
    real = os.fork
    monkeypatch.setattr(forked.os, "fork", lambda: forks.append(1) or real())
    with ResultsWriter(path) as folder:
        write_results(res, folder)
    assert verify_folder(path) == []
    assert len(forks) == (2 if fork else 0)           # the grids, then the report
    return {p.relative_to(path).as_posix(): p for p in sorted(path.rglob("*")) if p.is_file()}


def test_folder_written_by_two_processes_is_the_one_written_by_one(results, tmp_path,
                                                                   monkeypatch):
    """Byte for byte, but for clock times and so the report's checksum."""
    two = _write(results, tmp_path / "a" / "run", True, monkeypatch)
    one = _write(results, tmp_path / "b" / "run", False, monkeypatch)
    assert list(two) == list(one)
    assert {"stress_cube.nc", "vtk/run.vtm", "fill_thickness.tif", "report.html"} <= set(two)
    clock = re.compile(rb"\d{4}-\d\d-\d\d[ T]\d\d:\d\d(:\d\d)?( UTC|Z|\+00:00)?")
    for rel in one:
        a, b = (clock.sub(b"", p.read_bytes()) for p in (two[rel], one[rel]))
        if rel == "manifest.json":
            a, b = (json.loads(t) for t in (a, b))
            a["outputs"].pop("report.html"), b["outputs"].pop("report.html")   # its clock
        assert a == b, rel
