"""Field readings and the construction record: CSV files read into SI tables.

Readings, one row per reading::

    instrument,kind,x,y,depth (m),date,settlement (mm),pore pressure (kPa)
    SP-01,plate,452100.0,218300.0,,2026-03-02,0.0,
    PZ-01,piezometer,452100.0,218300.0,7.5,2026-03-02,,128.4

- ``kind``: ``plate`` or ``marker`` (settlement of the ground surface), ``extensometer``
  (settlement of an anchor at ``depth``), ``piezometer`` (pore pressure at ``depth``).
- ``x``, ``y`` in the site CRS units; ``depth`` below the existing ground.
- time as ``date`` (ISO calendar date, YYYY-MM-DD, the site's day 0 given separately) or as
  ``day`` (days after day 0).
- every quantity column states its unit in brackets: length m, mm, cm, ft, in; pressure
  kPa, MPa, psf, psi. Settlement is positive downward, measured from the instrument's
  first (baseline) reading.

Construction record, one row per placement of (part of) a design stage::

    stage,date,placed
    1,2026-03-04,1.0
    2,2026-07-10,0.8

``placed`` is the fraction of that stage's design fill placed then (default 1); a stage
placed in parts has several rows. Every error names the file, the row and the column.
"""
from __future__ import annotations

import csv
import datetime as _dt
import math
import os
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from ..errors import InputError
from ..units import FOOT, PSF_KPA

LENGTH_UNITS = {"m": 1.0, "mm": 1e-3, "cm": 1e-2, "ft": FOOT, "in": FOOT / 12.0}
PRESSURE_UNITS = {"kPa": 1.0, "MPa": 1000.0, "psf": PSF_KPA, "psi": PSF_KPA * 144.0}
KINDS = {"plate": "plate", "marker": "plate", "settlement plate": "plate",
         "extensometer": "extensometer", "piezometer": "piezometer"}
AT_DEPTH = ("extensometer", "piezometer")
_HEADER = re.compile(r"^\s*([A-Za-z_ ]+?)\s*(?:\(([^)]*)\))?\s*$")


@dataclass(frozen=True)
class Readings:
    """Readings in SI: ``table`` columns instrument, kind, x, y (metres, site CRS × factor),
    depth (m, NaN for plates), day, settlement (m), pore_pressure (kPa), row (file line);
    ``dates`` whether the file gave calendar dates; ``path`` the file."""

    table: pd.DataFrame
    dates: bool
    path: Path

    def instruments(self, kind: str) -> list[str]:
        return list(dict.fromkeys(self.table.loc[self.table["kind"] == kind, "instrument"]))


@dataclass(frozen=True)
class Placement:
    """`fraction` of the design load of stage `stage` placed on `day` (days after day 0),
    rising linearly over `duration_days` (0: at once)."""

    stage: int
    day: float
    fraction: float = 1.0
    duration_days: float = 0.0


