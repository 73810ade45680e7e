"""The report of a batch folder (`fillstress batch`): the variants side by side, their
governing limits, and the envelope with the variant that gives each maximum.

Each variant keeps its own full report in ``<variant>/report.html``; this page compares
them. Everything shown is read back from the folder (manifest, envelope_points.csv and
each variant's summary.json), in the site's units.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from ..io.results import ResultsFolder
from . import figures
from .html import CAUTIONS, _img, _mpl_text, _text_list, simple_page
from .labels import heading
from .tables import esc, is_missing, plain

ENVELOPE_NOTE = (
    "The envelope takes, at every receptor point, the largest value over the variants; "
    "each column's maximum may come from a different variant, named beside it. The variants "
    "are alternatives to compare, not a sample: the envelope is not a probability.")


def is_batch_folder(path) -> bool:
    """Whether `path` holds a batch run: a manifest listing variants and an envelope."""
    path = Path(path)
    try:
        manifest = json.loads((path / "manifest.json").read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return False
    settings = manifest.get("settings") if isinstance(manifest, dict) else None
    return (isinstance(settings, dict) and isinstance(settings.get("variants"), list)
            and (path / "envelope_points.csv").is_file())


class _BatchReport:
    def __init__(self, folder: ResultsFolder):
        self.f, self.u = folder, folder.units
        self.variants = folder.manifest["settings"]["variants"]
        self.runs = {v["name"]: ResultsFolder(folder.path / v["name"])
                     for v in self.variants if (folder.path / v["name"] / "manifest.json").is_file()}
        self.envelope = folder.table("envelope_points")

    def site_name(self) -> str:
        for run in self.runs.values():
            site = run.summary.get("site")
            if isinstance(site, dict) and site.get("name"):
                return str(site["name"])
        return str(self.f.manifest.get("site_file") or self.f.path.name)

    def summary_rows(self) -> list[tuple[str, object]]:
        m = self.f.manifest
        return [("site", self.site_name()), ("site file", m.get("site_file", "")),
                ("variants", len(self.variants)), ("created (UTC)", m.get("created", "")),
                ("program", f"{m.get('program', '')} {m.get('version', '')}".strip()),
                ("units", f"{self.u.system.name}: length {self.u.length}, pressure "
                          f"{self.u.pressure}, settlement {self.u.settlement}")]

    # --- sections -------------------------------------------------------------------
    def variants_table(self) -> str:
        to_m = self.u.system.length_to_m
        rows = []
        for v in self.variants:
            wt = v.get("water_table")
            report = self.f.path / v["name"] / "report.html"
            link = (f'<a href="{esc(v["name"])}/report.html">report</a>' if report.is_file()
                    else "no report written")
            rows.append([esc(v["name"]), plain(v.get("unit_weight_factor", 1.0)),
                         plain(v.get("height_factor", 1.0)),
                         "the site's" if wt is None else plain(wt / to_m),
                         esc(str(v["method"]).capitalize()) if v.get("method") else "the site's",
                         "the site's" if v.get("poisson") is None else plain(v["poisson"]),
                         link])
        heads = ["variant", "unit weight ×", "height ×", f"water table ({self.u.length})",
                 "method", "Poisson's ratio", "full report"]
        return _raw_table(heads, rows)

    def receptor_maxima(self) -> str:
        """Per receptor, each variant's largest Δσz and settlement (from its summary)."""
        frames = {name: _receptor_rows(run) for name, run in self.runs.items()}
        frames = {n: df for n, df in frames.items() if df is not None}
        if not frames:
            return '<p class="note">No receptor summaries in the variant folders.</p>'
        parts = []
        for prefix in ("dsz_max_", "settlement_max_"):
            table = _side_by_side(frames, prefix)
            if table is not None:
                names = [c for c in table.columns if c not in ("kind", "receptor_id")]
                rows = [[esc(r["kind"]), esc(r["receptor_id"]),
                         *(plain(r[n]) if not is_missing(r[n]) else "–" for n in names)]
                        for r in table.to_dict("records")]
                parts.append(f"<h3>{esc(heading(table.attrs['column'], self.u))} by variant</h3>"
                             + _raw_table(["kind", "receptor", *names], rows))
        figure = self.maxima_figure(frames)
        note = ('<p class="note">From each variant\'s summary.json: for buildings the '
                'maxima at foundation level; the envelope below covers every point, the '
                'profile points below a building included.</p>')
        return note + "".join(parts) + figure

    def maxima_figure(self, frames) -> str:
        prefix = "settlement_max_" if _side_by_side(frames, "settlement_max_") is not None \
            else "dsz_max_"
        table = _side_by_side(frames, prefix)
        if table is None:
            return ""
        label = heading(table.attrs["column"], self.u)
        png = variant_bars(table, label)
        return _img(png, f"{label} at each receptor, one bar per variant")

    def governing(self) -> str:
        rows = []
        for name, run in self.runs.items():
            df = _receptor_rows(run)
            if df is None or "utilisation_max" not in df or df["utilisation_max"].isna().all():
                rows.append([esc(name), "no limits in force", "", ""])
                continue
            top = df.loc[df["utilisation_max"].idxmax()]
            rows.append([esc(name), esc(f"{top['kind']} {top['receptor_id']}"),
                         esc(str(top.get("governing_limit", "")).replace("_", " ")),
                         plain(top["utilisation_max"])])
        return _raw_table(["variant", "governing receptor", "limit", "utilisation"], rows)

    def envelope_section(self) -> str:
        env = self.envelope
        if env is None or env.empty:
            return '<p class="note">No envelope_points.csv in this folder.</p>'
        parts = [f"<p>{esc(ENVELOPE_NOTE)}</p>"]
        value_cols = [c for c in env.columns if f"variant_of_max_{_base(c)}" in env.columns]
        rows = []
        for (kind, rid), group in env.groupby(["receptor_kind", "receptor_id"], sort=False):
            row = [esc(kind), esc(rid)]
            for col in value_cols:
                values = group[col]
                if values.isna().all():
                    row += ["–", ""]
                    continue
                at = values.idxmax()
                row += [plain(values[at]), esc(f"{group.at[at, f'variant_of_max_{_base(col)}']}"
                                               f" at {group.at[at, 'point_id']}")]
            rows.append(row)
        heads = ["kind", "receptor"]
        for col in value_cols:
            heads += [heading(col, self.u), "from variant, at point"]
        parts.append(_raw_table(heads, rows))
        parts.append('<p class="note">Every point: <code>envelope_points.csv</code>.</p>')
        return "".join(parts)

    def method(self) -> str:
        given = _text_list(self.f.manifest.get("assumptions"))
        return ("<p>Each variant is a full run of the site with the changes listed above; "
                "its report states its own method, assumptions and convergence check.</p><ul>"
                + "".join(f"<li>{esc(t)}</li>" for t in given) + "</ul>")

    def page(self) -> str:
        sections = [("Variants", self.variants_table()),
                    ("Governing limit of each variant", self.governing()),
                    ("Receptor maxima by variant", self.receptor_maxima()),
                    ("Envelope over the variants", self.envelope_section()),
                    ("Method and assumptions", self.method())]
        cautions = _text_list(self.f.manifest.get("cautions")) or list(CAUTIONS)
        return simple_page(f"Variants of {self.site_name()}", self.summary_rows(), sections,
                           cautions, by="fillstress")


