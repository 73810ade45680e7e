"""Time and peak memory of a run of the 4.8 km corridor site, step by step.

    PYTHONPATH=src nice python benchmarks/bench_corridor.py            # default site
    PYTHONPATH=src nice python benchmarks/bench_corridor.py --heavy    # 5 ft cells, plan grid

The site is written by tools/make_corridor_site.py into a temporary folder and run with
``fillstress run --timings`` in a fresh process; the wall time is the whole command, the
peak memory the process's largest resident set (getrusage of the child), the steps the
``timings_s`` of the run's summary.json. Issue 19 target: <= 20 s and <= 2 GB.
"""
from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tools"))

from make_corridor_site import write_corridor_site  # noqa: E402

HEAVY = {"cell_ft": 5.0, "plan_depths_ft": (5.0, 15.0, 30.0)}
TARGET_S, TARGET_GB = 20.0, 2.0
# runs the command as a child and prints the child's peak resident set (kB on Linux)
_PEAK = ("import resource, subprocess, sys; r = subprocess.run(sys.argv[1:]).returncode; "
         "print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss); sys.exit(r)")


def run_corridor(heavy: bool, miles: float = 3.0) -> dict:
    """Build and run the corridor site; wall seconds, peak GB and the seconds per step."""
    with tempfile.TemporaryDirectory() as tmp:
        site = write_corridor_site(Path(tmp) / "site", miles, **(HEAVY if heavy else {}))
        out = Path(tmp) / "out"
        cmd = [sys.executable, "-c", _PEAK, sys.executable, "-m", "fillstress", "run",
               str(site), "-o", str(out), "--overwrite", "-q"]
        t0 = time.perf_counter()
        done = subprocess.run(cmd, capture_output=True, text=True, check=True)
        wall = time.perf_counter() - t0
        steps = json.loads((out / "summary.json").read_text())["timings_s"]
    peak_kb = int(done.stdout.split()[-1])
    return {"wall_s": wall, "peak_gb": peak_kb / 1024 ** 2, "steps": steps}


def describe(name: str, r: dict) -> str:
    """One line: the variant, wall time and peak memory, then the steps of 0.5 s or more."""
    steps = ", ".join(f"{k.removesuffix('_s').replace('_', ' ')} {v:.1f} s"
                      for k, v in r["steps"].items() if v >= 0.5 and k != "compute_s")
    met = r["wall_s"] <= TARGET_S and r["peak_gb"] <= TARGET_GB
    return (f"{name}: {r['wall_s']:.1f} s wall, {r['peak_gb']:.2f} GB peak RSS "
            f"({'met' if met else 'not met'}); {steps}")


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--heavy", action="store_true", help="5 ft cells, plan grid at 5, 15, 30 ft")
    ap.add_argument("--both", action="store_true", help="the default site, then the heavy one")
    ap.add_argument("--miles", type=float, default=3.0)
    args = ap.parse_args(argv)
    variants = [False, True] if args.both else [args.heavy]
    for heavy in variants:
        print(describe("heavy" if heavy else "default", run_corridor(heavy, args.miles)))


if __name__ == "__main__":
    main()
