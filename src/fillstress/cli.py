"""The `fillstress` command: thin subcommands over the library, nothing computed here.

Exit codes: 0 success, 2 bad input (one line, no traceback), 1 internal error.
"""
from __future__ import annotations

import argparse
import gc
import os
import sys
import warnings
from pathlib import Path

from ._version import __version__
from .errors import FillstressError, FillstressWarning, InputError

# Each subcommand imports its part of the library when it runs, so `fillstress --help`
# and a mistyped command answer at once.

EPILOG = """\
examples:
  fillstress example stockpile_yard            run a bundled sample site into ./results-stockpile_yard
  fillstress check site.toml                   validate a site file, list bodies, loads, grid, cost
  fillstress run site.toml -o results          run a site file into the folder results/
  fillstress batch site.toml variants.toml     run variants and their envelope
  fillstress point site.toml 120 45 3.5        Δσz at x=120, y=45, depth 3.5 (site units)
  fillstress design site.toml                  try layouts in a local web page (move, raise, add fill)
  fillstress view results --png view.png       render the 3D view to a PNG (or open a window)
  fillstress report results                    (re)write results/report.html
  fillstress monitor site.toml readings.csv --day0 2025-03-03 -o monitoring
                                               readings against the prediction, revised forecast
"""


class _Parser(argparse.ArgumentParser):
    """Usage errors as one line, like every other error of the command."""

    def error(self, message):
        sys.stderr.write(f"fillstress: error: {message} (see {self.prog} --help)\n")
        raise SystemExit(2)


def quiet_waiting_threads(environ=os.environ) -> None:
    """Let numba's OpenMP threads sleep between parallel regions unless the user said
    otherwise (OMP_WAIT_POLICY). By default they spin; on a machine whose cores are busy
    the spinning threads take the cores from the working ones, and a run's many short
    parallel calls (a headroom map's small slices) took about 14 ms each instead of 0.2 ms
    (benchmarks/bench_threads.py). Set before numba starts its threads: the command owns
    its process, so it decides here; a library user sets it in their own environment."""
    environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")


def command() -> None:
    """The installed ``fillstress`` (and ``python -m fillstress``): :func:`main`, run as a
    program that owns its process.

    A run's process holds some million Python objects (numpy, pandas, numba, matplotlib,
    VTK). The cyclic collector's full passes over them took about 0.6 s of a sample run
    and tearing them down one by one at exit 0.8 s after the results were written
    (benchmarks/bench_startup.py --runs). So the command collects young garbage only (a
    full pass after some 10^7 net allocations: arrays are freed by reference counting
    anyway) and, its output flushed, leaves at once: every file is closed by then and no
    library's exit handler is needed (a local Dask cluster is closed when its with-block
    ends). Usage errors, --help and --version leave through SystemExit as usual.
    """
    gc.set_threshold(50_000, 20, 10)
    code = main()
    leave(code)


def leave(code: int) -> None:
    """Flush what was printed and logged, then end the process with `code` at once."""
    import logging
    logging.shutdown()
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):      # a closed pipe (`| head`): nothing left to say
            pass
    os._exit(code)


def main(argv=None) -> int:
    quiet_waiting_threads()
    parser = _parser()
    args = parser.parse_args(argv)       # --help, --version, usage errors: SystemExit
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    from .console import Console
    # --json: the answer alone on stdout; tables and progress bars stay off.
    console = Console(quiet=getattr(args, "quiet", False) or getattr(args, "json", False))
    if getattr(args, "verbose", False):
        console.log_to_stderr()
    try:
        with _warnings_to(console):
            return args.func(args, console) or 0
    except FillstressError as exc:        # bad input (InputError) or over the memory cap
        console.error(str(exc))
        return 2
    except KeyboardInterrupt:
        console.error("interrupted; no results were changed")
        return 130
    except Exception as exc:  # an internal error: say so plainly, traceback on request
        if getattr(args, "debug", False):
            raise
        console.error(f"internal error ({type(exc).__name__}: {exc}); "
                      "rerun with --debug for the traceback and please report it")
        return 1


class _warnings_to(warnings.catch_warnings):
    """Print fillstress warnings as one console line each; others as Python prints them."""

    def __init__(self, console):
        super().__init__()
        self.console = console

    def __enter__(self):
        super().__enter__()
        default = warnings.showwarning
        warnings.simplefilter("always", FillstressWarning)

        def show(message, category, *args, **kwargs):
            if issubclass(category, FillstressWarning):
                self.console.warning(str(message))
            else:
                default(message, category, *args, **kwargs)
        warnings.showwarning = show


