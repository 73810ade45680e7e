"""Short parallel numba calls on a busy machine: OpenMP threads spinning or sleeping.

    python benchmarks/bench_threads.py [--calls 200] [--load 2]

Starts `--load` busy processes (the other work of a shared machine; 0 for an idle one),
then times the unit-cell slice kernel on small lattices (a headroom map's slices) in a
fresh process with OMP_WAIT_POLICY unset (libgomp's default: threads spin between
parallel regions) and with PASSIVE (they sleep), which `fillstress` sets unless the
user has (cli.quiet_waiting_threads), each on all of numba's threads and on one
(solve._checks.compiled_threads, what a slice too small for threaded FFTs uses).
Prints milliseconds per call.
"""
from __future__ import annotations

import argparse
import json
import multiprocessing as mp
import os
import subprocess
import sys

PROBE = r"""
import json, sys, time
import numba
import numpy as np
from fillstress.solve.slices import _unit_cell_kernel
out = {}
for threads in (numba.get_num_threads(), 1):
    numba.set_num_threads(threads)
    for n in (20, 40, 100, 200, 400):
        a = (np.arange(n) - n / 2 + 0.3) * 1.0     # not paired: the whole lattice evaluated
        args = (a, a, 3.0, 1.0, 0.0, False, False, 2 * n, 2 * n)
        _unit_cell_kernel(*args)
        t = time.perf_counter()
        for _ in range(int(sys.argv[1])):
            _unit_cell_kernel(*args)
        out[f"{threads} thread(s), {n}²"] = (time.perf_counter() - t) / int(sys.argv[1]) * 1e3
print(json.dumps(out))
"""


def _spin(_):
    while True:
        pass


def measure(calls: int, policy: str | None) -> dict:
    env = {k: v for k, v in os.environ.items() if k != "OMP_WAIT_POLICY"}
    if policy:
        env["OMP_WAIT_POLICY"] = policy
    done = subprocess.run([sys.executable, "-c", PROBE, str(calls)], env=env, check=True,
                          capture_output=True, text=True)
    return json.loads(done.stdout)


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--calls", type=int, default=200)
    ap.add_argument("--load", type=int, default=2, help="busy processes beside the probe")
    args = ap.parse_args(argv)
    busy = [mp.Process(target=_spin, args=(k,), daemon=True) for k in range(args.load)]
    for p in busy:
        p.start()
    try:
        rows = {label: measure(args.calls, policy)
                for label, policy in (("spinning (default)", None), ("PASSIVE", "PASSIVE"))}
    finally:
        for p in busy:
            p.terminate()
    print(f"ms per call of the unit-cell kernel, {args.load} busy processes, "
          f"{os.cpu_count()} cores")
    columns = sorted({key.split(", ")[1] for key in rows["PASSIVE"]}, key=lambda c: int(c[:-1]))
    print("| OMP_WAIT_POLICY, numba threads | " + " | ".join(f"{c} nodes" for c in columns) + " |")
    print("|---|" + "---|" * len(columns))
    for label, r in rows.items():
        for threads in sorted({key.split(",")[0] for key in r}, reverse=True):
            cells = " | ".join(f"{r[f'{threads}, {c}']:.3f}" for c in columns)
            print(f"| {label}, {threads} | {cells} |")


if __name__ == "__main__":
    main()
