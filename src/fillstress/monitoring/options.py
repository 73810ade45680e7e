"""Command-line options of `fillstress monitor` (kept here so cli.py stays thin)."""
from __future__ import annotations

from pathlib import Path


def add_options(c) -> None:
    c.add_argument("-o", "--out", type=Path, help="results folder (default: monitor-<site>)")
    c.add_argument("--day0", default=None,
                   help="calendar date of the site's day 0, YYYY-MM-DD (needed for dated files)")
    c.add_argument("--construction", type=Path, default=None,
                   help="construction record CSV: stage, date or day, placed (fraction)")
    c.add_argument("--target-degree", type=float, default=0.9,
                   help="degree of consolidation for surcharge removal (default 0.9)")
    c.add_argument("--residual-limit", type=float, default=None,
                   help="residual settlement limit over the design life, site settlement unit")
    c.add_argument("--design-life", type=float, default=50.0,
                   help="design life for the residual limit, years (default 50)")
    c.add_argument("--overwrite", action="store_true",
                   help="replace an existing folder (only once the new one is complete)")
    c.add_argument("--no-report", action="store_true", help="skip report.html")
