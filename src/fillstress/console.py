"""What the command prints: errors, progress bars and every table it shows (rich).

The tables are built here from the run's typed results, in the site's output units.
"""
from __future__ import annotations

import sys
from contextlib import contextmanager

import numpy as np
from rich.console import Console as _RichConsole
from rich.markup import escape
from rich.progress import (
    BarColumn,
    Progress,
    TextColumn,
    TimeElapsedColumn,
    TimeRemainingColumn,
)
from rich.table import Table

from .progress import silent
from .cautions import CORE_CAUTION


FINE_GRAINED = 20    # parts of work from which a time-remaining estimate means something


class Console:
    def __init__(self, quiet: bool = False):
        self.quiet = quiet
        # Piped output (logs, CI) gets a wide table instead of rich's 80-column default.
        wide = None if sys.stdout.isatty() else 140
        # emoji off: input text such as "pad:x:.geojson" is printed as written
        self.out = _RichConsole(highlight=False, width=wide, emoji=False)
        self.err = _RichConsole(stderr=True, highlight=False, emoji=False)

    def log_to_stderr(self) -> None:
        """Show the package's INFO log (steps, solver choices, sizes, times) on stderr,
        above any progress bar."""
        import logging
        from rich.logging import RichHandler
        handler = RichHandler(console=self.err, show_path=False, show_level=False,
                              log_time_format="%H:%M:%S", markup=False)
        handler.setFormatter(logging.Formatter("%(name)s: %(message)s"))
        log = logging.getLogger("fillstress")
        log.addHandler(handler)
        log.setLevel(logging.INFO)

    def error(self, message: str) -> None:
        self.err.print(f"[bold red]fillstress: error:[/] {escape(message)}", soft_wrap=True)

    def warning(self, message: str) -> None:
        if not self.quiet:
            self.err.print(f"[yellow]fillstress: warning:[/] {escape(message)}", soft_wrap=True)

    def wrote(self, path) -> None:
        if not self.quiet:
            self.out.print(f"wrote {escape(str(path))}")

    @contextmanager
    def progress(self, label: str, total: int, unit: str = "steps"):
        """A progress bar on stderr: the label and the step now running, work done in its
        unit, time elapsed. A time remaining only where the work is in many even parts
        (points, tiles): a few steps of unequal length would show an estimate that sits
        at a few seconds through a long step."""
        if self.quiet:
            with silent(label, total) as bar:
                yield bar
            return
        columns = [TextColumn("{task.description:<44}"), BarColumn(),
                   TextColumn("{task.completed:,.0f}/{task.total:,.0f} " + escape(unit)),
                   TimeElapsedColumn()]
        if total >= FINE_GRAINED and unit != "steps":
            columns.append(TimeRemainingColumn())
        with Progress(*columns, console=self.err, transient=False) as bar:
            task = bar.add_task(label, total=total)

            class _Bar:
                def advance(self, n: int = 1):
                    bar.advance(task, n)

                def describe(self, text: str):
                    bar.update(task, description=f"{label}: {text}")
            yield _Bar()
            bar.update(task, description=label)         # done: the step names no longer apply

    # --- tables -----------------------------------------------------------------
    def table(self, title: str, columns: list[str], rows: list[list]) -> None:
        if self.quiet:
            return
        t = Table(title=title, title_justify="left", show_lines=False)
        for k, c in enumerate(columns):
            numeric = rows and all(isinstance(r[k], (int, float)) and not isinstance(r[k], bool)
                                   for r in rows)
            t.add_column(c, justify="right" if numeric else "left")
        for r in rows:
            t.add_row(*[escape(_fmt(v)) for v in r])
        self.out.print(t)

    def lines(self, lines: list[str]) -> None:
        if not self.quiet:
            for line in lines:
                self.out.print(escape(line))

    def summary(self, summary) -> None:
        """A finished run (run.compute.RunSummary): bodies, receptors, closing lines."""
        for block in summary_tables(summary.results):
            self.table(*block)
        self.lines(closing_lines(summary))
        if self.quiet:              # quiet hides progress and tables, never a warning
            self.warnings(summary.results.warnings)

    def timings(self, timings: dict) -> None:
        """Seconds per step of a run (RunResults.timings), in the order they ran."""
        self.table("Time per step", ["step", "seconds"], timing_rows(timings))

    def check(self, report) -> None:
        """What a run would compute (run.compute.CheckReport)."""
        self.table(*body_rows(report.site))
        self.table("What a run computes", ["item", "value"], report.plan)
        self.lines([f"warning: {w}" for w in report.site.warnings]
                   + ["site file is valid; nothing was computed or written"])

    def points(self, result) -> None:
        """Δσz at command-line points (run.point.PointStresses), in site units; the
        answer shows even with -q."""
        if self.quiet:
            for row in point_rows(result)[2]:
                self.out.print("  ".join(row))
        else:
            self.table(*point_rows(result))
        self.warnings(result.warnings)

    def warnings(self, messages) -> None:
        """Warning lines on stderr, shown even with -q."""
        for w in messages:
            self.err.print(escape(f"warning: {w}"), soft_wrap=True)

    def json(self, data) -> None:
        """The machine-readable answer of --json on stdout (nothing else goes there)."""
        import json
        sys.stdout.write(json.dumps(data, ensure_ascii=False, indent=1, default=_plain) + "\n")

    def examples(self, items) -> None:
        self.table("Bundled sample sites", ["name", "what it shows"], items)
        self.lines(["run one with: fillstress example NAME"])