def _raw_table(heads, rows) -> str:
    """A table of cells already escaped (links kept)."""
    head = "".join(f"<th>{esc(h)}</th>" for h in heads)
    body = "".join("<tr>" + "".join(f"<td>{c}</td>" for c in r) + "</tr>" for r in rows)
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _base(column: str) -> str:
    """'dsz' of 'dsz_kPa', 'stress_ratio' of 'stress_ratio': the name without its unit."""
    for base in ("dsz", "settlement", "stress_ratio"):
        if column == base or column.startswith(base + "_"):
            return base
    return column


def _receptor_rows(run: ResultsFolder):
    """One row per receptor of a variant's summary.json (kind, receptor_id, maxima)."""
    import pandas as pd
    receptors = run.summary.get("receptors")
    if not isinstance(receptors, dict):
        return None
    frames = [pd.DataFrame(rows).assign(kind=kind.rstrip("s")) for kind, rows in receptors.items()
              if isinstance(rows, list) and rows]
    return pd.concat(frames, ignore_index=True) if frames else None


def _side_by_side(frames: dict, prefix: str):
    """receptor × variant table of the summary column starting with `prefix`, or None."""
    columns = {n: next((c for c in df.columns if c.startswith(prefix)), None)
               for n, df in frames.items()}
    if not any(columns.values()):
        return None
    out = None
    for name, df in frames.items():
        col = columns[name]
        if col is None:
            continue
        part = df[["kind", "receptor_id", col]].rename(columns={col: name})
        out = part if out is None else out.merge(part, on=["kind", "receptor_id"], how="outer")
    if out[list(frames)].isna().all().all():
        return None
    out.attrs["column"] = next(c for c in columns.values() if c)
    return out


def variant_bars(table, value_label: str) -> bytes:
    """Grouped bars: one group per receptor, one bar per variant."""
    names = [c for c in table.columns if c not in ("kind", "receptor_id")]
    fig = figures._new_figure(7.2, 3.2)
    ax = fig.add_subplot()
    n = len(names)
    x = np.arange(len(table))
    width = 0.8 / max(n, 1)
    for k, name in enumerate(names):
        values = table[name].to_numpy(float)
        ax.bar(x + (k - (n - 1) / 2) * width, np.where(np.isnan(values), 0.0, values), width,
               label=_mpl_text(name))
    ax.set_xticks(x, [_mpl_text(r) for r in table["receptor_id"]], rotation=30, ha="right",
                  fontsize=7)
    ax.set_ylabel(value_label)
    ax.grid(True, axis="y", linewidth=0.4, alpha=0.5)
    ax.legend(fontsize=7, title="variant", title_fontsize=7)
    return figures.png_bytes(fig)


def write_batch_report(results_dir, path=None) -> Path:
    """Write the report of a batch folder: the variants, their governing limits and maxima,
    and the envelope naming the variant of each maximum.

    Parameters
    ----------
    results_dir : str or path-like
        A folder written by `fillstress batch`.
    path : str or path-like, optional
        Where to write; default ``<results_dir>/report.html``.

    Returns
    -------
    pathlib.Path
        The file written (atomically; recorded in the folder's manifest).
    """
    from ..io.atomic import write_atomic
    from .html import _record_in_manifest
    folder = ResultsFolder(results_dir)
    text = _BatchReport(folder).page()
    path = folder.path / "report.html" if path is None else Path(path)
    write_atomic(path, lambda tmp: tmp.write_text(text, encoding="utf-8"))
    _record_in_manifest(folder.path, path)
    return path


__all__ = ["is_batch_folder", "write_batch_report"]
