"""Nothing a user wrote is ever deleted: --overwrite replaces only results folders, a run
killed at any moment leaves the earlier folder, and a rewritten report still verifies."""
from __future__ import annotations

import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from fillstress.cli import main
from fillstress.errors import FillstressWarning, InputError
from fillstress.io.atomic import ResultsWriter, recover_stranded, write_atomic
from fillstress.io.manifest import verify_folder
from tiny_site import tree_hashes, write_site

SRC = Path(__file__).resolve().parents[1] / "src"


def _run(argv, capsys):
    code = main(argv)
    captured = capsys.readouterr()
    return code, captured.err


@pytest.fixture(scope="module")
def finished(tmp_path_factory):
    """A site folder and a finished results folder of it."""
    root = tmp_path_factory.mktemp("safety")
    site = write_site(root / "job")
    assert main(["run", str(site), "-o", str(root / "job" / "results"), "-q",
                 "--no-report"]) == 0
    return site


@pytest.mark.parametrize("target", ["site folder", "above the site folder", "user folder",
                                    "current folder", "site file"])
def test_overwrite_refuses_what_is_not_a_results_folder(tmp_path, capsys, monkeypatch,
                                                        target):
    site = write_site(tmp_path / "a" / "job")
    (tmp_path / "a" / "job" / "notes.txt").write_text("field notes")
    (tmp_path / "user").mkdir()
    (tmp_path / "user" / "letter.docx").write_text("do not lose")
    monkeypatch.chdir(tmp_path / "user")
    out = {"site folder": site.parent, "above the site folder": tmp_path / "a",
           "user folder": tmp_path / "user", "current folder": Path("."),
           "site file": site}[target]
    before = tree_hashes(tmp_path)
    code, err = _run(["run", str(site), "-o", str(out), "--overwrite", "-q"], capsys)
    assert code == 2 and err.count("\n") == 1 and "Traceback" not in err
    assert os.path.abspath(out) in err
    assert tree_hashes(tmp_path) == before


def test_overwrite_replaces_a_results_folder_and_it_verifies(finished, capsys):
    out = finished.parent / "results"
    assert verify_folder(out) == []
    (out / "stale.csv").write_text("from an older version")
    code, err = _run(["run", str(finished), "-o", str(out), "--overwrite", "-q",
                      "--no-report"], capsys)
    assert code == 0, err
    assert not (out / "stale.csv").exists() and verify_folder(out) == []


def test_report_rewrite_keeps_the_folder_verified(tmp_path, capsys):
    site = write_site(tmp_path / "job")
    out = tmp_path / "res"
    assert main(["run", str(site), "-o", str(out), "-q"]) == 0
    (out / "report.html").write_text("edited by hand")
    assert verify_folder(out) == ["report.html: checksum differs from manifest.json"]
    code, err = _run(["report", str(out), "-q"], capsys)
    assert code == 0, err
    assert verify_folder(out) == []
    assert "edited by hand" not in (out / "report.html").read_text()
    # a report written elsewhere leaves the manifest alone
    assert main(["report", str(out), "-o", str(tmp_path / "copy.html"), "-q"]) == 0
    assert verify_folder(out) == []


# --- killed commits --------------------------------------------------------------------
def _earlier(folder: Path) -> Path:
    folder.mkdir(parents=True)
    (folder / "manifest.json").write_text('{"program": "fillstress"}')
    (folder / "bodies.csv").write_text("earlier")
    return folder


def _killed(tmp_path, where: str) -> None:
    """Run a commit of tmp_path/run in a child process that dies (os._exit, like SIGKILL:
    no cleanup runs) while writing or between the two renames."""
    code = textwrap.dedent(f"""
        import os, sys
        from fillstress.io import atomic
        out = atomic.ResultsWriter(sys.argv[1], overwrite=True)
        if {where!r} == "between renames":
            atomic._between_renames = lambda: os._exit(9)
        with out:
            atomic.write_atomic(out.path("bodies.csv"), lambda p: p.write_text("new"))
            atomic.write_atomic(out.path("manifest.json"),
                                lambda p: p.write_text('{{"program": "fillstress"}}'))
            if {where!r} == "while writing":
                os._exit(9)
    """)
    env = {**os.environ, "PYTHONPATH": str(SRC)}
    proc = subprocess.run([sys.executable, "-c", code, str(tmp_path / "run")], env=env)
    assert proc.returncode == 9