class _Rows:
    """A CSV read with its header parsed into name → (column, unit); errors name the cell."""

    def __init__(self, path, required: tuple[str, ...]):
        self.path = Path(os.fspath(path))
        if not self.path.is_file():
            raise InputError("file not found", file=self.path)
        with open(self.path, newline="", encoding="utf-8-sig") as fh:
            numbered = [(n, row) for n, row in enumerate(csv.reader(fh), start=1)
                        if any(cell.strip() for cell in row)
                        and not row[0].lstrip().startswith("#")]   # blank and comment rows
        lines = [row for _, row in numbered]
        if not lines:
            raise InputError("is empty; needs a header row", file=self.path)
        self.columns = {}
        for i, head in enumerate(lines[0]):
            m = _HEADER.match(head)
            if not m:
                raise InputError(f"cannot read header {head!r} (expected a name with an "
                                 "optional unit in brackets, e.g. 'settlement (mm)')",
                                 file=self.path, key="row 1")
            name = m.group(1).strip().lower().replace("_", " ")
            if name in self.columns:
                raise InputError(f"column {name!r} appears twice", file=self.path, key="row 1")
            self.columns[name] = (i, head.strip(), (m.group(2) or "").strip())
        for name in required:
            if name not in self.columns:
                raise InputError(f"missing column {name!r}; columns are "
                                 f"{[c[1] for c in self.columns.values()]}",
                                 file=self.path, key="row 1")
        self.rows = lines[1:]
        self.line_numbers = [n for n, _ in numbered[1:]]     # as the user's editor counts
        if not self.rows:
            raise InputError("has a header but no rows", file=self.path)

    def error(self, r: int, name: str, reason: str) -> InputError:
        head = self.columns[name][1] if name in self.columns else name
        return InputError(reason, file=self.path, key=f"row {self.line_numbers[r]}, column {head}")

    def text(self, r: int, name: str) -> str:
        if name not in self.columns:
            return ""
        i = self.columns[name][0]
        row = self.rows[r]
        return row[i].strip() if i < len(row) else ""

    def number(self, r: int, name: str, factor: float = 1.0, required: bool = True) -> float:
        raw = self.text(r, name)
        if not raw:
            if required:
                raise self.error(r, name, "is empty; a number is needed")
            return math.nan
        try:
            v = float(raw)
        except ValueError:
            raise self.error(r, name, f"must be a number, got {raw!r}") from None
        if not math.isfinite(v):
            raise self.error(r, name, f"must be finite, got {raw!r}")
        return v * factor

    def unit(self, name: str, table: dict, what: str) -> float:
        if name not in self.columns:
            return 1.0
        _, head, unit = self.columns[name]
        if unit not in table:
            raise InputError(f"column {head!r} needs a {what} unit in brackets, one of "
                             f"{', '.join(table)}", file=self.path, key="row 1")
        return table[unit]

    def day(self, r: int, day0: _dt.date | None) -> float:
        """Days after day 0 from the ``day`` or ``date`` column."""
        if "day" in self.columns:
            return self.number(r, "day")
        raw = self.text(r, "date")
        try:
            when = _dt.datetime.fromisoformat(raw)
        except ValueError:
            raise self.error(r, "date", f"must be an ISO date YYYY-MM-DD (optionally with a "
                             f"time), got {raw!r}") from None
        return (when - _dt.datetime.combine(day0, _dt.time())).total_seconds() / 86400.0

    def time_columns(self, day0) -> bool:
        has_day, has_date = "day" in self.columns, "date" in self.columns
        if has_day == has_date:
            raise InputError("needs exactly one time column, 'date' (calendar dates) or "
                             "'day' (days after the site's day 0)", file=self.path, key="row 1")
        if has_date and day0 is None:
            raise InputError("gives calendar dates: state the site's day 0 (--day0 YYYY-MM-DD)",
                             file=self.path, key="row 1")
        return has_date


def parse_day0(value) -> _dt.date | None:
    """The site's day 0 from an ISO date string (or a date); None passes through.

    Examples
    --------
    >>> parse_day0("2026-03-02")
    datetime.date(2026, 3, 2)
    """
    if value is None or isinstance(value, _dt.date):
        return value
    try:
        return _dt.date.fromisoformat(str(value).strip())
    except ValueError:
        raise InputError(f"must be an ISO date YYYY-MM-DD, got {value!r}",
                         argument="day0") from None


def read_readings(path, day0=None, metres_per_unit: float = 1.0) -> Readings:
    """Read a readings CSV (see the module docstring) into SI.

    Parameters
    ----------
    path : path-like
    day0 : str or datetime.date, optional
        The site's day 0; required when the file gives calendar dates.
    metres_per_unit : float
        Site CRS unit → metres for x and y.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "r.csv"
    >>> _ = f.write_text("instrument,kind,x,y,depth (m),date,settlement (mm)\\n"
    ...                  "SP-1,plate,10,20,,2026-03-02,0\\nSP-1,plate,10,20,,2026-03-12,14.5\\n")
    >>> r = read_readings(f, day0="2026-03-01")
    >>> r.table[["instrument", "day", "settlement"]].values.tolist()
    [['SP-1', 1.0, 0.0], ['SP-1', 11.0, 0.0145]]
    """
    rows = _Rows(path, ("instrument", "kind", "x", "y"))
    day0 = parse_day0(day0)
    dates = rows.time_columns(day0)
    s_factor = rows.unit("settlement", LENGTH_UNITS, "length")
    u_factor = rows.unit("pore pressure", PRESSURE_UNITS, "pressure")
    z_factor = rows.unit("depth", LENGTH_UNITS, "length")
    if "settlement" not in rows.columns and "pore pressure" not in rows.columns:
        raise InputError("needs a 'settlement (unit)' or a 'pore pressure (unit)' column",
                         file=rows.path, key="row 1")
    records = [_reading(rows, r, day0, metres_per_unit, s_factor, u_factor, z_factor)
               for r in range(len(rows.rows))]
    table = pd.DataFrame.from_records(records)
    _check_instruments(rows, table)
    table = table.sort_values(["instrument", "day"], kind="stable").reset_index(drop=True)
    return Readings(table, dates, rows.path)


