"""The engineering report: one self-contained HTML file, printable to PDF.

Images are embedded as base64 PNG and the style sheet is inline, so the file opens
offline and can be sent on its own. Every text taken from the results folder passes
through :func:`esc` (html.escape) before it reaches the page. Table headings state
their unit in the site's unit system (:mod:`fillstress.report.labels`).
"""
from __future__ import annotations

import base64
import os
import re
from datetime import datetime, timezone
from pathlib import Path

from pyproj import CRS

from ..cautions import CHECKED_BY, CORE_CAUTION
from ..errors import InputError
from ..io.atomic import write_atomic
from .corridor import alignment_section
from .forked import make_all
from .headroom import headroom_section
from .limits import CSS as LIMITS_CSS, limits_section, reached_limits
from .odds import odds_section
from ..io.results import ResultsFolder, UnitLabels
from . import figures
from .labels import heading, unit_text
from .record import INFLUENCE_NOTE, calculation_record, convergence_item
from .tables import (
    esc,
    frame_table,
    html_table,
    is_flag_column,
    is_flag_set,
    is_missing,
    json_block,
    key_value_table,
    plain,
    receptor_flagged,
    receptor_table,
)

__all__ = ["SECTIONS", "write_run_report", "esc", "html_table", "frame_table", "json_block",
           "is_flag_column"]

SECTIONS = (
    ("site", "Site and job"),
    ("inputs", "Input summary"),
    ("method", "Method and assumptions"),
    ("plans", "Plan views of the vertical stress increase"),
    ("profiles", "Vertical profiles"),
    ("pipes", "Pipe profiles"),
    ("alignment", "Along the alignment"),
    ("limits", "Limits"),
    ("headroom", "Headroom for a further load"),
    ("odds", "Odds of exceeding a limit"),
    ("time", "Settlement with time"),
    ("record", "Settlement calculation record"),
    ("tables", "Result tables"),
    ("convergence", "Convergence check"),
    ("provenance", "Provenance"),
    ("cautions", "Cautions"),
)

# Shared with a second process where there are two cores (report.forked), these first:
# the sections drawing most figures, slowest first.
SLOW_SECTIONS = ("plans", "alignment", "time", "profiles", "headroom", "pipes", "odds")

#: The stress solution of a run, by its method: what the soil is taken to be.
SOIL_MODEL = {
    "boussinesq": "The soil is taken as a homogeneous, isotropic, linear-elastic half-space "
                  "below the existing ground surface (Boussinesq, 1885).",
    "westergaard": "The soil is taken as a linear-elastic half-space reinforced by thin, "
                   "rigid horizontal layers that prevent lateral strain (Westergaard, 1938), "
                   "the model for layered deposits such as varved clays with silt or sand "
                   "seams.",
}
METHOD_TEXT = (
    "Each fill body acts as a flexible surface load: its weight per unit area (thickness × "
    "unit weight) is applied on the existing ground, cell by cell, with no stiffness of its "
    "own. The vertical stress increase Δσz at a point is the sum of the contributions of "
    "every loaded cell (superposition, valid for a linear-elastic medium). Boussinesq's "
    "homogeneous half-space and Westergaard's layered one are the two solutions offered; "
    "the site file's [grid] method chooses.",
)
LIMITATIONS = (
    "Real soil is neither homogeneous nor linear-elastic; stiff layers over soft ones "
    "(or the reverse) redistribute stress in ways a half-space solution does not show.",
    "The fill is treated as flexible: a stiff raft or a reinforced platform spreads load "
    "differently.",
    "Stresses are those of the final geometry; staging, time-dependent consolidation and "
    "pore-pressure response are outside Δσz itself.",
    "Results on the plan grid are only as fine as the grid; see the convergence check.",
    "Building and pipe stiffness, and the interaction of structures with the ground, are "
    "ignored.",
)
#: Shown when the folder's manifest does not carry the core caution itself.
CAUTIONS = (CORE_CAUTION,)

