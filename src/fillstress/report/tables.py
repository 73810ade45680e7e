"""HTML tables of the report: cell text, flags, headings with units.

Every text taken from the results folder passes through :func:`esc` (html.escape)
before it reaches the page.
"""
from __future__ import annotations

import html
import json
import math

import numpy as np

from ..io.results import UnitLabels
from .labels import heading, split_unit

#: Receptors per table in the receptor summaries (one column each), so tables fit a page.
RECEPTORS_PER_TABLE = 4


def esc(value) -> str:
    """Text from an input file, escaped for HTML (quotes too).

    Examples
    --------
    >>> esc('<script>alert("x")</script>')
    '&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt;'
    """
    return html.escape(str(value), quote=True)


def is_missing(value) -> bool:
    """None, NaN and the empty string: a value the results folder left blank."""
    if value is None:
        return True
    if isinstance(value, (float, np.floating)):
        return math.isnan(value)
    return isinstance(value, str) and value.strip() == ""


def plain(value) -> str:
    """A cell value as plain (unescaped) text: floats to 4 significant figures, 2
    decimals from 1000 up (coordinates keep their precision), booleans as yes/no,
    lists joined with commas, blanks empty.

    Examples
    --------
    >>> plain(0.012345), plain(512363.0), plain(True), plain([1, 2.5]), plain(None)
    ('0.01235', '512363.00', 'yes', '1, 2.5', '')
    """
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if is_missing(value):
        return ""
    if isinstance(value, (float, np.floating)):
        return f"{value:.2f}" if abs(value) >= 1000 else f"{value:.4g}"
    if isinstance(value, (list, tuple)):
        return ", ".join(plain(v) for v in value)
    if isinstance(value, dict):
        return json.dumps(value, ensure_ascii=False)
    return str(value)


def _fmt(value) -> str:
    """A cell value as escaped HTML text (see :func:`plain`).

    Examples
    --------
    >>> _fmt(0.012345), _fmt(512363.0), _fmt("<x>")
    ('0.01235', '512363.00', '&lt;x&gt;')
    """
    return esc(plain(value))


def is_number(value) -> bool:
    """True for ints and floats, not booleans."""
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(
        value, (bool, np.bool_))


def is_flag_set(value) -> bool:
    """A flag value that marks its receptor: True or a text other than none/no/false/ok.

    Examples
    --------
    >>> [is_flag_set(v) for v in (True, False, "none", "", "structural_damage", float("nan"))]
    [True, False, False, False, True, False]
    """
    if is_missing(value):
        return False
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    return str(value).strip().lower() not in ("0", "false", "no", "none", "ok")


def is_flag_column(name) -> bool:
    """Columns that flag a receptor: "flag…", "exceeds_…", "…limit_reached".

    Examples
    --------
    >>> [is_flag_column(c) for c in ("flag", "exceeds_panel_wall_cracking", "dsz_max_kPa")]
    [True, True, False]
    """
    name = str(name).lower()
    return "flag" in name or name.startswith("exceeds_") or name.endswith("limit_reached")


def _cell(value, flag: bool = False, text: str | None = None) -> str:
    cls = "flag" if flag and is_flag_set(value) else ("num" if is_number(value) else "")
    if flag and text is None and isinstance(value, str):
        text = value.replace("_", " ")            # "structural_damage" reads as words
    body = esc(text) if text is not None else _fmt(value)
    return f'<td class="{cls}">{body}</td>' if cls else f"<td>{body}</td>"


def _head_cells(headings) -> str:
    # <wbr> after underscores and slashes lets long names wrap instead of widening the page.
    return "".join(f"<th>{esc(h).replace('_', '_<wbr>')}</th>" for h in headings)


def html_table(columns, rows, headings=None) -> str:
    """An HTML table; every cell escaped, numbers right-aligned, flagged rows marked.

    A flag column (:func:`is_flag_column`) marks its row when the value is set.
    `headings` replaces the column names in the header row.

    Examples
    --------
    >>> html_table(["id", "flag"], [["<b>", "too steep"]])[:30]
    '<table><thead><tr><th>id</th><'
    >>> "&lt;b&gt;" in html_table(["id"], [["<b>"]])
    True
    """
    columns = list(columns)
    flag_idx = {k for k, c in enumerate(columns) if is_flag_column(c)}
    out = ["<table><thead><tr>", _head_cells(headings or columns), "</tr></thead><tbody>"]
    for row in rows:
        row = list(row)
        flagged = any(is_flag_set(row[k]) for k in flag_idx)
        out.append('<tr class="flagged">' if flagged else "<tr>")
        out.extend(_cell(v, k in flag_idx) for k, v in enumerate(row))
        out.append("</tr>")
    out.append("</tbody></table>")
    return "".join(out)


