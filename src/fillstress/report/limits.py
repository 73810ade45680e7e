"""Report section "Limits": the utilisation (value ÷ limit) of every limit in force at every
receptor, from limits.csv of a results folder (written by :mod:`fillstress.run.limits`).
Rows at or over their limit are shaded; the governing row is outlined."""
from __future__ import annotations

from ..io.results import ResultsFolder
from .tables import _fmt, esc, is_flag_set, plain

COLUMNS = (("receptor_kind", "receptor"), ("receptor_id", "id"), ("limit", "limit"),
           ("value", "value"), ("limit_value", "limit value"), ("unit", "unit"),
           ("utilisation", "utilisation"), ("source", "source of the limit"))
CSS = ("tr.governing td { border-top: 2px solid #1d1d1d; border-bottom: 2px solid #1d1d1d; "
       "font-weight: bold; }")


def limits_section(folder: ResultsFolder) -> str:
    """HTML of the section (a note when the folder has no limits.csv)."""
    table = folder.table("limits")
    if table is None or table.empty:
        return '<p class="note">No limit applied to any receptor of this run.</p>'
    rows = table.to_dict("records")
    governing = next((r for r in rows if is_flag_set(r.get("governing"))), None)
    parts = []
    if governing is not None:
        u = governing["utilisation"]
        parts.append(f'<div class="findings{"" if u >= 1 else " none"}"><strong>Governing '
                     f"limit</strong>: {esc(governing['limit'])} at "
                     f"{esc(governing['receptor_kind'])} {esc(governing['receptor_id'])}, "
                     f"{esc(plain(governing['value']))} of {esc(plain(governing['limit_value']))}"
                     f" {esc(_unit(governing['unit']))} — utilisation {esc(plain(u))} "
                     f"({'limit reached' if u >= 1 else 'within the limit'}).</div>")
    head = "".join(f"<th>{esc(h)}</th>" for _, h in COLUMNS)
    body = []
    for r in rows:
        cls = [c for c, on in (("flagged", r["utilisation"] >= 1),
                               ("governing", r is governing)) if on]
        cells = "".join(_cell(r, key) for key, _ in COLUMNS)
        body.append(f'<tr class="{" ".join(cls)}">{cells}</tr>' if cls else f"<tr>{cells}</tr>")
    parts.append(f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>")
    parts.append('<p class="note">Utilisation = value ÷ limit: 1 means the limit is just '
                 "reached; rows shaded red reach or pass their limit and the outlined row "
                 "governs (the largest utilisation). Stress limits take the largest value "
                 "over a receptor's points; settlement limits the building and pipe checks. "
                 "A negative utilisation is heave or unloading. Every row is in "
                 "<code>limits.csv</code>.</p>")
    return "".join(parts) + max_heights_table(folder)


def reached_limits(folder: ResultsFolder, skip=()) -> list[str]:
    """One line per row of limits.csv at or over its limit (utilisation >= 1), for the
    report's "Limits reached" box; receptors (kind, id) in `skip` are left out (already
    named there).

    Examples
    --------
    >>> import pandas as pd
    >>> class F:
    ...     def table(self, name):
    ...         return pd.DataFrame([{"receptor_kind": "pipe", "receptor_id": "G1",
    ...             "limit": "pipe_differential", "value": 30.0, "limit_value": 15.0,
    ...             "unit": "mm", "utilisation": 2.0}])
    >>> reached_limits(F())
    ['pipe G1: pipe differential 30 of 15 mm (utilisation 2)']
    """
    table = folder.table("limits")
    if table is None or table.empty:
        return []
    return [f"{r['receptor_kind']} {r['receptor_id']}: {str(r['limit']).replace('_', ' ')} "
            f"{plain(r['value'])} of {plain(r['limit_value'])} {_unit(r['unit'])}".rstrip()
            + f" (utilisation {plain(r['utilisation'])})"
            for r in table.to_dict("records")
            if r["utilisation"] >= 1 and (r["receptor_kind"], str(r["receptor_id"])) not in skip]


def max_heights_table(folder: ResultsFolder) -> str:
    """The factor on each body's height at the first limit (max_heights.csv), if any."""
    table = folder.table("max_heights")
    if table is None or table.empty:
        return ""
    height = next(c for c in table.columns if c.startswith("max_height"))
    rows = "".join(
        f"<tr><td>{esc(r['body'])}</td><td class=\"num\">{_fmt(r['scale'])}</td>"
        f"<td class=\"num\">{_fmt(r[height])}</td><td>{esc(plain(r['governing_limit']))}</td>"
        f"<td>{esc(plain(r['receptor_kind']))} {esc(plain(r['receptor_id']))}</td>"
        f"<td class=\"num\">{_fmt(r['tolerance'])}</td></tr>" for r in table.to_dict("records"))
    unit = height.removeprefix("max_height_") or ""
    return ("<h3>Maximum height of each body</h3><table><thead><tr><th>body</th>"
            f"<th>factor on its height</th><th>maximum height ({esc(unit)})</th>"
            "<th>first limit reached</th><th>at</th><th>relative tolerance</th></tr></thead>"
            f"<tbody>{rows}</tbody></table>"
            '<p class="note">The factor on one body\'s height, every other body in place, at '
            "which the first limit in force is reached: exact for stress limits (Δσz is "
            "linear in the load), by a root search on the full settlement for settlement "
            "limits (to the stated relative tolerance; 0 = exact). The body keeps its plan "
            "shape: its thickness is scaled everywhere (a pile of fixed repose angle that "
            "grows at its toe is a different question). Excavations are not searched. "
            "Every row is in <code>max_heights.csv</code>.</p>")


def _unit(label) -> str:
    return "" if str(label) == "1" else str(label)


def _cell(row: dict, key: str) -> str:
    value = row.get(key)
    if key == "unit":
        return f"<td>{esc(_unit(value))}</td>"
    if key in ("value", "limit_value", "utilisation"):
        return f'<td class="num">{_fmt(value)}</td>'
    return f"<td>{esc(plain(value))}</td>"