CSS = """
body { font-family: "Helvetica Neue", Arial, sans-serif; color: #1d1d1d; margin: 2em auto;
       max-width: 60em; line-height: 1.4; padding: 0 1em; }
h1 { font-size: 1.6em; border-bottom: 3px solid #2b4a6f; padding-bottom: .2em; }
h2 { font-size: 1.25em; color: #2b4a6f; border-bottom: 1px solid #b8c4d2; margin-top: 1.8em; }
h3 { font-size: 1.05em; margin-bottom: .3em; }
table { border-collapse: collapse; margin: .5em 0 1em; font-size: .85em; max-width: 100%; }
th, td { border: 1px solid #c9c9c9; padding: .2em .5em; text-align: left; vertical-align: top; }
th { background: #eef2f6; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
tr.flagged td, th.flagged { background: #fde8e4; }
th.flagged { color: #8a1c0c; }
td.flag { font-weight: bold; color: #8a1c0c; background: #fde8e4; }
table.receptors tbody th { font-weight: normal; background: #f6f8fa; }
.findings { border: 2px solid #8a1c0c; padding: .4em 1em; background: #fde8e4; margin-top: 1em; }
.findings.none { border-color: #2b4a6f; background: #eef2f6; }
figure { margin: 1em 0; break-inside: avoid; page-break-inside: avoid; }
figure img { max-width: 100%; }
figcaption { font-size: .85em; color: #4a4a4a; }
.note { font-size: .9em; color: #4a4a4a; }
.caution { border: 2px solid #8a1c0c; padding: .6em 1em; background: #fff6f4; }
code { font-size: .9em; word-break: break-all; }
@page { size: A4; margin: 16mm 14mm; }
@media print {
  body { margin: 0; max-width: none; font-size: 10pt; }
  table { font-size: 7.5pt; }
  section.new-page { break-before: page; page-break-before: always; }
  thead { display: table-header-group; }
  tr { break-inside: avoid; page-break-inside: avoid; }
  h2, h3 { break-after: avoid; page-break-after: avoid; }
}
"""