# --- tables ---------------------------------------------------------------------------
def body_rows(site):
    from .io import tables      # with its table libraries: not loaded by `point`
    u = site.units
    out = tables.to_output_units
    rows = [[b.name, b.kind, b.stage, out(b.unit_weight, u, "unit_weight"),
             out(b.volume, u, "volume"), out(b.footprint_area, u, "area"),
             out(b.max_height, u, "length"), out(b.total_load, u, "force")]
            for b in site.bodies]
    force = tables.unit_label(u, "force")
    return ("Fill bodies", ["body", "kind", "stage", f"γ ({u.unit_weight})",
                            f"volume ({tables.unit_label(u, 'volume').replace('3', '³')})",
                            f"footprint ({u.length}²)",
                            f"max height ({u.length})", f"load ({force})"], rows)


def summary_tables(res):
    from .run.files import KIND_FILES, kind_summary   # the writers: only after a run
    site, u = res.site, res.site.units
    out = [body_rows(site)]
    rows = []
    for kind in KIND_FILES:
        pts = res.points[res.points["receptor_kind"] == kind]
        if pts.empty:
            continue
        s = kind_summary(res, kind)
        for _, r in s.iterrows():
            row = [kind, r["receptor_id"], u.pressure_out(r["dsz_max"]),
                   u.length_out(r["depth_at_max"])]
            if site.soil is not None:
                row += [u.settlement_out(r.get("settlement_max", np.nan))
                        if "settlement_max" in r else np.nan,
                        r.get("angular_distortion", np.nan), r.get("worst_limit_reached", "")]
            rows.append(row)
    cols = ["kind", "receptor", f"max Δσz ({u.pressure})", f"at depth ({u.length})"]
    if site.soil is not None:
        cols += [f"max settlement ({u.settlement})", "angular distortion", "limit reached"]
    out.append(("Receptors", cols, rows))
    return out


STEP_LABELS = {"site_build": "site file, bodies, receptors and checks",
               "bodies": "  of which the fill bodies", "compute": "computing, all steps",
               "write": "writing the folder (tables, rasters, report, scene)"}


def timing_rows(timings: dict) -> list[list]:
    """[step, seconds] rows of a run's timings (keys ``<step>_s``).

    Examples
    --------
    >>> timing_rows({"site_build_s": 1.234, "convergence_check_s": 0.5})
    [['site file, bodies, receptors and checks', 1.23], ['convergence check', 0.5]]
    """
    rows = []
    for key, seconds in timings.items():
        name = key.removesuffix("_s")
        rows.append([STEP_LABELS.get(name, name.replace("_", " ")), round(float(seconds), 2)])
    return rows


def closing_lines(summary) -> list[str]:
    r = summary.results
    lines = []
    if r.convergence:
        c = r.convergence
        u = r.site.units
        lines.append(f"convergence: halving the cell ({u.length_out(c['cell']):.4g} → "
                     f"{u.length_out(c['fine_cell']):.4g} {u.length}) "
                     f"changes Δσz by at most {100 * c['max_relative_change']:.2f} % "
                     f"(at {c['at_point']})")
    if r.limits is not None and r.limits.governing is not None:
        lines.append(governing_line(r.limits.governing, r.site.units))
    u = r.site.units
    lines += [_max_height_line(m, u) for m in r.max_heights]
    if r.odds is not None:
        lines.append(odds_line(r.odds.likeliest(u), r.odds.samples))
    if r.headroom is not None:
        lines.append(headroom_line(r.headroom, r.site))
    lines += [f"warning: {w}" for w in r.warnings]
    lines.append(f"results written to {summary.folder}")
    lines.append(CORE_CAUTION)
    return lines