@pytest.mark.parametrize("where", ["between renames", "while writing"])
def test_killed_commit_is_recovered_by_the_next_run(tmp_path, where):
    _earlier(tmp_path / "run")
    before = tree_hashes(tmp_path / "run")
    _killed(tmp_path, where)
    stranded = sorted(p.name.split("-")[0] for p in tmp_path.iterdir() if p.name != "run")
    assert stranded == ([".run.old", ".run.partial"] if where == "between renames"
                        else [".run.partial"])
    with pytest.warns(FillstressWarning) as said:
        folder = ResultsWriter(tmp_path / "run", overwrite=True)
    assert [p.name for p in tmp_path.iterdir()] == ["run"]
    assert tree_hashes(tmp_path / "run") == before
    assert len(folder.recovered) == len(said) == len(stranded)
    assert any("interrupted run" in str(w.message) for w in said)


def test_next_run_from_the_command_line_says_what_it_recovered(tmp_path, capsys):
    site = write_site(tmp_path / "job")
    out = tmp_path / "res"
    assert main(["run", str(site), "-o", str(out), "-q", "--no-report"]) == 0
    before = tree_hashes(out)
    _killed_folder = out.with_name(".res.old-0123456789ab")
    out.rename(_killed_folder)                    # state after a kill between the renames
    code, err = _run(["run", str(site), "-o", str(out), "--no-report"], capsys)
    assert code == 2 and "put back the earlier results folder" in err   # then: exists
    assert tree_hashes(out) == before and [p.name for p in tmp_path.iterdir()] == ["job", "res"]


def test_a_live_runs_folder_is_left_alone(tmp_path):
    _earlier(tmp_path / "run")
    with ResultsWriter(tmp_path / "run", overwrite=True) as first:
        write_atomic(first.path("bodies.csv"), lambda p: p.write_text("first"))
        assert recover_stranded(tmp_path / "run") == []
        assert first.root.is_dir()
    assert (tmp_path / "run" / "bodies.csv").read_text() == "first"
    assert sorted(p.name for p in (tmp_path / "run").iterdir()) == ["bodies.csv"]


def test_old_folder_left_after_a_finished_commit_is_removed(tmp_path):
    _earlier(tmp_path / "run")
    _earlier(tmp_path / ".run.old-0123456789ab")
    with pytest.warns(FillstressWarning, match="already replaced"):
        recover_stranded(tmp_path / "run")
    assert [p.name for p in tmp_path.iterdir()] == ["run"]


def test_an_empty_folder_may_be_overwritten(tmp_path):
    (tmp_path / "run").mkdir()
    with ResultsWriter(tmp_path / "run", overwrite=True) as out:
        write_atomic(out.path("a.txt"), lambda p: p.write_text("1"))
    assert (tmp_path / "run" / "a.txt").read_text() == "1"


def test_symlinked_results_folder_is_refused(tmp_path):
    _earlier(tmp_path / "real")
    (tmp_path / "link").symlink_to(tmp_path / "real")
    with pytest.raises(InputError, match="not a folder"):
        ResultsWriter(tmp_path / "link", overwrite=True)


# --- a real SIGKILL of the command ---------------------------------------------------------
def _partial_files(parent: Path) -> int:
    """Files written so far in the run's hidden unfinished folder (-1 while there is none)."""
    partials = list(parent.glob(".res.partial-*"))
    return sum(1 for p in partials[0].rglob("*") if p.is_file()) if partials else -1


@pytest.mark.skipif(not hasattr(os, "fork") or sys.platform == "win32",
                    reason="SIGKILL is POSIX; Windows has no uncatchable kill signal to send")
@pytest.mark.parametrize("files_before_kill", [0, 3])
def test_sigkill_of_the_command_mid_run_loses_nothing(tmp_path, files_before_kill):
    """`fillstress run --overwrite` killed by the kernel (SIGKILL: no handler, no cleanup)
    once its unfinished folder exists, or holds a few files: the earlier folder is intact and
    verifies, and the next run removes the remains and says so."""
    import signal
    import time
    site = write_site(tmp_path / "job")
    out = tmp_path / "res"
    assert main(["run", str(site), "-o", str(out), "-q", "--no-report"]) == 0
    before = tree_hashes(out)
    env = {**os.environ, "PYTHONPATH": str(SRC)}
    child = subprocess.Popen([sys.executable, "-m", "fillstress.cli", "run", str(site), "-o",
                              str(out), "--overwrite", "-q"], env=env,
                             stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + 120
    while _partial_files(tmp_path) < files_before_kill and child.poll() is None:
        assert time.monotonic() < deadline, "the run never started writing"
        time.sleep(0.002)
    child.send_signal(signal.SIGKILL)
    assert child.wait() == -signal.SIGKILL, "the run finished before it could be killed"
    assert tree_hashes(out) == before and verify_folder(out) == []
    assert _partial_files(tmp_path) >= files_before_kill        # the kill left its remains
    with pytest.warns(FillstressWarning, match="interrupted run"):
        recover_stranded(out)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["job", "res"]
    assert tree_hashes(out) == before
