"""Seconds to write a results folder (tables, rasters, cube, VTK, report, scene, manifest)
from results computed once: what `fillstress run --timings` calls "writing the folder".

    PYTHONPATH=src python benchmarks/bench_write.py                      # stockpile_yard
    python tools/make_corridor_site.py /tmp/cor --miles 3.0 --cell 5 --plan-depths 5 15 30
    PYTHONPATH=src python benchmarks/bench_write.py /tmp/cor/site.toml --repeat 2
    PYTHONPATH=src python benchmarks/bench_write.py --one-process        # no forked helper
    PYTHONPATH=src python benchmarks/bench_write.py /tmp/cor/site.toml --before main --repeat 5

The site is computed once and its results pickled; each write then runs in a fresh
process (its libraries load there, as in a run; dask is loaded first, as a run's compute
loads it through xarray), into a ResultsWriter folder as `fillstress run` writes one.
Printed: every write's wall and CPU seconds of the writing process and of its forked
helpers, and its critical-path CPU seconds (the writing process's outside the pieces it
shares with a forked child, plus the busier process's pieces of each share: what the
wall time would be on two idle cores, and far less stretched by other programs' load
than the wall time), then per tree the best and median wall and the median critical
path. `--before REF` writes the same results with the
`src/` of commit REF too (git archive, as bench_startup.py), the trees alternating write
by write so that both see the same load.
"""
from __future__ import annotations

import argparse
import copyreg
import os
import pickle
import resource
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _pickle_surveys() -> None:
    """TIN surfaces keep a matplotlib triangulation and its point finder, which cannot be
    pickled: rebuilt from the points and triangles."""
    from fillstress.shapes.surfaces import TinSurface
    rebuilt = ("_tri", "_finder", "_planes", "_interp")
    copyreg.pickle(TinSurface, lambda s: (_tin, (s.points, s.triangles, s.crs, s.source, {
        k: v for k, v in vars(s).items() if k not in rebuilt})))


def _tin(points, triangles, crs, source, state):
    from fillstress.shapes.surfaces import TinSurface
    surface = TinSurface(points, triangles, crs, source)
    vars(surface).update(state)
    return surface


def compute_once(site_file, store: Path) -> None:
    from fillstress.run.compute import compute
    from fillstress.site.build import load_site
    _pickle_surveys()
    store.write_bytes(pickle.dumps(compute(load_site(site_file))))


def write_once(store: Path, out: Path, one_process: bool) -> None:
    _pickle_surveys()
    import dask.array  # noqa: F401  (xarray loads it on a run's first DataArray)
    res = pickle.loads(store.read_bytes())
    from fillstress.io.atomic import ResultsWriter
    from fillstress.run.compute import write_results
    if one_process:
        from fillstress.report import forked
        forked.can_fork = lambda: False
    pools = _time_pieces()
    with ResultsWriter(out, protect=list(res.site.input_files)) as folder:
        t, cpu = time.perf_counter(), time.process_time()
        write_results(res, folder)
        wall, cpu = time.perf_counter() - t, time.process_time() - cpu
    helper = resource.getrusage(resource.RUSAGE_CHILDREN)
    print(f"{wall:.2f} {cpu:.2f} {helper.ru_utime + helper.ru_stime:.2f} "
          f"{_critical_cpu(cpu, pools):.2f}")


def _time_pieces() -> list:
    """Have the writers' make_all (report.forked) record the CPU seconds of each piece
    and the process that made it, one list per call (the child's rows come through a
    pipe); returns the lists, filled as the write goes."""
    import fillstress.report.html as html
    import fillstress.run.files as files
    pools, made = [], files.make_all

    def make_all(makers, first=()):
        read, write = os.pipe()

        def timed(make):
            def run():
                cpu = time.process_time()
                try:
                    return make()
                finally:
                    os.write(write, f"{os.getpid()} {time.process_time() - cpu}\n".encode())
            return run
        try:
            return made({k: timed(m) for k, m in makers.items()}, first)
        finally:
            os.close(write)
            with os.fdopen(read) as rows:
                pools.append([row.split() for row in rows])
    files.make_all = html.make_all = make_all
    return pools


def _critical_cpu(cpu: float, pools: list) -> float:
    """CPU seconds on the write's critical path: the writing process's outside the
    shared pieces, plus for each make_all the busier process's pieces. Other programs'
    load stretches wall time far more than it does this."""
    here = str(os.getpid())
    outside = cpu - sum(float(s) for rows in pools for pid, s in rows if pid == here)
    busiest = 0.0
    for rows in pools:
        per = {}
        for pid, s in rows:
            per[pid] = per.get(pid, 0.0) + float(s)
        busiest += max(per.values(), default=0.0)
    return outside + busiest


def write_in_fresh_process(store: Path, out: Path, tree: Path, one_process: bool) -> list:
    """[wall, cpu, helper cpu, critical-path cpu] of one write by the code of `tree`."""
    cmd = [sys.executable, __file__, "--write-from", str(store), "--out", str(out)]
    cmd += ["--one-process"] if one_process else []
    line = subprocess.run(cmd, check=True, capture_output=True, text=True,
                          env={**os.environ, "PYTHONPATH": str(tree / "src")}).stdout
    shutil.rmtree(out)
    return [float(v) for v in line.split()[-4:]]


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("site", nargs="?", help="site file (default: the stockpile_yard sample)")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--one-process", action="store_true", help="no forked second process")
    ap.add_argument("--before", help="a commit to compare with (its src/ via git archive)")
    ap.add_argument("--write-from", help=argparse.SUPPRESS)
    ap.add_argument("--out", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.write_from:
        return write_once(Path(args.write_from), Path(args.out), args.one_process)
    if args.site is None:
        from fillstress.examples import example_site
        args.site = example_site("stockpile_yard")
    with tempfile.TemporaryDirectory() as tmp:
        trees = {"this tree": ROOT}
        if args.before:
            from bench_startup import unpack
            before = Path(tmp) / "before"
            before.mkdir()
            trees = {f"before ({args.before})": unpack(args.before, before), **trees}
        store = Path(tmp) / "results.pickle"
        compute_once(args.site, store)
        runs = {name: [] for name in trees}
        for k in range(args.repeat):
            for name, tree in trees.items():
                runs[name].append(write_in_fresh_process(store, Path(tmp) / f"run{k}", tree,
                                                         args.one_process))
    for name, rows in runs.items():
        for wall, cpu, helper, critical in rows:
            print(f"{name}: write {wall:6.2f} s   cpu {cpu:6.2f} s   "
                  f"forked helpers cpu {helper:6.2f} s   critical-path cpu {critical:6.2f} s")
    for name, rows in runs.items():
        walls, critical = [r[0] for r in rows], [r[3] for r in rows]
        print(f"{name}: best {min(walls):.2f} s, median {statistics.median(walls):.2f} s, "
              f"critical-path cpu median {statistics.median(critical):.2f} s of {len(walls)} "
              f"({args.site}; load average {os.getloadavg()[0]:.1f})")


if __name__ == "__main__":
    main()
