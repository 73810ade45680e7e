"""Building the corridor's fill from surfaces: the bodies, their half-cell rebuild and the
ground elevation map, before and after.

    PYTHONPATH=src nice python benchmarks/bench_build.py                   # this tree only
    PYTHONPATH=src nice python benchmarks/bench_build.py --before 07691d3  # and an older one
    PYTHONPATH=src nice python benchmarks/bench_build.py --before 07691d3 --write docs/performance.md

The site is the 3-mile corridor with 5 ft cells (`tools/make_corridor_site.py OUT --miles
3.0 --cell 5 --plan-depths 5 15 30`: two lifts as LandXML TINs over a strip survey, a
2832 x 1278 lattice of which 2 % is loaded). Each tree runs in a fresh process, the trees
alternating so both see the same load, `--repeat` times; the best time of each step is
reported: `load_site` (the whole site), `bodies` (`Site.build_seconds`), the half-cell
rebuild of the convergence check (`site.load_grid(spec=site.spec.refined(2))`, 14.5
million cells) and `Site.ground_elevation_grid()`. `--before REF` unpacks `src/` of that
commit (git archive) into a temporary folder.
"""
from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tools"))
sys.path.insert(0, str(ROOT / "benchmarks"))

from bench_design import write_section  # noqa: E402
from bench_startup import unpack  # noqa: E402
from make_corridor_site import write_corridor_site  # noqa: E402

BEGIN = "<!-- fill from surfaces: benchmarks/bench_build.py -->"
END = "<!-- end of fill from surfaces -->"
STEPS = ("load_site", "bodies", "half_cell_rebuild", "ground_map")
_CHILD = """
import json, sys, time
from fillstress.site.build import load_site
t0 = time.perf_counter(); site = load_site(sys.argv[1]); t1 = time.perf_counter()
site.load_grid(spec=site.spec.refined(2)); t2 = time.perf_counter()
site.ground_elevation_grid(); t3 = time.perf_counter()
print(json.dumps({"load_site": t1 - t0, "bodies": site.build_seconds,
                  "half_cell_rebuild": t2 - t1, "ground_map": t3 - t2}))
"""


def measure_tree(src: Path, site: Path) -> dict:
    """Seconds of each step in a fresh process on the tree `src`."""
    done = subprocess.run([sys.executable, "-c", _CHILD, str(site)], check=True,
                          capture_output=True, text=True,
                          env={**os.environ, "PYTHONPATH": str(src)})
    return json.loads(done.stdout.splitlines()[-1])


def markdown(before: str | None, repeat: int) -> list[str]:
    with tempfile.TemporaryDirectory() as tmp:
        site = write_corridor_site(Path(tmp) / "site", 3.0, cell_ft=5.0,
                                   plan_depths_ft=(5.0, 15.0, 30.0))
        trees = {"this tree": ROOT / "src"}
        if before:
            trees = {f"before ({before})": unpack(before, Path(tmp)), **trees}
        load = os.getloadavg()[0]
        best = {tree: dict.fromkeys(STEPS, float("inf")) for tree in trees}
        for _ in range(repeat):
            for tree, src in trees.items():
                for step, seconds in measure_tree(src, site).items():
                    best[tree][step] = min(best[tree][step], seconds)
    lines = [(f"Best of {repeat} runs; load average {load:.1f} before, "
              f"{os.getloadavg()[0]:.1f} after (1 min); 2 cores shared with other work."), "",
             "| step | " + " | ".join(trees) + " |", "|---|" + "---|" * len(trees)]
    for step in STEPS:
        lines.append(f"| {step} | " + " | ".join(f"{best[t][step]:.2f} s" for t in trees)
                     + " |")
    return lines


def section(lines: list[str], before: str | None, repeat: int) -> str:
    """The marked section of docs/performance.md: the table and how it was measured."""
    command = ("PYTHONPATH=src nice python benchmarks/bench_build.py"
               + (f" --before {before}" if before else "") + f" --repeat {repeat}")
    return "\n".join([
        BEGIN, "## Fill from surfaces on the corridor lattice", "",
        ("The 3-mile corridor with 5 ft cells (two LandXML lifts over a strip survey, 2832 x "
         "1278 cells of which 2 % are loaded; the half-cell rebuild of the convergence check "
         "has 14.5 million). Design surfaces and the ground map are sampled only on the "
         "cells a triangle's bounding box (or a raster's extent) reaches; before, every cell "
         "of the bounding-box lattice was sampled; a lift over a lift of the same plan "
         "locates each sample once."), "", *lines, "",
        f"`{command}`, {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}.", END, ""])


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--before", help="a commit to compare with (its src/ via git archive)")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--write", type=Path, help="put the figures in this file's section")
    args = ap.parse_args(argv)
    lines = markdown(args.before, args.repeat)
    print("\n".join(lines))
    if args.write:
        write_section(args.write, section(lines, args.before, args.repeat), BEGIN, END)


if __name__ == "__main__":
    main()