def simple_page(title: str, summary: list, sections: list, cautions: list, *, by: str) -> str:
    """A report page of its own (monitoring, batch): `summary` (label, value) pairs,
    `sections` of (heading, html) already escaped, `cautions` plain text, shown first and
    last; `by` names the command that wrote it."""
    stamp = datetime.now(timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    caution_list = "<ul>" + "".join(f"<li>{esc(c)}</li>" for c in cautions) + "</ul>"
    parts = [f"<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
             f"<title>{esc(title)}</title><style>{CSS}</style></head><body>",
             f"<h1>{esc(title)}</h1><p class='note'>Written {stamp} by {esc(by)}.</p>",
             f"<div class='caution' id='cautions-top'>{caution_list}</div>",
             html_table(["item", "value"], [(k, plain(v)) for k, v in summary])]
    parts += [f"<section><h2>{esc(h)}</h2>{body}</section>" for h, body in sections]
    parts.append(f"<section><h2>Cautions</h2><div class='caution'>{caution_list}</div></section>")
    parts.append("</body></html>")
    return "\n".join(parts)


def _img(png: bytes, caption: str) -> str:
    data = base64.b64encode(png).decode("ascii")
    return (f'<figure><img alt="{esc(caption)}" src="data:image/png;base64,{data}">'
            f"<figcaption>{esc(caption)}</figcaption></figure>")


def _mpl_text(text: str) -> str:
    """Receptor ids in figure titles: a '$' must not start matplotlib mathtext."""
    return str(text).replace("$", r"\$")


def _text_list(value) -> list[str]:
    if value is None:
        return []
    if isinstance(value, str):
        return [value]
    if isinstance(value, list):
        return [str(v) for v in value]
    return [str(value)]


#: Site keys shown elsewhere in the report (the run settings), not in the site table.
_SITE_KEYS_SHOWN_ELSEWHERE = {"name", "units", "method", "poisson", "cell", "stages"}
_PARTIAL_NAME = re.compile(r"^\.(?P<name>.+)\.partial-[0-9A-Za-z]+$")


def _folder_name(path: Path) -> str:
    """The results folder's final name (the report is written while it is still partial)."""
    m = _PARTIAL_NAME.match(path.name)
    return m["name"] if m else path.name


def _units_text(units: UnitLabels, system: str | None) -> str:
    names = {"SI": "SI", "US": "US customary"}
    parts = [f"length {units.length}", f"pressure {units.pressure}",
             f"unit weight {unit_text(units.unit_weight)}", f"settlement {units.settlement}",
             f"plan coordinates {unit_text(units.plan)}"]
    lead = f"{names.get(system, system)}: " if system else ""
    return lead + ", ".join(parts)


class _Report:
    """Assembles the sections of the report of one results folder."""

    def __init__(self, folder: ResultsFolder):
        self.f = folder
        self.u = folder.units
        self.points = folder.point_tables()
        self.summaries = {k: df for k, df in folder.summary_tables().items() if df is not None}
        self.fill = folder.fill_thickness()
        self.buildings = folder.features("buildings")
        self.pipes = folder.features("pipes")
        self.boreholes = folder.features("boreholes")
        self.to_m = self.u.system.length_to_m       # for the few values kept in metres

    # --- helpers ---------------------------------------------------------------
    def _length(self, metres) -> str:
        """A length kept in metres by the folder, as text in the site length unit."""
        values = metres if isinstance(metres, list) else [metres]
        return ", ".join(f"{plain(float(v) / self.to_m)}" for v in values) + f" {self.u.length}"

    def _site(self) -> dict:
        site = self.f.summary.get("site")
        return site if isinstance(site, dict) else {}

    def _settings_rows(self) -> list[tuple[str, object]]:
        settings = self.f.manifest.get("settings")
        rows = []
        for key, value in (settings.items() if isinstance(settings, dict) else ()):
            if is_missing(value) or isinstance(value, dict) or key == "units":
                continue          # Poisson's ratio is for Westergaard only; units: site table
            if key == "method":
                value = str(value).capitalize()
            if key.endswith("_m") and not isinstance(value, (bool, str)):
                rows.append((heading(key[:-2], self.u), self._length(value)))
            else:
                rows.append((heading(key, self.u), value))
        return rows

    # --- sections --------------------------------------------------------------
    def site(self) -> str:
        m = self.f.manifest
        site = self._site()
        rows = [("name", site.get("name"))]
        rows += [(heading(k, self.u), v) for k, v in site.items()
                 if k not in _SITE_KEYS_SHOWN_ELSEWHERE and not isinstance(v, (dict, list))]
        units = m.get("units") or {}
        rows += [("site file", m.get("site_file", "")),
                 ("created (UTC)", m.get("created", "")),
                 ("program", f"{m.get('program', '')} {m.get('version', '')}".strip()),
                 ("units", _units_text(self.u, units.get("system"))),
                 ("coordinate reference system", _crs_name(m.get("crs"))),
                 ("analysis grid", _grid_text(m.get("grid"), self.u))]
        return key_value_table(rows)

    def inputs(self) -> str:
        parts = []
        bodies = self.f.table("bodies")
        if bodies is not None:
            parts.append("<h3>Fill bodies</h3>" + frame_table(bodies, self.u))
        else:
            parts.append('<p class="note">No bodies.csv in this results folder.</p>')
        soil = self.f.summary.get("soil")
        if soil:
            parts.append("<h3>Soil profile</h3>" + json_block(soil, 4, self.u))
        else:
            parts.append('<p class="note">No soil profile: stresses only, no settlement.</p>')
        rows = self._settings_rows()
        if rows:
            parts.append("<h3>Run settings</h3>" + key_value_table(rows))
        return "".join(parts)

    def method(self) -> str:
        given = _text_list(self.f.manifest.get("assumptions"))
        method = str((self.f.manifest.get("settings") or {}).get("method") or "").lower()
        parts = [f"<p>{esc(t)}</p>" for t in (SOIL_MODEL.get(method, ""), *METHOD_TEXT) if t]
        if method:
            parts.append(f"<p>Solution used for this run: <strong>"
                         f"{esc(method.capitalize())}</strong>.</p>")
        if given:
            parts.append("<h3>Assumptions recorded with this run</h3><ul>"
                         + "".join(f"<li>{esc(t)}</li>" for t in given) + "</ul>")
        parts.append("<h3>Limitations</h3><ul>" + "".join(f"<li>{esc(t)}</li>" for t in LIMITATIONS)
                     + "</ul>")
        return "".join(parts)

    def plans(self) -> str:
        slices = self.f.plan_slices("dsz")
        if not slices:
            return '<p class="note">No plan slices in this results folder.</p>'
        plan_unit = unit_text(self.u.plan)
        parts = [f'<p class="note">Dashed line: outline of the fill. Orange: pipes. White '
                 f"polygons: buildings. Circles: boreholes. Coordinates in {esc(plan_unit)} "
                 f"({esc(_crs_name(self.f.manifest.get('crs')))}). Maps of one plan grid share "
                 f"their contour levels, so their colours compare directly.</p>"]
        levels = {}
        for s in slices:
            lo, hi = levels.get(s.grid, (0.0, 0.0))
            slo, shi = s.value_range()
            levels[s.grid] = (min(lo, slo), max(hi, shi))
        common = dict(fill=self.fill, buildings=self.buildings, pipes=self.pipes,
                      boreholes=self.boreholes, length_unit=plan_unit)
        for grid, (lo, hi) in levels.items():        # the maps of a grid share one layout
            of_grid = [s for s in slices if s.grid == grid]
            pngs = figures.plan_maps(of_grid, levels=figures.nice_levels(lo, hi), **common)
            for s, png in zip(of_grid, pngs):
                parts.append(_img(png, f"Δσz ({self.u.pressure}) at depth {s.depth:g} "
                                       f"{self.u.length} below the existing ground, plan grid "
                                       f"'{s.grid}'"))
        for s in self.f.plan_slices("settlement"):
            png = figures.plan_map(s, levels=figures.nice_levels(*s.value_range()),
                                   label="settlement", **common)
            parts.append(_img(png, f"Final settlement ({self.u.settlement}) at the ground "
                                   f"surface along the load history, plan grid '{s.grid}'"))
        return "".join(parts)

    def _groups(self, role: str):
        """(kind, receptor_id, rows) for sample points of `role`."""
        for kind, df in self.points.items():
            if df is None or "role" not in df.columns:
                continue
            sel = df[df["role"] == role]
            for rid, grp in sel.groupby("receptor_id", sort=False):
                yield kind, rid, grp

    def profiles(self) -> str:
        parts = []
        dsz = self.u.suffixed("dsz", "pressure")
        sv0 = self.u.suffixed("sigma_v0", "pressure")
        for role, what in (("profile", "below building"), ("borehole", "at borehole")):
            for kind, rid, grp in self._groups(role):
                depth = self.f.column(grp, "depth", "length", name=f"{kind}_points")
                self.f.column(grp, "dsz", "pressure", name=f"{kind}_points")
                series = {"Δσz": grp[dsz]}
                if sv0 in grp.columns:
                    series["σ'v0 (initial effective)"] = grp[sv0]
                png = figures.depth_profile(grp[depth], series, length_unit=self.u.length,
                                            value_label=f"stress ({self.u.pressure})",
                                            title=_mpl_text(rid))
                parts.append(_img(png, f"Vertical profile {what} {rid}: Δσz and σ'v0 "
                                       f"({self.u.pressure}) against depth ({self.u.length})"))
        return "".join(parts) or '<p class="note">No profile or borehole points.</p>'

    def pipe_profiles(self) -> str:
        parts = []
        chain = self.u.suffixed("chainage", "length")
        dsz = self.u.suffixed("dsz", "pressure")
        settle = self.u.suffixed("settlement", "settlement")
        for kind, df in self.points.items():
            if df is None or chain not in df.columns:
                continue
            self.f.column(df, "dsz", "pressure", name=f"{kind}_points")
            for rid, grp in df[df[chain].notna()].groupby("receptor_id", sort=False):
                second = grp[settle] if settle in grp.columns else None
                png = figures.chainage_profile(
                    grp[chain], grp[dsz], length_unit=self.u.length,
                    value_label=f"Δσz at crown ({self.u.pressure})", second=second,
                    second_label=f"settlement ({self.u.settlement})", title=_mpl_text(rid))
                what = " and settlement (dashed)" if second is not None else ""
                parts.append(_img(png, f"Pipe {rid}: Δσz at the crown{what} along the "
                                       f"chainage ({self.u.length})"))
        return "".join(parts) or '<p class="note">No pipes in this results folder.</p>'

    def _receptor_kind(self, rid: str) -> tuple[str, str]:
        """(kind, where) of a receptor id, from the sample-point tables."""
        for kind, df in self.points.items():
            if df is not None and "receptor_id" in df.columns and (df["receptor_id"] == rid).any():
                if kind == "buildings":
                    return "building", "at the centroid, foundation level"
                return kind.rstrip("s"), "at the ground surface" if kind == "boreholes" else ""
        return "receptor", ""

    def time(self) -> str:
        table = self.f.table("settlement_time")
        if table is None or table.empty:
            return '<p class="note">No settlement_time.csv: no settlement–time curves.</p>'
        settle = self.f.column(table, "settlement", "settlement", name="settlement_time")
        self.f.column(table, "days", None, name="settlement_time")
        parts = ['<p class="note">Primary consolidation with time (Terzaghi 1-D theory; radial '
                 "flow to vertical drains by Hansbo 1981 where they act, combined by Carrillo "
                 "1942; each stage's load rising over its build duration, Olson 1977), from the "
                 "start of the first stage. Settlement is plotted downward.</p>"]
        for rid, grp in table.groupby("receptor_id", sort=False):
            kind, where = self._receptor_kind(str(rid))
            png = figures.settlement_time(grp["days"], grp[settle],
                                          settlement_unit=self.u.settlement,
                                          title=_mpl_text(f"{kind} {rid}"))
            where = f" {where}" if where else ""
            parts.append(_img(png, f"Settlement ({self.u.settlement}) against time (days) of "
                                   f"{kind} {rid}{where}"))
        return "".join(parts)

    def tables(self) -> str:
        parts = []
        for kind, df in self.summaries.items():
            parts.append(f"<h3>{esc(kind.replace('_', ' '))}</h3>" + receptor_table(df, self.u))
        parts.append('<p class="note">Receptors and cells shaded red carry a flag (a limit '
                     f"reached). –: no value. {esc(INFLUENCE_NOTE)} "
                     "Every sample point is in the <code>*_points.csv</code> files of the "
                     "results folder.</p>")
        return "".join(parts)

    def convergence(self) -> str:
        conv = self.f.summary.get("convergence")
        if not conv:
            return '<p class="note">No convergence check in this results folder.</p>'
        text = _convergence_text(conv, self.u)
        return (f"<p>{esc(text)}</p>" if text else "") + json_block(conv, 4, self.u)

    def provenance(self) -> str:
        m = self.f.manifest
        rows = [("program", m.get("program", "")), ("version", m.get("version", "")),
                ("results created (UTC)", m.get("created", "")),
                ("report written (UTC)", datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")),
                ("results folder", _folder_name(self.f.path))]
        parts = [html_table(["item", "value"], rows)]
        for key, title in (("inputs", "Input files (SHA-256)"), ("outputs", "Output files (SHA-256)")):
            hashes = m.get(key)
            if isinstance(hashes, dict) and hashes:
                parts.append(f"<h3>{title}</h3>" + html_table(
                    ["file", "sha256"], [(p, h) for p, h in hashes.items()]))
        return "".join(parts)

    def _caution_items(self) -> list[str]:
        # the folder's own cautions, after the standard ones unless they already say them
        # (a run's manifest does: the page would repeat them)
        stated = _text_list(self.f.manifest.get("cautions"))
        says_core = any(CHECKED_BY in t for t in stated)
        return ([] if says_core else list(CAUTIONS)) + stated

    def cautions(self) -> str:
        return ('<div class="caution"><ul>'
                + "".join(f"<li>{esc(t)}</li>" for t in self._caution_items()) + "</ul></div>")

    def findings(self) -> str:
        """The flagged receptors, stated at the top of the report."""
        flagged, checked, named = [], False, set()
        for kind, df in self.summaries.items():
            flag_cols = [c for c in df.columns if is_flag_column(c)]
            checked = checked or bool(flag_cols)
            for rec in df.to_dict("records"):
                if receptor_flagged(rec):
                    flagged.append(_flag_text(kind, rec, flag_cols, self.u))
                    named.add((kind.rstrip("s"), str(rec.get("receptor_id", ""))))
        # the [limits] the flag columns do not carry (a pipe's differential, a stress limit)
        flagged += reached_limits(self.f, skip=named)
        converged = convergence_item(self.f.summary.get("convergence"), self.u)
        flagged += [converged] if converged else []
        if flagged:
            return ('<div class="findings"><strong>Limits reached</strong><ul>'
                    + "".join(f"<li>{esc(t)}</li>" for t in flagged)
                    + '</ul>See the result tables for the values.</div>')
        if checked:
            return ('<div class="findings none">No building or pipe reached a checked limit.'
                    "</div>")
        return ""

    def warnings(self) -> str:
        """Warnings of the run (e.g. points in heave below an excavation), at the top."""
        items = _text_list(self.f.summary.get("warnings"))
        if not items:
            return ""
        return ('<div class="findings"><strong>Warnings of this run</strong><ul>'
                + "".join(f"<li>{esc(t)}</li>" for t in items) + "</ul></div>")

    # --- page ----------------------------------------------------------------
    def page(self, beside=None) -> str:
        """The page; `beside` (name → callable) is other work made first in the same
        processes as the sections (see :func:`write_run_report`)."""
        beside = dict(beside or {})
        bodies = {"site": self.site, "inputs": self.inputs, "method": self.method,
                  "plans": self.plans, "profiles": self.profiles, "pipes": self.pipe_profiles,
                  "alignment": lambda: alignment_section(self.f, _img, esc),
                  "limits": lambda: limits_section(self.f),
                  "headroom": lambda: headroom_section(self.f, _img),
                  "odds": lambda: odds_section(self.f, _img),
                  "time": self.time, "tables": self.tables, "convergence": self.convergence,
                  "record": lambda: calculation_record(self.f) or
                  '<p class="note">No settlement calculation record in this results folder.</p>',
                  "provenance": self.provenance, "cautions": self.cautions}
        title = _site_title(self.f)
        new_page = {"plans", "profiles", "tables", "provenance"}
        self.f.cube()               # read here, before the fork: kept for the scene after
        made = make_all({**beside, **{key: bodies[key] for key, _ in SECTIONS}},
                        first=(*beside, *SLOW_SECTIONS))
        sections = []
        for key, heading_text in SECTIONS:
            cls = ' class="new-page"' if key in new_page else ""
            sections.append(f'<section id="{key}"{cls}><h2>{esc(heading_text)}</h2>'
                            f"{made[key]}</section>")
        top = ('<div class="caution" id="cautions-top"><ul>'
               + "".join(f"<li>{esc(t)}</li>" for t in self._caution_items()) + "</ul></div>")
        return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
                f"<title>{esc(title)}</title><style>{CSS}{LIMITS_CSS}</style></head><body>"
                f"<h1>Vertical stress below fills: {esc(title)}</h1>"
                + top + self.findings() + self.warnings() + "".join(sections)
                + "</body></html>\n")


def _flag_text(kind: str, rec: dict, flag_cols, units: UnitLabels) -> str:
    exceeded = [c[len("exceeds_"):].replace("_", " ") for c in flag_cols
                if c.startswith("exceeds_") and is_flag_set(rec.get(c))]
    others = [f"{heading(c, units)}: {plain(rec.get(c)).replace('_', ' ')}" for c in flag_cols
              if not c.startswith("exceeds_") and is_flag_set(rec.get(c))]
    if exceeded:
        others.append("limits exceeded: " + ", ".join(exceeded))
    return f"{kind.rstrip('s')} {rec.get('receptor_id', '')}: " + "; ".join(others)


def _convergence_text(conv: dict, u: UnitLabels) -> str:
    """The grid-halving check (run.convergence_check) in words, cells in the site unit.

    Examples
    --------
    >>> _convergence_text({"max_relative_change": 0.0125, "cell_ft": 4.0, "fine_cell_ft": 2.0},
    ...                   UnitLabels("ft", "psf", "pcf", "in"))
    'Halving the cell size from 4 ft to 2 ft changes Δσz at the sample points by at most 1.25 %.'
    """
    change = conv.get("max_relative_change")
    cells = conv.get(f"cell_{u.length}"), conv.get(f"fine_cell_{u.length}")
    if change is None or None in cells:
        return ""
    text = (f"Halving the cell size from {plain(cells[0])} {u.length} to {plain(cells[1])} "
            f"{u.length} changes Δσz at the sample points by at most "
            f"{100 * float(change):.2f} %")
    if conv.get("at_point"):
        text += f" (at point {conv['at_point']})"
    if conv.get("points_compared") is not None and conv.get("threshold_fraction_of_qmax"):
        text += (f", over the {int(conv['points_compared'])} points where Δσz is at least "
                 f"{100 * float(conv['threshold_fraction_of_qmax']):g} % of the largest "
                 "surface pressure")
    return text + "."


def _site_title(folder: ResultsFolder) -> str:
    site = folder.summary.get("site")
    if isinstance(site, dict) and site.get("name"):
        return str(site["name"])
    return str(folder.manifest.get("site_file") or folder.path.name)


def _crs_name(wkt) -> str:
    if not wkt:
        return "not given"
    try:
        crs = CRS.from_user_input(wkt)
        code = crs.to_epsg()
        return f"{crs.name} (EPSG:{code})" if code else crs.name
    except Exception:  # an unreadable CRS is still shown, as given
        return str(wkt)[:120]


def _grid_text(grid, units: UnitLabels) -> str:
    if not isinstance(grid, dict):
        return "not given"
    unit = unit_text(grid.get("unit") or units.plan)
    try:
        return (f"{int(grid['nx'])} × {int(grid['ny'])} cells of {float(grid['dx']):.4g} × "
                f"{float(grid['dy']):.4g} {unit}, south-west corner ({float(grid['x0']):.2f}, "
                f"{float(grid['y0']):.2f}) {unit}")
    except (KeyError, TypeError, ValueError):
        return str(grid)


def write_run_report(results_dir, path=None, *, beside=None) -> Path:
    """Write the engineering report of a run's results folder as one self-contained HTML file.

    Parameters
    ----------
    results_dir : str, path-like or ResultsFolder
        A results folder (docs/results-folder.md), or a view of it already reading it.
    path : str or path-like, optional
        Where to write; default ``<results_dir>/report.html``.
    beside : mapping of str to callable, optional
        Other work on the same folder (a run's 3D scene), made before the sections by the
        same two processes (report.forked), its results dropped: on two cores it runs
        beside the sections instead of after the report.

    Returns
    -------
    pathlib.Path
        The file written (via a temporary name, renamed into place).

    Examples
    --------
    >>> write_run_report("/no/such/folder")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument results_dir: is not a results folder (no such directory)
    """
    where = getattr(results_dir, "path", results_dir)
    if (Path(where) / "monitoring.json").is_file():
        raise InputError("is a monitoring folder: its report.html is written by "
                         "`fillstress monitor` (rerun it with --overwrite)", file=where)
    folder = ResultsFolder.of(results_dir)
    text = _Report(folder).page(beside)
    path = folder.path / "report.html" if path is None else Path(path)
    write_atomic(path, lambda tmp: tmp.write_text(text, encoding="utf-8"))
    _record_in_manifest(folder.path, path)
    return path


def _record_in_manifest(root: Path, path: Path) -> None:
    """A report written into its results folder gets its new checksum in the manifest."""
    from ..io.manifest import refresh_checksums
    if Path(os.path.realpath(path)).parent == Path(os.path.realpath(root)):
        refresh_checksums(root, [path.name])
