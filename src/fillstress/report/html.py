"""The engineering report: one self-contained HTML file, printable to PDF.

Images are embedded as base64 PNG and the style sheet is inline, so the file opens
offline and can be sent on its own. Every text taken from the results folder passes
through :func:`esc` (html.escape) before it reaches the page.
"""
from __future__ import annotations

import base64
import html
import math
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from . import figures
from .folder import ResultsFolder

SECTIONS = (
    ("site", "Site and job"),
    ("inputs", "Input summary"),
    ("method", "Method and assumptions"),
    ("plans", "Plan views of the vertical stress increase"),
    ("profiles", "Vertical profiles"),
    ("pipes", "Pipe profiles"),
    ("tables", "Result tables"),
    ("convergence", "Convergence check"),
    ("provenance", "Provenance"),
    ("cautions", "Cautions"),
)

METHOD_TEXT = (
    "The soil is taken as a homogeneous, isotropic, linear-elastic half-space below the "
    "existing ground surface (Boussinesq, 1885). Each fill body acts as a flexible surface "
    "load: its weight per unit area (thickness × unit weight) is applied on the existing "
    "ground, cell by cell, with no stiffness of its own. The vertical stress increase Δσz "
    "at a point is the sum of the contributions of every loaded cell (superposition, "
    "valid for a linear-elastic medium). For layered deposits, in which thin stiff "
    "horizontal seams restrain lateral strain, the Westergaard (1938) solution replaces "
    "Boussinesq's.",
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
CAUTIONS = (
    "These results are for checking by a licensed geotechnical engineer before any use.",
    "Local codes and regulations govern design and take precedence over this report.",
)

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
tr.flagged td { background: #fde8e4; }
td.flag { font-weight: bold; color: #8a1c0c; }
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


def esc(value) -> str:
    """Text from an input file, escaped for HTML (quotes too).

    Examples
    --------
    >>> esc('<script>alert("x")</script>')
    '&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt;'
    """
    return html.escape(str(value), quote=True)


def _fmt(value) -> str:
    """A cell value: floats to 4 significant figures (2 decimals from 1000 up, so that
    coordinates keep their precision), the rest as text (escaped).

    Examples
    --------
    >>> _fmt(0.012345), _fmt(512363.0), _fmt("<x>")
    ('0.01235', '512363.00', '&lt;x&gt;')
    """
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (float, np.floating)):
        if math.isnan(value):
            return ""
        return esc(f"{value:.2f}" if abs(value) >= 1000 else f"{value:.4g}")
    if isinstance(value, (int, np.integer)):
        return esc(value)
    if value is None:
        return ""
    return esc(value)


def _is_number(value) -> bool:
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(
        value, (bool, np.bool_))


def _is_flag_set(value) -> bool:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return False
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    return str(value).strip().lower() not in ("", "0", "false", "no", "none", "ok")


def is_flag_column(name) -> bool:
    """Columns that flag a receptor: "flag…", "exceeds_…", "…limit_reached".

    Examples
    --------
    >>> [is_flag_column(c) for c in ("flag", "exceeds_panel_wall_cracking", "dsz_max_kPa")]
    [True, True, False]
    """
    name = str(name).lower()
    return "flag" in name or name.startswith("exceeds_") or name.endswith("limit_reached")


def html_table(columns, rows) -> str:
    """An HTML table; every cell escaped, numbers right-aligned, flagged rows marked.

    A flag column (:func:`is_flag_column`) marks its row when the value is set.

    Examples
    --------
    >>> html_table(["id", "flag"], [["<b>", "too steep"]])[:30]
    '<table><thead><tr><th>id</th><'
    >>> "&lt;b&gt;" in html_table(["id"], [["<b>"]])
    True
    """
    columns = list(columns)
    flag_idx = [k for k, c in enumerate(columns) if is_flag_column(c)]
    # <wbr> after underscores lets long column names wrap instead of widening the page.
    heads = (esc(c).replace("_", "_<wbr>") for c in columns)
    out = ["<table><thead><tr>", *(f"<th>{h}</th>" for h in heads), "</tr></thead><tbody>"]
    for row in rows:
        flagged = any(_is_flag_set(row[k]) for k in flag_idx)
        out.append('<tr class="flagged">' if flagged else "<tr>")
        for k, v in enumerate(row):
            cls = "flag" if k in flag_idx and _is_flag_set(v) else ("num" if _is_number(v) else "")
            out.append(f'<td class="{cls}">{_fmt(v)}</td>' if cls else f"<td>{_fmt(v)}</td>")
        out.append("</tr>")
    out.append("</tbody></table>")
    return "".join(out)


def frame_table(df) -> str:
    """A pandas DataFrame as :func:`html_table`."""
    return html_table(df.columns, df.itertuples(index=False, name=None))


def json_block(value, level: int = 3) -> str:
    """Any JSON value as HTML: objects as key/value tables, lists of objects as tables.

    Examples
    --------
    >>> json_block({"a": 1, "b": [{"x": 2}]}).count("<table>")
    2
    """
    if isinstance(value, dict):
        scalars = [(k, v) for k, v in value.items() if not isinstance(v, (dict, list))]
        nested = [(k, v) for k, v in value.items() if isinstance(v, (dict, list))]
        parts = [html_table(["item", "value"], scalars)] if scalars else []
        for k, v in nested:
            parts.append(f"<h{level}>{esc(str(k).replace('_', ' '))}</h{level}>")
            parts.append(json_block(v, min(level + 1, 6)))
        return "".join(parts)
    if isinstance(value, list):
        if value and all(isinstance(v, dict) for v in value):
            columns = list(dict.fromkeys(k for v in value for k in v))
            rows = [[_plain(v.get(c)) for c in columns] for v in value]
            return html_table(columns, rows)
        return "<ul>" + "".join(f"<li>{_fmt(_plain(v))}</li>" for v in value) + "</ul>"
    return f"<p>{_fmt(value)}</p>"


def _plain(value):
    """Nested JSON inside a table cell is shown as compact text."""
    if isinstance(value, (dict, list)):
        import json
        return json.dumps(value, ensure_ascii=False)
    return value


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


class _Report:
    """Assembles the sections of the report of one results folder."""

    def __init__(self, folder: ResultsFolder):
        self.f = folder
        self.u = folder.units
        self.points = folder.point_tables()
        self.fill = folder.fill_thickness()
        self.buildings = folder.features("buildings")
        self.pipes = folder.features("pipes")
        self.boreholes = folder.features("boreholes")

    # --- sections ------------------------------------------------------------
    def site(self) -> str:
        m, s = self.f.manifest, self.f.summary
        rows = [("site file", m.get("site_file", "")),
                ("created (UTC)", m.get("created", "")),
                ("program", f"{m.get('program', '')} {m.get('version', '')}".strip()),
                ("units", ", ".join(f"{k}: {v}" for k, v in (m.get("units") or {}).items())),
                ("coordinate reference system", _crs_name(m.get("crs"))),
                ("analysis grid", _grid_text(m.get("grid"), self.u.length))]
        parts = [html_table(["item", "value"], rows)]
        if isinstance(s.get("site"), dict):
            parts.insert(0, json_block(s["site"]))
        return "".join(parts)

    def inputs(self) -> str:
        parts = []
        bodies = self.f.table("bodies")
        if bodies is not None:
            parts.append("<h3>Fill bodies</h3>" + frame_table(bodies))
        else:
            parts.append('<p class="note">No bodies.csv in this results folder.</p>')
        soil = self.f.summary.get("soil_profile") or self.f.summary.get("soil")
        if soil:
            parts.append("<h3>Soil profile</h3>" + json_block(soil, 4))
        else:
            parts.append('<p class="note">No soil profile: stresses only, no settlement.</p>')
        settings = self.f.manifest.get("settings")
        if settings:
            parts.append("<h3>Resolved settings</h3>" + json_block(settings, 4))
        return "".join(parts)

    def method(self) -> str:
        given = _text_list(self.f.manifest.get("assumptions"))
        parts = [f"<p>{esc(t)}</p>" for t in METHOD_TEXT]
        method = (self.f.manifest.get("settings") or {}).get("method")
        if method:
            parts.append(f"<p>Solution used for this run: <strong>{esc(method)}</strong>.</p>")
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
        parts = ['<p class="note">Dashed line: outline of the fill. Orange: pipes. White '
                 'polygons: buildings. Circles: boreholes.</p>']
        for s in slices:
            png = figures.plan_map(s, fill=self.fill, buildings=self.buildings, pipes=self.pipes,
                                   boreholes=self.boreholes, length_unit=self.u.length)
            parts.append(_img(png, f"Δσz on plan grid '{s.grid}' at depth {s.depth:g} "
                                   f"{self.u.length} ({self.u.pressure})"))
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
        for role, what in (("profile", "below"), ("borehole", "at borehole")):
            for kind, rid, grp in self._groups(role):
                depth = self.f.column(grp, "depth", "length", name=f"{kind}_points")
                self.f.column(grp, "dsz", "pressure", name=f"{kind}_points")
                series = {"Δσz": grp[dsz]}
                if sv0 in grp.columns:
                    series["σ'v0 (initial effective)"] = grp[sv0]
                png = figures.depth_profile(grp[depth], series, length_unit=self.u.length,
                                            value_label=f"stress ({self.u.pressure})",
                                            title=_mpl_text(rid))
                parts.append(_img(png, f"Vertical profile {what} {rid}"))
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
                parts.append(_img(png, f"Pipe {rid}: Δσz along chainage"))
        return "".join(parts) or '<p class="note">No pipes in this results folder.</p>'

    def tables(self) -> str:
        parts = []
        for kind, df in self.f.summary_tables().items():
            if df is None:
                continue
            parts.append(f"<h3>{esc(kind.replace('_', ' '))}</h3>" + frame_table(df))
        parts.append('<p class="note">Rows shaded red carry a flag. Every sample point is in '
                     "the <code>*_points.csv</code> files of the results folder.</p>")
        return "".join(parts)

    def convergence(self) -> str:
        conv = self.f.summary.get("convergence")
        if not conv:
            return '<p class="note">No convergence check in this results folder.</p>'
        return json_block(conv, 4)

    def provenance(self) -> str:
        m = self.f.manifest
        rows = [("program", m.get("program", "")), ("version", m.get("version", "")),
                ("results created (UTC)", m.get("created", "")),
                ("report written (UTC)", datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")),
                ("results folder", self.f.path.name)]
        parts = [html_table(["item", "value"], rows)]
        for key, title in (("inputs", "Input files (SHA-256)"), ("outputs", "Output files (SHA-256)")):
            hashes = m.get(key)
            if isinstance(hashes, dict) and hashes:
                parts.append(f"<h3>{title}</h3>" + html_table(
                    ["file", "sha256"], [(p, h) for p, h in hashes.items()]))
        return "".join(parts)

    def cautions(self) -> str:
        items = list(CAUTIONS) + _text_list(self.f.manifest.get("cautions"))
        return '<div class="caution"><ul>' + "".join(f"<li>{esc(t)}</li>" for t in items) + "</ul></div>"

    # --- page ----------------------------------------------------------------
    def page(self) -> str:
        bodies = {"site": self.site, "inputs": self.inputs, "method": self.method,
                  "plans": self.plans, "profiles": self.profiles, "pipes": self.pipe_profiles,
                  "tables": self.tables, "convergence": self.convergence,
                  "provenance": self.provenance, "cautions": self.cautions}
        title = _site_title(self.f)
        new_page = {"plans", "profiles", "tables", "provenance"}
        sections = []
        for key, heading in SECTIONS:
            cls = ' class="new-page"' if key in new_page else ""
            sections.append(f'<section id="{key}"{cls}><h2>{esc(heading)}</h2>{bodies[key]()}</section>')
        return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
                f"<title>{esc(title)}</title><style>{CSS}</style></head><body>"
                f"<h1>Vertical stress below fills: {esc(title)}</h1>"
                f'<p class="caution">{esc(CAUTIONS[0])} {esc(CAUTIONS[1])}</p>'
                + "".join(sections) + "</body></html>\n")


def _site_title(folder: ResultsFolder) -> str:
    site = folder.summary.get("site")
    if isinstance(site, dict) and site.get("name"):
        return str(site["name"])
    return str(folder.manifest.get("site_file") or folder.path.name)


def _crs_name(wkt) -> str:
    if not wkt:
        return "not given"
    try:
        from pyproj import CRS
        crs = CRS.from_user_input(wkt)
        code = crs.to_epsg()
        return f"{crs.name} (EPSG:{code})" if code else crs.name
    except Exception:  # an unreadable CRS is still shown, as given
        return str(wkt)[:120]


def _grid_text(grid, unit: str) -> str:
    if not isinstance(grid, dict):
        return "not given"
    try:
        return (f"{int(grid['nx'])} × {int(grid['ny'])} cells of {float(grid['dx']):g} × "
                f"{float(grid['dy']):g} {unit}, south-west corner ({float(grid['x0']):.2f}, "
                f"{float(grid['y0']):.2f})")
    except (KeyError, TypeError, ValueError):
        return str(grid)


def write_report(results_dir, path=None) -> Path:
    """Write the engineering report of a results folder as one self-contained HTML file.

    Parameters
    ----------
    results_dir : str or path-like
        A results folder (docs/results-folder.md).
    path : str or path-like, optional
        Where to write; default ``<results_dir>/report.html``.

    Returns
    -------
    pathlib.Path
        The file written (via a temporary name, renamed into place).

    Examples
    --------
    >>> write_report("/no/such/folder")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument results_dir: is not a results folder (no such directory)
    """
    folder = ResultsFolder(results_dir)
    text = _Report(folder).page()
    path = folder.path / "report.html" if path is None else Path(path)
    tmp = path.with_name(f".{path.name}.partial")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(path)
    return path
