"""Atomic file writes and the results-folder transaction."""
from __future__ import annotations

import os

import pytest

from fillstress import InputError
from fillstress.io import atomic
from fillstress.io.atomic import EXISTS_MESSAGE, ResultsWriter, write_atomic


def _tree(root):
    """Every path under `root` (relative, POSIX) with file contents, for before/after checks."""
    out = {}
    for p in sorted(root.rglob("*")):
        rel = p.relative_to(root).as_posix()
        out[rel] = p.read_text() if p.is_file() else None
    return out


MANIFEST = '{"program": "fillstress"}'


def _earlier_results(folder, **files):
    """A finished results folder of an earlier run (its manifest names fillstress)."""
    folder.mkdir()
    (folder / "manifest.json").write_text(MANIFEST)
    for name, text in files.items():
        (folder / name).write_text(text)
    return folder


# --- write_atomic ----------------------------------------------------------------------
def test_write_atomic_replaces_a_file(tmp_path):
    target = tmp_path / "bodies.csv"
    target.write_text("old")
    write_atomic(target, lambda p: p.write_text("new"))
    assert target.read_text() == "new"
    assert [p.name for p in tmp_path.iterdir()] == ["bodies.csv"]


def test_write_atomic_keeps_the_extension_for_format_sniffing(tmp_path):
    seen = []
    write_atomic(tmp_path / "a.tar.gz", lambda p: (seen.append(p.name), p.write_text("x")))
    assert seen[0].endswith("a.tar.gz") and seen[0].startswith(".")


def test_failed_write_leaves_the_old_file_and_no_temporary(tmp_path):
    target = tmp_path / "summary.json"
    target.write_text("earlier")

    def half_then_fail(p):
        p.write_text("half")
        raise OSError("disk full (simulated)")

    with pytest.raises(OSError, match="simulated"):
        write_atomic(target, half_then_fail)
    assert _tree(tmp_path) == {"summary.json": "earlier"}


def test_writer_that_creates_nothing_is_an_error(tmp_path):
    with pytest.raises(RuntimeError, match="did not create"):
        write_atomic(tmp_path / "x.txt", lambda p: None)
    assert not list(tmp_path.iterdir())


def test_missing_folder_is_an_input_error(tmp_path):
    with pytest.raises(InputError, match="folder does not exist"):
        write_atomic(tmp_path / "nope" / "x.txt", lambda p: p.write_text("x"))


# --- ResultsWriter ---------------------------------------------------------------------
def test_commit_renames_the_partial_folder_into_place(tmp_path):
    with ResultsWriter(tmp_path / "run") as out:
        write_atomic(out.path("slices/dsz_plan_z02.00m.tif"), lambda p: p.write_text("t"))
        write_atomic(out.path("manifest.json"), lambda p: p.write_text("{}"))
        assert out.root.parent == tmp_path and out.root.name.startswith(".run.partial-")
        assert not (tmp_path / "run").exists()  # nothing visible before commit
        assert out.files() == ["manifest.json", "slices/dsz_plan_z02.00m.tif"]
    assert _tree(tmp_path) == {"run": None, "run/manifest.json": "{}", "run/slices": None,
                               "run/slices/dsz_plan_z02.00m.tif": "t"}


def test_existing_folder_is_refused_before_any_work(tmp_path):
    (tmp_path / "run").mkdir()
    (tmp_path / "run" / "old.csv").write_text("keep")
    before = _tree(tmp_path)
    with pytest.raises(InputError) as err:
        ResultsWriter(tmp_path / "run")
    assert EXISTS_MESSAGE in str(err.value) and str(tmp_path / "run") in str(err.value)
    assert _tree(tmp_path) == before  # refused at construction: no partial folder made


def test_a_file_in_the_way_is_refused_even_with_overwrite(tmp_path):
    (tmp_path / "run").write_text("not a folder")
    with pytest.raises(InputError, match="not a folder"):
        ResultsWriter(tmp_path / "run", overwrite=True)


