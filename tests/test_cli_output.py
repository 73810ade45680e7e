"""The command line as scripts and impatient users meet it: --json answers on stdout,
-q never hides the answer, --version/--help start without the numerical stack, and a
point far outside the site says so."""
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from fillstress.cli import main

SITE = """
# Invented: one square stockpile pad, SI units, UTM zone 33N.
[site]
name = "Ostrick siding pad"
crs = "EPSG:32633"
units = "SI"

[grid]
cell = 2.0
margin = 10.0
convergence_check = false

[bodies.pad]
kind = "footprint"
outline = [[500000.0, 5500000.0], [500020.0, 5500000.0], [500020.0, 5500020.0],
           [500000.0, 5500020.0]]
height = 2.0
unit_weight = 20.0

[[boreholes]]
id = "K-1"
x = 500010.0
y = 5500010.0
top = 1.0
bottom = 5.0
step = 2.0
"""
HEAVY = ("numba", "xarray", "scipy", "numpy", "pandas", "importlib.metadata",
         "fillstress.solve")  # the numerical stack and what loads slowly


@pytest.fixture
def site(tmp_path) -> Path:
    path = tmp_path / "site.toml"
    path.write_text(SITE, encoding="utf-8")
    return path


def test_version_and_help_do_not_import_the_numerical_stack():
    src = str(Path(__file__).resolve().parents[1] / "src")
    code = ("import sys; sys.path.insert(0, %r); from fillstress.cli import main\n"
            "for argv in (['--version'], ['--help'], ['run', '--help']):\n"
            "    try: main(argv)\n"
            "    except SystemExit: pass\n"
            "print(sorted(m for m in %r if m in sys.modules))" % (src, HEAVY))
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    assert out.strip().splitlines()[-1] == "[]"


def test_installed_version_is_the_source_version():
    from importlib.metadata import version

    from fillstress._version import __version__
    assert version("fillstress") == __version__


