"""Seconds to write a results folder (tables, rasters, cube, VTK, report, scene, manifest)
from results computed once: what `fillstress run --timings` calls "writing the folder".

    PYTHONPATH=src python benchmarks/bench_write.py                      # stockpile_yard
    python tools/make_corridor_site.py /tmp/cor --miles 3.0 --cell 5 --plan-depths 5 15 30
    PYTHONPATH=src python benchmarks/bench_write.py /tmp/cor/site.toml --repeat 2
    PYTHONPATH=src python benchmarks/bench_write.py --one-process        # no forked helper

The site is computed once and its results pickled; each write then runs in a fresh
process (its libraries load there, as in a run), into a ResultsWriter folder as
`fillstress run` writes one. Printed: every write's wall seconds, the best, and the CPU
seconds of the writing process and of its forked helper.
"""
from __future__ import annotations

import argparse
import copyreg
import pickle
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path


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
    res = pickle.loads(store.read_bytes())
    from fillstress.io.atomic import ResultsWriter
    from fillstress.run.compute import write_results
    if one_process:
        from fillstress.report import forked
        forked.can_fork = lambda: False
    with ResultsWriter(out, protect=list(res.site.input_files)) as folder:
        t, cpu = time.perf_counter(), time.process_time()
        write_results(res, folder)
        wall, cpu = time.perf_counter() - t, time.process_time() - cpu
    helper = resource.getrusage(resource.RUSAGE_CHILDREN)
    print(f"{wall:.2f} {cpu:.2f} {helper.ru_utime + helper.ru_stime:.2f}")


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("site", nargs="?", help="site file (default: the stockpile_yard sample)")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--one-process", action="store_true", help="no forked second process")
    ap.add_argument("--write-from", help=argparse.SUPPRESS)
    ap.add_argument("--out", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.write_from:
        return write_once(Path(args.write_from), Path(args.out), args.one_process)
    if args.site is None:
        from fillstress.examples import example_site
        args.site = example_site("stockpile_yard")
    with tempfile.TemporaryDirectory() as tmp:
        store = Path(tmp) / "results.pickle"
        compute_once(args.site, store)
        runs = []
        for k in range(args.repeat):
            cmd = [sys.executable, __file__, "--write-from", str(store),
                   "--out", str(Path(tmp) / f"run{k}")]
            cmd += ["--one-process"] if args.one_process else []
            line = subprocess.run(cmd, check=True, capture_output=True, text=True).stdout
            runs.append([float(v) for v in line.split()[-3:]])
            shutil.rmtree(Path(tmp) / f"run{k}")
    for wall, cpu, helper in runs:
        print(f"write {wall:6.2f} s   cpu {cpu:6.2f} s   forked helper cpu {helper:6.2f} s")
    print(f"best {min(r[0] for r in runs):.2f} s of {len(runs)} ({args.site})")


if __name__ == "__main__":
    main()