@pytest.mark.parametrize("name, overwrite", [("run", True), ("fresh", False)])
def test_failure_midway_keeps_earlier_results_and_no_partial(tmp_path, name, overwrite):
    _earlier_results(tmp_path / "run", **{"bodies.csv": "earlier"})
    before = _tree(tmp_path)
    with pytest.raises(ZeroDivisionError):
        with ResultsWriter(tmp_path / name, overwrite=overwrite) as out:
            write_atomic(out.path("bodies.csv"), lambda p: p.write_text("new"))
            1 / 0  # the solver fails after some files were written
    assert _tree(tmp_path) == before


def test_overwrite_swaps_only_when_complete_and_leaves_no_backup(tmp_path):
    _earlier_results(tmp_path / "run", **{"stale.csv": "old"})
    with ResultsWriter(tmp_path / "run", overwrite=True) as out:
        write_atomic(out.path("bodies.csv"), lambda p: p.write_text("new"))
        assert (tmp_path / "run" / "stale.csv").read_text() == "old"  # still there meanwhile
    assert _tree(tmp_path) == {"run": None, "run/bodies.csv": "new"}


def test_failed_final_rename_puts_the_old_folder_back(tmp_path, monkeypatch):
    _earlier_results(tmp_path / "run", **{"bodies.csv": "earlier"})
    before = _tree(tmp_path)
    real_rename = os.rename
    calls = []

    def flaky_rename(src, dst):
        calls.append((os.path.basename(src), os.path.basename(dst)))
        if len(calls) == 2:  # old -> backup worked; partial -> final fails
            raise OSError("rename refused (simulated)")
        return real_rename(src, dst)

    monkeypatch.setattr(atomic.os, "rename", flaky_rename)
    with pytest.raises(OSError, match="simulated"):
        with ResultsWriter(tmp_path / "run", overwrite=True) as out:
            write_atomic(out.path("bodies.csv"), lambda p: p.write_text("new"))
    assert calls[0][0] == "run" and calls[0][1].startswith(".run.old-")
    assert _tree(tmp_path) == before


def test_folder_created_by_someone_else_meanwhile_is_not_replaced(tmp_path):
    with pytest.raises(InputError, match="results folder exists"):
        with ResultsWriter(tmp_path / "run") as out:
            write_atomic(out.path("a.txt"), lambda p: p.write_text("mine"))
            (tmp_path / "run").mkdir()
            (tmp_path / "run" / "theirs.txt").write_text("theirs")
    assert _tree(tmp_path) == {"run": None, "run/theirs.txt": "theirs"}


@pytest.mark.parametrize("bad", ["../escape.txt", "/abs/x.txt", "", "a/../../b"])
def test_paths_must_stay_inside(tmp_path, bad):
    with pytest.raises(InputError):
        with ResultsWriter(tmp_path / "run") as out:
            out.path(bad)
    assert not list(tmp_path.iterdir())


def test_parent_folder_is_created(tmp_path):
    with ResultsWriter(tmp_path / "jobs" / "2031" / "run") as out:
        write_atomic(out.path("x.txt"), lambda p: p.write_text("1"))
    assert (tmp_path / "jobs" / "2031" / "run" / "x.txt").read_text() == "1"


@pytest.mark.skipif(not hasattr(os, "register_at_fork") or atomic.fcntl is None,
                    reason="fork and flock are POSIX")
def test_a_forked_child_holds_no_copy_of_the_folder_lock(tmp_path):
    """A child forked while a run writes (report.forked) closes its copy of the lock file
    at the fork: once the run lets go of its own (as it does by dying), the folder is
    seen unlocked, though the child still lives."""
    import signal
    import time
    with ResultsWriter(tmp_path / "res") as folder:
        ready, say = os.pipe()
        pid = os.fork()
        if pid == 0:                                  # the child: forked, lives on a while
            os.write(say, b"1")
            time.sleep(30)
            os._exit(0)
        try:
            assert os.read(ready, 1) == b"1"
            atomic._release_lock(folder._lock)        # the run's own copy let go
            folder._lock = None
            assert atomic._abandoned(folder.root)
        finally:
            os.kill(pid, signal.SIGKILL)
            os.waitpid(pid, 0)
            os.close(ready)
            os.close(say)