def _parser() -> argparse.ArgumentParser:
    p = _Parser(
        prog="fillstress", formatter_class=argparse.RawDescriptionHelpFormatter,
        description="Vertical stress increase and settlement below fills, stockpiles and "
                    "embankments on an elastic half-space.", epilog=EPILOG)
    p.add_argument("--version", action="version", version=f"fillstress {__version__}")
    p.add_argument("--debug", action="store_true", help="show tracebacks of internal errors")
    sub = p.add_subparsers(title="commands", metavar="COMMAND")

    def command(name, func, help_, example):
        c = sub.add_parser(name, help=help_, description=f"{help_}\n\nexample:\n  {example}",
                           formatter_class=argparse.RawDescriptionHelpFormatter)
        c.set_defaults(func=func)
        c.add_argument("--debug", action="store_true", default=argparse.SUPPRESS,
                       help=argparse.SUPPRESS)
        c.add_argument("-q", "--quiet", action="store_true",
                       help="no progress bars or tables; answers, warnings and errors still")
        c.add_argument("-v", "--verbose", action="store_true",
                       help="log what each step does and how long it takes (stderr)")
        if name in ("run", "check", "point"):
            c.add_argument("--json", action="store_true",
                           help="print the result as JSON on stdout (for scripts)")
        return c

    c = command("run", _run, "Run a site file into a results folder.",
                "fillstress run site.toml -o results --overwrite")
    c.add_argument("site", type=Path, help="site file (TOML)")
    _run_options(c)

    c = command("batch", _batch, "Run a site over a list of variants into one folder, with "
                "an envelope of the largest values.",
                "fillstress batch site.toml variants.toml -o variants-results --workers 2")
    c.add_argument("site", type=Path, help="site file (TOML)")
    c.add_argument("variants", type=Path, help="variants file (TOML, [[variants]] tables)")
    _run_options(c)

    c = command("check", _check, "Validate a site file and show what a run would compute.",
                "fillstress check site.toml")
    c.add_argument("site", type=Path, help="site file (TOML)")

    c = command("example", _example, "Run a bundled sample site end to end (list them "
                "without a name).", "fillstress example bridge_approach -o approach-results")
    c.add_argument("name", nargs="?", help="sample site name")
    _run_options(c)

    c = command("point", _point, "Δσz at points given on the command line (site units).",
                "fillstress point site.toml 120 45 3.5  130 45 6.0")
    c.add_argument("site", type=Path, help="site file (TOML)")
    c.add_argument("xyz", nargs="+", type=float, help="x y depth, repeated for more points")
    c.add_argument("--stage", type=int, default=None, help="construction stage (default: last)")

    c = command("design", _design, "Try layouts in a local web page: move, raise, add and "
                "delete bodies and watch Δσz answer.", "fillstress design site.toml --no-browser")
    c.add_argument("site", type=Path, help="site file (TOML)")
    c.add_argument("--no-browser", action="store_true", help="print the address only")
    c.add_argument("--depth", type=float, default=None,
                   help="depth of the slice (site units; default the first plan-grid depth)")
    c.add_argument("--ratio-limit", type=float, default=None, metavar="R",
                   help="limit of Δσz/σ'v0 at the receptors (e.g. 0.1); none by default")
    c.add_argument("--stress-limit", type=float, default=None, metavar="P",
                   help="limit of Δσz at the receptors (site pressure unit); none by default")

    c = command("view", _view, "Show the results in 3D, or render them to PNG / HTML.",
                "fillstress view results --png view.png --exaggeration 2")
    c.add_argument("results", type=Path, help="results folder of a run")
    c.add_argument("--png", type=Path, help="render offscreen to this PNG instead of a window")
    c.add_argument("--html", type=Path, help="write a standalone HTML scene instead")
    c.add_argument("--exaggeration", type=float, default=None,
                   help="vertical exaggeration (default: chosen from the site's proportions)")
    _view_options(c)

    c = command("report", _report, "Write the HTML engineering report of a results folder.",
                "fillstress report results -o job-report.html")
    c.add_argument("results", type=Path, help="results folder of a run")
    c.add_argument("-o", "--output", type=Path, help="report file (default results/report.html)")
    c.add_argument("--pdf", action="store_true",
                   help="also print it to PDF beside the HTML file (headless Chromium)")

    c = command("monitor", _monitor, "Compare field readings with the site's prediction: "
                "back-analysis, fitted parameters and a revised forecast, into a folder.",
                "fillstress monitor site.toml readings.csv --day0 2025-03-03 "
                "--construction construction.csv -o monitoring --residual-limit 25")
    c.add_argument("site", type=Path, help="site file (TOML)")
    c.add_argument("readings", type=Path, nargs="?", default=None,
                   help="readings CSV (default: [monitoring] readings of the site file)")
    from .monitoring.options import add_options
    add_options(c)
    return p


class _NamesOf:
    """Names read from ``fillstress.<module>.<attribute>`` on first use (argparse choices or
    default), so building the parser for --help or --version imports no numerical library."""

    def __init__(self, module: str, attribute: str):
        self.module, self.attribute = module, attribute

    def _names(self):
        import importlib
        return list(getattr(importlib.import_module(f"fillstress.{self.module}"), self.attribute))

    def __contains__(self, value) -> bool:
        return value in self._names()

    def __iter__(self):
        return iter(self._names())

    def __str__(self) -> str:
        return ",".join(self._names())