def governing_line(g, units) -> str:
    """'governing limit: settlement at building B1, 31 of 25 mm, utilisation 1.24 (over)'."""
    from .run.limits import unit_of
    label, factor = unit_of(g.row.limit.quantity, units)
    unit = "" if label == "1" else f" {label}"
    state = "reached" if g.row.utilisation >= 1 else "not reached"
    return (f"governing limit: {g.row.limit.label} at {g.kind} {g.row.receptor_id}, "
            f"{g.row.value / factor:.4g} of {g.row.limit.value / factor:.4g}{unit}, "
            f"utilisation {g.row.utilisation:.3g} ({state}; limits.csv)")


def odds_line(row: dict | None, samples: int) -> str:
    """'odds: likeliest limit exceeded: beta_no_cracking at building B1, 12 of 400 samples,
    P = 3 % (95 % Wilson interval 1.7–5.2 %; odds.csv)'."""
    if row is None:
        return f"odds: {samples} samples; no settlement limit in force (odds.csv)"
    return (f"odds: likeliest limit exceeded: {row['limit']} at {row['receptor_kind']} "
            f"{row['receptor_id']}, {row['samples_over']} of {row['samples']} samples, P = "
            f"{100 * row['p_exceed']:.3g} % (95 % Wilson interval {100 * row['wilson_low']:.3g}"
            f"–{100 * row['wilson_high']:.3g} %; odds.csv)")


def headroom_line(found, site) -> str:
    """'headroom: least × 0.102 (0.918 m), pipe_differential at water_main_DN600': short
    enough for an 80-column terminal; where, the template and the re-checks are in
    summary.json and the report, a scaled map is warned of apart."""
    least = found.least()
    if least is None:
        return f"headroom: the {found.template} reaches no mapped limit (headroom.tif)"
    u = site.units
    height = ("" if least["height"] is None else
              f" ({u.length_out(least['height']):.3g} {u.length})")
    return (f"headroom: least × {least['multiple']:.3g}{height}, {least['limit']} at "
            f"{least['receptor_id']}")


def _plain(value):
    """numpy scalars and arrays, paths: as JSON takes them."""
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    return str(value)


def point_json(result) -> dict:
    """`fillstress point --json`: the points as given and Δσz, in site units."""
    from .io import tables
    site, u = result.site, result.site.units
    plan = tables.plan_unit(site.crs, u)[0] if site.crs is not None else u.length
    return {"site": site.name, "stage": result.stage, "method": site.method,
            "units": {"x": plan, "y": plan, "depth": u.length, "dsz": u.pressure},
            "points": [{"x": a, "y": b, "depth": c, "dsz": float(u.pressure_out(d))}
                       for (a, b, c), d in zip(result.xyz.tolist(), result.dsz)],
            "warnings": result.warnings}


def check_json(report) -> dict:
    """`fillstress check --json`: what a run would compute, as the table shows it."""
    return {"site": report.site.name, "valid": True,
            "plan": {str(k): v for k, v in report.plan},
            "warnings": list(report.site.warnings)}


def point_rows(result):
    site, u = result.site, result.site.units
    rows = [[f"{a:.2f}", f"{b:.2f}", f"{c:.2f}", f"{u.pressure_out(d):.2f}"]
            for (a, b, c), d in zip(result.xyz, result.dsz)]
    return (f"Δσz, {site.name} (stage {result.stage}, {site.method})",
            ["x", "y", f"depth ({u.length})", f"Δσz ({u.pressure})"], rows)


def _fmt(v) -> str:
    if isinstance(v, float):
        if v != v:
            return "–"
        if abs(v) >= 1000:
            return f"{v:,.0f}"
        return f"{v:.3g}" if abs(v) < 1e-2 and v != 0 else f"{v:,.2f}"
    return str(v)


def _max_height_line(m, u) -> str:
    """One body's maximum height, or why it has none."""
    from .run.plan import PLAUSIBLE_FILL_M       # the run layer: only when there is a result
    if not m.limit:
        return (f"maximum height of {m.body}: no limit reached below "
                f"{u.length_out(PLAUSIBLE_FILL_M):.4g} {u.length}, higher than any earth fill")
    where = f"{m.receptor_kind} {m.receptor_id}"
    if m.scale <= 0:
        return (f"maximum height of {m.body}: none, the other bodies alone already reach "
                f"{m.limit} at {where}")
    return (f"maximum height of {m.body}: {u.length_out(m.max_height_m):.4g} {u.length} "
            f"(× {m.scale:.4g}), {m.limit} first reached at {where}")