def test_point_json_centre_of_a_uniform_square(site, capsys):
    assert main(["point", str(site), "500010", "5500010", "5", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["units"] == {"x": "m", "y": "m", "depth": "m", "dsz": "kPa"}
    (p,) = data["points"]
    assert (p["x"], p["y"], p["depth"]) == (500010.0, 5500010.0, 5.0)
    # Boussinesq, centre of a 20 m square at z = 5 m: 4 corner rectangles of m = n = 2,
    # influence factor I = 0.2325 each (Newmark 1935, as tabulated in standard foundation
    # texts; value recalled from memory), q = 2 m × 20 kN/m³.
    assert p["dsz"] == pytest.approx(4 * 0.2325 * 40.0, rel=2e-3)
    assert data["warnings"] == []


def test_quiet_point_still_prints_the_answer(site, capsys):
    assert main(["point", str(site), "500010", "5500010", "5", "-q"]) == 0
    out = capsys.readouterr().out.split()
    assert out[:3] == ["500010.00", "5500010.00", "5.00"] and float(out[3]) > 30


def test_point_far_outside_the_site_says_so(site, capsys):
    assert main(["point", str(site), "510010", "5500010", "5", "--json"]) == 0
    printed = capsys.readouterr()
    data = json.loads(printed.out)
    (warning,) = data["warnings"]
    assert "outside the site's grid" in warning and "9,990 m" in warning
    assert "outside the site's grid" in printed.err


def test_check_and_run_json(site, tmp_path, capsys):
    assert main(["check", str(site), "--json"]) == 0
    check = json.loads(capsys.readouterr().out)
    assert check["valid"] and check["plan"]["site"] == "Ostrick siding pad"
    out = tmp_path / "res"
    assert main(["run", str(site), "-o", str(out), "--json", "--no-report"]) == 0
    run = json.loads(capsys.readouterr().out)
    assert run["folder"] == str(out)
    assert run == {"folder": str(out),
                   **json.loads((out / "summary.json").read_text(encoding="utf-8"))}


def test_point_at_one_point_loads_no_compiler(site):
    """A few points are summed by numpy: `fillstress point` never loads numba, the
    writers or pandas (no receptor tables: the start-up a user waits for)."""
    src = str(Path(__file__).resolve().parents[1] / "src")
    code = ("import sys; sys.path.insert(0, %r); from fillstress.cli import main\n"
            "assert main(['point', '-q', %r, '500010', '5500010', '5']) == 0\n"
            "print(sorted(m for m in %r if m in sys.modules))"
            % (src, str(site), ("numba", "xarray", "matplotlib", "rasterio", "scipy.stats",
                                "pandas")))
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    assert out.strip().splitlines()[-1] == "[]"


def test_point_on_a_site_with_uncertainty_loads_no_solver_library():
    """The stockpile sample has [uncertainty]: its samples (scipy.stats) are drawn by a
    run, not by `fillstress point`, which needs no root finder, triangulation or FFT; its
    piles and warehouse are GeoJSON, read without pandas and GDAL; and no Dask."""
    src = str(Path(__file__).resolve().parents[1] / "src")
    site = Path(__file__).resolve().parents[1] / "sample_sites" / "stockpile_yard" / "site.toml"
    code = ("import sys; sys.path.insert(0, %r); from fillstress.cli import main\n"
            "assert main(['point', '-q', %r, '512380', '5763470', '3.5']) == 0\n"
            "print(sorted(m for m in %r if m in sys.modules))"
            % (src, str(site), ("numba", "scipy.stats", "scipy.optimize", "scipy.spatial",
                                "scipy.fft", "matplotlib", "xarray", "pandas", "geopandas",
                                "pyogrio", "dask", "distributed")))
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    assert out.strip().splitlines()[-1] == "[]"


def test_serial_run_loads_no_distributed(site, tmp_path):
    """Without --workers or --scheduler no Dask client is made, nor distributed loaded
    (the NetCDF cube is off here: xarray's to_netcdf itself asks for dask.distributed)."""
    src = str(Path(__file__).resolve().parents[1] / "src")
    site.write_text(SITE + "\n[outputs]\nnetcdf = false\n", encoding="utf-8")
    code = ("import sys; sys.path.insert(0, %r); from fillstress.cli import main\n"
            "assert main(['run', '-q', '--no-report', %r, '-o', %r]) == 0\n"
            "print(sorted(m for m in ('distributed',) if m in sys.modules))"
            % (src, str(site), str(tmp_path / "out")))
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    assert out.strip().splitlines()[-1] == "[]"


def test_verbose_logs_each_step_with_its_time_and_keeps_the_answer(site, tmp_path, capsys):
    import logging
    try:
        assert main(["run", str(site), "-o", str(tmp_path / "out"), "-v", "--json"]) == 0
    finally:
        logging.getLogger("fillstress").handlers.clear()      # the handler of this run only
        logging.getLogger("fillstress").setLevel(logging.NOTSET)
    said = capsys.readouterr()
    assert json.loads(said.out)["site"]["name"] == "Ostrick siding pad"   # stdout: the answer
    timings = json.loads((tmp_path / "out" / "summary.json").read_text())["timings_s"]
    for step in ("receptor_points",):
        assert f"{step.replace('_', ' ')}: {timings[step + '_s']:.2f} s" in said.err
    import re
    assert re.search(r"stress at 3 points by the \w+ algorithm", said.err)   # K-1: 1, 3, 5 m
    assert main(["point", str(site), "500010", "500010", "2", "--json"]) == 0
    assert "fillstress.run.compute" not in capsys.readouterr().err   # no log without -v


def test_run_closes_with_the_whole_core_caution(site, tmp_path, capsys):
    """The console's last line is the caution every output carries, both halves of it."""
    assert main(["run", str(site), "-o", str(tmp_path / "out"), "--no-report"]) == 0
    last = capsys.readouterr().out.strip().splitlines()[-1]
    assert "licensed geotechnical engineer" in last and "local codes" in last


class _Recorder:
    """A progress factory that keeps what the library tells it."""

    def __init__(self):
        self.bars = []

    def __call__(self, label, total, unit="steps"):
        import contextlib
        bar = {"label": label, "total": total, "unit": unit, "steps": [], "done": 0}
        self.bars.append(bar)

        class _Bar:
            def advance(self, n=1):
                bar["done"] += n

            def describe(self, text):
                bar["steps"].append(text)
        return contextlib.nullcontext(_Bar())


def test_progress_bars_name_each_step_and_their_unit(site, tmp_path):
    from fillstress.run.compute import run_site_file
    record = _Recorder()
    run_site_file(site, tmp_path / "out", progress=record)
    by_label = {b["label"]: b for b in record.bars}
    computing = by_label["computing"]
    timings = json.loads((tmp_path / "out" / "summary.json").read_text())["timings_s"]
    steps = [k[:-2].replace("_", " ") for k in timings if k.endswith("_s")
             and k not in ("compute_s", "write_s", "build_s", "total_s")]
    assert computing["unit"] == "steps" and computing["done"] == computing["total"]
    assert [s for s in computing["steps"] if s in steps] == computing["steps"]
    assert "receptor points" in computing["steps"]
    writing = by_label["writing results"]
    assert writing["steps"][:2] == ["tables, rasters, NetCDF cube, VTK", "summary"]
    assert writing["done"] == writing["total"]


def test_only_fine_grained_bars_estimate_the_time_left():
    import io
    from rich.console import Console as RichConsole
    from fillstress.console import FINE_GRAINED, Console
    shown = {}
    for unit, total in (("steps", 6), ("points", 10 * FINE_GRAINED)):
        console = Console()
        console.err = RichConsole(file=io.StringIO(), width=120, force_terminal=False)
        with console.progress("work", total, unit=unit) as bar:
            bar.describe("settlement")
            bar.advance(total)
        shown[unit] = console.err.file.getvalue()
    assert "6/6 steps" in shown["steps"] and "0:00:00" in shown["steps"]
    assert shown["steps"].count(":") < shown["points"].count(":")   # no time-left column
    assert "points" in shown["points"]


def test_point_answers_where_only_the_odds_samples_are_refused(tmp_path, capsys):
    """A normal Cc with COV 0.9 draws negative samples: `check` (and so `run`) refuses
    them naming the key, while `fillstress point`, which computes no odds, answers."""
    soil = ('\n[soil]\nwater_table = 1.0\nrigid_base = 12.0\n\n[[soil.layers]]\n'
            'name = "soft clay"\ntop = 0.0\nbottom = 12.0\nunit_weight = 16.0\n'
            'cc = 0.4\ncr = 0.05\ne0 = 1.4\nocr = 1.2\ncv = 1.0\n\n'
            '[uncertainty]\nsamples = 200\nseed = 3\n\n[[uncertainty.parameters]]\n'
            'layer = "soft clay"\nparameter = "cc"\ndistribution = "normal"\ncov = 0.9\n')
    path = tmp_path / "site.toml"
    path.write_text(SITE + soil, encoding="utf-8")
    assert main(["check", str(path)]) != 0
    assert "uncertainty.parameters[0]" in capsys.readouterr().err
    assert main(["point", str(path), "500010", "5500010", "5", "--json"]) == 0
    (p,) = json.loads(capsys.readouterr().out)["points"]
    assert p["dsz"] == pytest.approx(4 * 0.2325 * 40.0, rel=2e-3)   # as the test above


def test_command_lets_waiting_threads_sleep_unless_the_user_chose():
    from fillstress.cli import quiet_waiting_threads
    env = {}
    quiet_waiting_threads(env)
    assert env == {"OMP_WAIT_POLICY": "PASSIVE"}
    mine = {"OMP_WAIT_POLICY": "ACTIVE"}
    quiet_waiting_threads(mine)
    assert mine == {"OMP_WAIT_POLICY": "ACTIVE"}


def _command(*args, cwd=None) -> subprocess.CompletedProcess:
    """`python -m fillstress ARGS` through pipes, as a script meets the installed command."""
    src = str(Path(__file__).resolve().parents[1] / "src")
    return subprocess.run([sys.executable, "-m", "fillstress", *args], capture_output=True,
                          text=True, cwd=cwd, env={**os.environ, "PYTHONPATH": src})


def test_command_leaving_at_once_keeps_all_its_output_and_exit_code(site, tmp_path):
    """The command ends its process without the interpreter's teardown (cli.leave): what
    it printed through a pipe still arrives whole, its summary file is complete, and the
    exit code is main's, for a finished run and for bad input alike."""
    done = _command("run", str(site), "-o", str(tmp_path / "out"), "--no-report", "--json")
    assert done.returncode == 0, done.stderr
    answer = json.loads(done.stdout)                        # the whole JSON document
    assert answer["site"]["name"] == "Ostrick siding pad"
    assert json.loads((tmp_path / "out" / "summary.json").read_text())["site"]["name"] \
        == "Ostrick siding pad"
    bad = _command("run", str(tmp_path / "missing.toml"))
    assert bad.returncode == 2
    assert bad.stderr.strip().splitlines() == [
        f"fillstress: error: site file not found: {tmp_path / 'missing.toml'}"]


def test_command_collects_only_young_garbage_and_main_keeps_the_interpreter_defaults(
        site, capsys):
    """The installed command raises the collector's thresholds for its own process; main()
    called from Python (tests, notebooks) leaves the caller's collector alone."""
    import gc
    before = gc.get_threshold()
    assert main(["check", str(site), "--json"]) == 0
    assert gc.get_threshold() == before
    code = ("import gc, sys; from fillstress import cli\n"
            "cli.main = lambda: print(gc.get_threshold()) or 3\n"
            "cli.command()")
    src = str(Path(__file__).resolve().parents[1] / "src")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         env={**os.environ, "PYTHONPATH": src})
    assert out.returncode == 3
    assert out.stdout.strip() == "(50000, 20, 10)"