def frame_table(df, units: UnitLabels | None = None) -> str:
    """A pandas DataFrame as :func:`html_table`, headed by words and units when `units`."""
    heads = [heading(c, units) for c in df.columns] if units is not None else None
    return html_table(df.columns, df.itertuples(index=False, name=None), heads)


def receptor_flagged(row: dict) -> bool:
    """True when any flag column of one summary row is set."""
    return any(is_flag_column(k) and is_flag_set(v) for k, v in row.items())


def _distortion_text(value) -> str | None:
    """Angular distortion also as 1/n, the way limits are usually quoted."""
    if is_number(value) and not is_missing(value) and value > 0:
        return f"{plain(value)} (1/{1 / value:,.0f})"
    return None


def receptor_table(df, units: UnitLabels) -> str:
    """Receptor summaries with one column per receptor and one row per quantity.

    Wide summaries (17 quantities for a building) stay readable and printable this way.
    A receptor with a flag set has its header cell marked ``flagged``; each set flag
    cell is marked ``flag``.

    Examples
    --------
    >>> import pandas as pd
    >>> u = UnitLabels("m", "kPa", "kN/m3", "mm")
    >>> df = pd.DataFrame({"receptor_id": ["a", "b"], "dsz_max_kPa": [1.0, 2.0],
    ...                    "exceeds_no_cracking": [False, True]})
    >>> t = receptor_table(df, u)
    >>> "max Δσz (kPa)" in t, t.count('class="flagged"'), t.count('class="flag"')
    (True, 1, 1)
    """
    records = df.to_dict("records")
    columns = [c for c in df.columns if c != "receptor_id"]
    parts = []
    for start in range(0, len(records), RECEPTORS_PER_TABLE):
        chunk = records[start:start + RECEPTORS_PER_TABLE]
        heads = ["<th>quantity</th>"]
        for rec in chunk:
            rid = esc(rec.get("receptor_id", ""))
            heads.append(f'<th class="flagged">{rid} — limit reached</th>'
                         if receptor_flagged(rec) else f"<th>{rid}</th>")
        out = ['<table class="receptors"><thead><tr>', *heads, "</tr></thead><tbody>"]
        for col in columns:
            flag = is_flag_column(col)
            base, _ = split_unit(col, units)
            out.append(f"<tr><th>{esc(heading(col, units))}</th>")
            for rec in chunk:
                value = rec.get(col)
                text = _distortion_text(value) if base == "angular_distortion" else None
                out.append(_cell(value, flag, text if text else ("–" if is_missing(value)
                                                                 else None)))
            out.append("</tr>")
        out.append("</tbody></table>")
        parts.append("".join(out))
    return "".join(parts)


def key_value_table(pairs) -> str:
    """A two-column table of (item, value) pairs, blank values left out."""
    rows = [(k, v) for k, v in pairs if not is_missing(v)]
    return html_table(["item", "value"], rows)


def json_block(value, level: int = 3, units: UnitLabels | None = None) -> str:
    """Any JSON value as HTML: objects as key/value tables, lists of objects as tables.

    Lists of plain values are shown inline in their row; keys are headed by words and
    units when `units` is given; null values are left out.

    Examples
    --------
    >>> json_block({"a": 1, "b": [{"x": 2}], "c": [1, 2], "d": None}).count("<table>")
    2
    """
    if isinstance(value, dict):
        def flat(v):
            return not isinstance(v, (dict, list)) or (
                isinstance(v, list) and not any(isinstance(e, (dict, list)) for e in v))
        name = (lambda k: heading(k, units)) if units is not None else str
        scalars = [(name(k), v) for k, v in value.items() if flat(v)]
        nested = [(k, v) for k, v in value.items() if not flat(v)]
        parts = [key_value_table(scalars)] if scalars else []
        for k, v in nested:
            parts.append(f"<h{level}>{esc(str(k).replace('_', ' '))}</h{level}>")
            parts.append(json_block(v, min(level + 1, 6), units))
        return "".join(parts)
    if isinstance(value, list):
        if value and all(isinstance(v, dict) for v in value):
            columns = list(dict.fromkeys(k for v in value for k in v))
            heads = [heading(c, units) for c in columns] if units is not None else None
            return html_table(columns, [[v.get(c) for c in columns] for v in value], heads)
        return f"<p>{_fmt(value)}</p>"
    return f"<p>{_fmt(value)}</p>"
