"""Start-up of short commands: `--version`, `point` at one point, `check`, before and after.

    PYTHONPATH=src python benchmarks/bench_startup.py                    # this tree only
    PYTHONPATH=src python benchmarks/bench_startup.py --before aa69085   # and an older one
    PYTHONPATH=src python benchmarks/bench_startup.py --before main --runs --repeat 3
                                         # also whole `fillstress run`s of the sample sites

Each command runs in a fresh process (numba cache warm: every tree runs once before
timing), `--repeat` times, the trees alternating so both see the same load; the median
and the best time are reported, with the median's multiple of a bare `python -c pass`
measured alongside.
`--before REF` unpacks `src/` and `sample_sites/` of that commit (git archive) into a
temporary folder; each tree runs on its own copy of the sample site (the site file keys
change with the trees).
"""
from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SITE = "{sites}/stockpile_yard/site.toml"     # in the tree's own sample_sites/
POINT = ("512380", "5763470", "3.5")  # beside the ore pile (site units), as run_all.py
COMMANDS = {
    "`fillstress --version`": ["--version"],
    "`fillstress point` (one point)": ["point", "-q", SITE, *POINT],
    "`fillstress check`": ["check", SITE],
}
IMPORTS = "import fillstress.cli, fillstress.console, fillstress.run.point"
SAMPLE_SITES = ("stockpile_yard", "preload_surcharge", "bridge_approach")


def run_commands(out: Path) -> dict:
    """Whole runs of the sample sites, report and scene included, into `out`."""
    return {f"`fillstress run` {name}": ["run", "-q", "--overwrite", "-o", str(out / name),
                                         f"{{sites}}/{name}/site.toml"]
            for name in SAMPLE_SITES}


def wall(args: list[str], tree: Path) -> float:
    """Seconds of one command on the tree at `tree` (its src/ and sample_sites/)."""
    args = [a.replace("{sites}", str(tree / "sample_sites")) for a in args]
    t = time.perf_counter()
    subprocess.run([sys.executable, *args], check=True, capture_output=True,
                   env={**os.environ, "PYTHONPATH": str(tree / "src")}, cwd=ROOT)
    return time.perf_counter() - t


def unpack(ref: str, into: Path) -> Path:
    """`src/` and `sample_sites/` of commit `ref` under `into`."""
    archive = subprocess.run(["git", "archive", ref, "src", "sample_sites"], cwd=ROOT,
                             check=True, capture_output=True).stdout
    subprocess.run(["tar", "-x", "-C", str(into)], input=archive, check=True)
    return into


def measure(trees: dict[str, Path], repeat: int, commands: dict = COMMANDS) -> dict:
    jobs = {name: ["-m", "fillstress.cli", *args] for name, args in commands.items()}
    jobs["imports of `point` (no work)"] = ["-c", IMPORTS]
    jobs["bare `python -c pass`"] = ["-c", "pass"]
    for src in trees.values():              # compile or load the numba cache, warm the files
        for job in jobs:
            if job.startswith(("`fillstress point`", "`fillstress run`")):
                wall(jobs[job], src)
    times = {(job, tree): [] for job in jobs for tree in trees}
    for _ in range(repeat):
        for job, args in jobs.items():
            for tree, src in trees.items():
                times[job, tree].append(wall(args, src))
    return times


def markdown(before: str | None, repeat: int, runs: bool = False) -> tuple[list[str], dict]:
    """The Markdown table and the median times {(job, tree): seconds}."""
    with tempfile.TemporaryDirectory() as tmp:
        trees = {"this tree": ROOT}
        if before:
            trees = {f"before ({before})": unpack(before, Path(tmp)), **trees}
        commands = {**COMMANDS, **(run_commands(Path(tmp) / "runs") if runs else {})}
        load = os.getloadavg()[0]
        times = measure(trees, repeat, commands)
    median = {key: statistics.median(t) for key, t in times.items()}
    bare = {tree: median["bare `python -c pass`", tree] for tree in trees}
    lines = [f"Median (best) of {repeat} runs; load average {load:.1f} before, "
             f"{os.getloadavg()[0]:.1f} after (1 min).", "",
             "| command | " + " | ".join(trees) + " |", "|---|" + "---|" * len(trees)]
    for job in dict.fromkeys(j for j, _ in times):
        cells = [f"{median[job, t]:.2f} s ({min(times[job, t]):.2f}; "
                 f"{median[job, t] / bare[t]:.1f}x bare)" for t in trees]
        lines.append(f"| {job} | " + " | ".join(cells) + " |")
    return lines, median


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--before", help="a commit to compare with (its src/ via git archive)")
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--runs", action="store_true",
                    help="also whole runs of the sample sites (report and scene included)")
    args = ap.parse_args(argv)
    print("\n".join(markdown(args.before, args.repeat, args.runs)[0]))


if __name__ == "__main__":
    main()
