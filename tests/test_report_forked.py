"""Report sections shared with a forked second process (report/forked.py): the same page,
the same errors, as making them one after another."""
from __future__ import annotations

import os
import re
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from fillstress.report import forked
from fillstress.report.html import write_run_report
from results_fixture import write_results_folder

SRC = Path(__file__).resolve().parents[1] / "src"


@pytest.fixture
def forking(monkeypatch):
    """Fork as on a machine of two cores (the test machine may have one)."""
    monkeypatch.setattr(forked, "can_fork", lambda: True)


def _slow(value, seconds=0.15):
    def make():
        time.sleep(seconds)
        return f"{value}:{os.getpid()}"
    return make


def test_both_processes_make_sections_and_the_order_is_kept(forking):
    makers = {k: _slow(k) for k in "abcdefgh"}
    made = forked.make_all(makers, first=("g", "c"))
    assert list(made) == list("abcdefgh")
    assert [v.split(":")[0] for v in made.values()] == list("abcdefgh")
    pids = {v.split(":")[1] for v in made.values()}
    assert str(os.getpid()) in pids and len(pids) == 2


def test_the_first_error_in_order_is_raised_as_one_after_another(forking):
    def fails(exc):
        def make():
            time.sleep(0.05)
            raise exc
        return make
    makers = {"a": _slow("a"), "b": fails(ValueError("b broke")), "c": _slow("c"),
              "d": fails(KeyError("d")), "e": _slow("e")}
    with pytest.raises(ValueError, match="b broke"):
        forked.make_all(makers, first=("d",))
    fine = {k: v for k, v in makers.items() if k not in "bd"}
    assert list(forked.make_all(fine)) == ["a", "c", "e"]


def test_a_child_that_dies_leaves_its_sections_to_the_parent(forking):
    parent = os.getpid()

    def dies_in_child():
        if os.getpid() != parent:
            os._exit(3)
        return "made here"
    makers = {"a": dies_in_child, "b": dies_in_child, "c": _slow("c"), "d": _slow("d")}
    made = forked.make_all(makers)
    assert made["a"] == made["b"] == "made here"
    assert all(v.startswith(("c:", "d:")) for k, v in made.items() if k in "cd")


def test_report_made_by_two_processes_is_the_one_made_by_one(tmp_path, monkeypatch):
    truth = write_results_folder(tmp_path / "a" / "run")
    shutil.copytree(truth.path, tmp_path / "b" / "run")
    clock = re.compile(r"\d{4}-\d\d-\d\d[ T]\d\d:\d\d(:\d\d)?( UTC|Z)")
    pages = []
    for where, fork in ((tmp_path / "a" / "run", True), (tmp_path / "b" / "run", False)):
        monkeypatch.setattr(forked, "can_fork", lambda fork=fork: fork)
        pages.append(clock.sub("", write_run_report(where).read_text(encoding="utf-8")))
    assert pages[0] == pages[1]
    assert pages[0].count("<section") > 10


def test_without_a_process_to_fork_all_is_made_here(forking, monkeypatch):
    def refused():
        raise OSError(11, "Resource temporarily unavailable")
    monkeypatch.setattr(forked.os, "fork", refused)
    made = forked.make_all({k: _slow(k, 0.0) for k in "abc"})
    assert {v.split(":")[1] for v in made.values()} == {str(os.getpid())}


def test_warnings_met_by_the_child_are_shown_here(forking):
    """The child writes nothing to the terminal (a progress bar's lock may be held at the
    fork): its warnings come back with its sections and are issued by the parent."""
    parent = os.getpid()

    def warns(key):
        def make():
            time.sleep(0.1)
            if os.getpid() != parent:
                import warnings
                warnings.warn(f"{key} made in the child", RuntimeWarning)
            return key
        return make
    with pytest.warns(RuntimeWarning) as caught:
        made = forked.make_all({k: warns(k) for k in "abcd"})
    assert made == {k: k for k in "abcd"}
    assert caught and all(str(w.message).endswith("made in the child") for w in caught)


def test_scene_made_beside_the_sections_is_the_scene_made_after_the_report(tmp_path,
                                                                           monkeypatch):
    """A run makes its 3D scene in the report's two processes (write_run_report's
    `beside`): the report and scene equal those written one after the other, alone."""
    from fillstress.io.results import ResultsFolder
    from fillstress.scene_page import export_scene_html
    truth = write_results_folder(tmp_path / "a" / "run")
    shutil.copytree(truth.path, tmp_path / "b" / "run")
    beside, after = tmp_path / "a" / "run", tmp_path / "b" / "run"
    monkeypatch.setattr(forked, "can_fork", lambda: True)
    view = ResultsFolder(beside)
    write_run_report(view, beside / "report.html",
                     beside={"scene": lambda: export_scene_html(view, beside / "scene.html")})
    monkeypatch.setattr(forked, "can_fork", lambda: False)
    write_run_report(after)
    export_scene_html(after)
    clock = re.compile(r"\d{4}-\d\d-\d\d[ T]\d\d:\d\d(:\d\d)?( UTC|Z)")
    for name in ("report.html", "scene.html"):
        a, b = (clock.sub("", (d / name).read_text(encoding="utf-8")) for d in (beside, after))
        assert a == b, name
    assert (beside / "scene.html").stat().st_size > 10_000


def _alive(pid: int) -> bool:
    """Whether process `pid` runs (a zombie left unreaped counts as gone)."""
    try:
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().rsplit(")", 1)[1].split()[0] != "Z"
    except FileNotFoundError:
        return False


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="forks on Linux only")
def test_a_run_killed_while_its_child_writes_leaves_no_writer_and_no_lock(tmp_path):
    """SIGKILL of a run in the middle of make_all: its forked child dies with it
    (PR_SET_PDEATHSIG), and the unfinished folder is seen stranded as soon as the run is
    gone (test_io_atomic: a forked child holds no copy of the lock)."""
    from fillstress.io.atomic import _abandoned
    pid_file, out = tmp_path / "child.pid", tmp_path / "res"
    script = f"""
import os, signal, time
from fillstress.io.atomic import ResultsWriter
from fillstress.report import forked
forked.can_fork = lambda: True
PARENT = os.getpid()

def piece():
    if os.getpid() != PARENT:                  # the child: writes on for a long while
        open({str(pid_file)!r}, "w").write(str(os.getpid()))
        time.sleep(60)
    while not os.path.exists({str(pid_file)!r}):
        time.sleep(0.01)
    time.sleep(0.1)
    os.kill(PARENT, signal.SIGKILL)            # the run killed while its child writes

with ResultsWriter({str(out)!r}):
    forked.make_all({{"a": piece, "b": piece}})
"""
    run = subprocess.run([sys.executable, "-c", script], env={**os.environ, "PYTHONPATH": str(SRC)},
                         timeout=120)
    assert run.returncode == -signal.SIGKILL
    partial, = tmp_path.glob(".res.partial-*")
    assert _abandoned(partial)
    child = int(pid_file.read_text())
    deadline = time.monotonic() + 10
    try:
        while _alive(child) and time.monotonic() < deadline:
            time.sleep(0.01)
        assert not _alive(child)
    finally:
        if _alive(child):
            os.kill(child, signal.SIGKILL)