def _view_options(c):
    c.add_argument("--quantity", default="dsz", choices=_NamesOf("io.results", "QUANTITIES"),
                   metavar="QUANTITY", help="quantity coloured on the slices and points: "
                   "%(choices)s (default dsz)")
    c.add_argument("--depth", type=float, default=None,
                   help="show only the slice at this depth (site length unit)")
    c.add_argument("--layers", default=_NamesOf("viewer", "LAYERS"),
                   help="comma-separated parts to draw (default %(default)s)")
    c.add_argument("--camera", default="iso", choices=_NamesOf("viewer", "CAMERAS"),
                   metavar="CAMERA", help="PNG view: iso (from the south-west), xy (plan), xz, yz")
    c.add_argument("--colour-range", nargs=2, type=float, metavar=("LOW", "HIGH"), default=None,
                   help="colour range in the quantity's unit (default: 0 to a robust top)")


def _run_options(c):
    c.add_argument("-o", "--out", type=Path, help="results folder (default: results-<site>)")
    c.add_argument("--overwrite", action="store_true",
                   help="replace an existing results folder (only once the new one is complete)")
    c.add_argument("--no-report", action="store_true", help="skip the report and 3D scene")
    c.add_argument("--workers", type=int, default=None,
                   help="run on a local Dask cluster with this many workers")
    c.add_argument("--scheduler", default=None, help="address of a Dask scheduler to run on")
    c.add_argument("--timings", action="store_true",
                   help="print the time each step took (also in summary.json)")


def _run(args, console):
    from .run.compute import run_site_file
    summary = run_site_file(args.site, args.out, overwrite=args.overwrite,
                            report=not args.no_report, progress=console.progress,
                            workers=args.workers, scheduler=args.scheduler)
    if getattr(args, "json", False):
        import json
        data = json.loads((summary.folder / "summary.json").read_text(encoding="utf-8"))
        console.warnings(summary.results.warnings)
        console.json({"folder": str(summary.folder), **data})
        return
    console.summary(summary)
    if args.timings:
        console.timings(summary.results.timings)


def _batch(args, console):
    from .run.batch import run_batch
    summaries, envelope = run_batch(args.site, args.variants, args.out,
                                    overwrite=args.overwrite, report=not args.no_report,
                                    progress=console.progress, workers=args.workers,
                                    scheduler=args.scheduler)
    for summary in summaries:
        console.lines([f"variant {summary.folder.name}:"])
        console.summary(summary)
    console.lines([f"envelope of {len(summaries)} variants: "
                   f"{summaries[0].folder.parent / 'envelope_points.csv'}"])


def _check(args, console):
    from .run.compute import check_site_file
    report = check_site_file(args.site)
    if args.json:
        from .console import check_json
        console.json(check_json(report))
        return
    console.check(report)


def _example(args, console):
    from .examples import example_site, list_examples
    if not args.name:
        console.examples(list_examples())
        return
    _run(argparse.Namespace(**{**vars(args), "site": example_site(args.name),
                               "out": args.out or Path(f"results-{args.name}")}), console)


def _point(args, console):
    from .run.point import point_stresses
    if len(args.xyz) % 3:
        raise InputError(f"needs x y depth triples, got {len(args.xyz)} numbers", argument="xyz")
    result = point_stresses(args.site, args.xyz, stage=args.stage)
    if args.json:
        from .console import point_json
        console.warnings(result.warnings)
        console.json(point_json(result))
        return
    console.points(result)


def _design(args, console):
    from .design.command import design_site_file
    # plain print: the address must not be wrapped, and shows even with -q
    design_site_file(args.site, browser=not args.no_browser, depth=args.depth,
                     ratio_limit=args.ratio_limit, stress_limit=args.stress_limit,
                     announce=lambda lines: print(*lines, sep="\n", flush=True))


def _view(args, console):
    from . import viewer
    _require_results(args.results)
    common = dict(exaggeration=args.exaggeration, quantity=args.quantity, colour_range=args.colour_range,
                  layers=[name.strip() for name in str(args.layers).split(",") if name.strip()])
    if args.html:
        from .scene_page import export_scene_html
        console.wrote(export_scene_html(args.results, args.html, **common))
    elif args.png:
        console.wrote(viewer.render_png(args.results, args.png, camera=args.camera,
                                        depth=args.depth, **common))
    else:
        viewer.show(args.results, depth=args.depth, **common)


def _report(args, console):
    from .report import write_report
    _require_results(args.results)
    html = write_report(args.results, args.output)
    console.wrote(html)
    if args.pdf:
        from .report.pdf import write_pdf
        console.wrote(write_pdf(html, folder=args.results))


def _monitor(args, console):
    from .monitoring.command import monitor_site_file
    summary = monitor_site_file(
        args.site, args.readings, args.out, day0=args.day0, construction=args.construction,
        target_degree=args.target_degree, residual_limit=args.residual_limit,
        design_life_years=args.design_life, overwrite=args.overwrite,
        report=not args.no_report)
    for block in summary.tables():
        console.table(*block)
    console.lines(summary.closing_lines())


def _require_results(folder: Path):
    if not (folder / "manifest.json").is_file():
        raise InputError("not a fillstress results folder (no manifest.json)", file=folder)


if __name__ == "__main__":  # pragma: no cover
    command()