def _reading(rows, r, day0, k, s_factor, u_factor, z_factor) -> dict:
    name = rows.text(r, "instrument")
    if not name:
        raise rows.error(r, "instrument", "is empty; every reading names its instrument")
    raw_kind = rows.text(r, "kind").lower().replace("_", " ")
    if raw_kind not in KINDS:
        raise rows.error(r, "kind", f"must be one of plate, marker, extensometer, piezometer; "
                         f"got {rows.text(r, 'kind')!r}")
    kind = KINDS[raw_kind]
    depth = rows.number(r, "depth", z_factor, required=kind in AT_DEPTH)
    if kind in AT_DEPTH and depth < 0:
        raise rows.error(r, "depth", f"must be >= 0 below the ground, got {rows.text(r, 'depth')}")
    value_column = "pore pressure" if kind == "piezometer" else "settlement"
    if value_column not in rows.columns:
        raise rows.error(r, value_column, f"a {kind} reading needs a '{value_column} (unit)' column")
    value = rows.number(r, value_column, u_factor if kind == "piezometer" else s_factor)
    return {"instrument": name, "kind": kind, "x": rows.number(r, "x", k),
            "y": rows.number(r, "y", k), "depth": depth, "day": rows.day(r, day0),
            "settlement": math.nan if kind == "piezometer" else value,
            "pore_pressure": value if kind == "piezometer" else math.nan,
            "row": rows.line_numbers[r]}


def _check_instruments(rows: _Rows, table: pd.DataFrame) -> None:
    """One kind and one position per instrument; one reading per instrument and time."""
    for name, g in table.groupby("instrument", sort=False):
        first = g.iloc[0]
        for col in ("kind", "x", "y", "depth"):
            a, b = g[col].to_numpy(), first[col]
            same = (a == b) | (pd.isna(a) & pd.isna(b)) if col != "kind" else a == b
            if col in ("x", "y", "depth") and not pd.isna(b):
                same = np.isclose(a.astype(float), float(b), rtol=0, atol=1e-6) | same
            if not np.all(same):
                bad = g.iloc[int(np.argmin(same))]
                raise InputError(f"instrument {name!r} has {col} {bad[col]!r} here but "
                                 f"{first[col]!r} at row {first['row']}; one instrument has "
                                 "one kind and position", file=rows.path,
                                 key=f"row {bad['row']}, column {rows.columns.get(col, (0, col))[1]}")
        dup = g["day"].duplicated()
        if dup.any():
            bad = g[dup].iloc[0]
            raise InputError(f"instrument {name!r} has two readings at day {bad['day']:g}",
                             file=rows.path, key=f"row {bad['row']}, column "
                             f"{'date' if 'date' in rows.columns else 'day'}")


def read_construction(path, day0=None, stages=None) -> list[Placement]:
    """Read a construction record CSV (stage, date or day, placed) into placements by day.

    `stages` (the site's stage numbers) are checked when given.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "c.csv"
    >>> _ = f.write_text("stage,day,placed\\n1,0,1\\n2,130,0.5\\n2,150,0.5\\n")
    >>> [(p.stage, p.day, p.fraction) for p in read_construction(f, stages=[1, 2])]
    [(1, 0.0, 1.0), (2, 130.0, 0.5), (2, 150.0, 0.5)]
    """
    rows = _Rows(path, ("stage",))
    day0 = parse_day0(day0)
    rows.time_columns(day0)
    out = []
    for r in range(len(rows.rows)):
        stage = rows.number(r, "stage")
        if stage != int(stage) or (stages is not None and int(stage) not in stages):
            raise rows.error(r, "stage", f"must be one of the site's stages {list(stages or [])}, "
                             f"got {rows.text(r, 'stage')}")
        fraction = rows.number(r, "placed", required=False)
        fraction = 1.0 if math.isnan(fraction) else fraction
        if not 0 < fraction <= 2:
            raise rows.error(r, "placed", f"must be a fraction of the stage's design fill, "
                             f"0 < placed <= 2, got {fraction:g}")
        out.append(Placement(int(stage), rows.day(r, day0), fraction))
    return sorted(out, key=lambda p: p.day)
