"""The alignment of a long fill: a centreline with stations (chainage along it).

Stations print the way the trade writes them: hundreds of feet on US-customary sites
(``10+00`` is 1,000 ft from the origin of stationing) and thousands of metres on SI sites
(``1+000``). The ``[alignment]`` table gives the centreline directly or takes an
embankment body's; the profile and cross-sections along it are computed by
:mod:`fillstress.run.corridor`.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from shapely.geometry import LineString

from ..errors import InputError

#: Length of one station in the site's length unit: 100 ft (US), 1000 m (SI).
STATION_LENGTH = {"US": 100.0, "SI": 1000.0}


def format_station(value: float, system: str) -> str:
    """A station in the trade's form, from a chainage in the site's length unit.

    Examples
    --------
    >>> format_station(1050.0, "US"), format_station(1234.5, "SI"), format_station(37.25, "US")
    ('10+50', '1+234.5', '0+37.25')
    """
    per = STATION_LENGTH[system]
    sign = "-" if value < 0 else ""
    whole, rest = divmod(round(abs(float(value)), 2), per)
    digits = 2 if per == 100.0 else 3
    units, _, decimals = f"{rest:.2f}".rstrip("0").rstrip(".").partition(".")
    rest_text = units.zfill(digits) + (f".{decimals}" if decimals else "")
    return f"{sign}{int(whole)}+{rest_text}"


@dataclass(frozen=True)
class Alignment:
    """A centreline (internal metres) and what to compute along it (SI lengths)."""

    line: LineString
    start: float = 0.0                      # station (m) of the first vertex
    chainages: tuple = ()                   # stations (m) of the cross-sections
    profile_depths: tuple = ()              # depths (m) of Δσz along the profile
    profile_step: float | None = None       # m between profile points
    section_width: float | None = None      # m, full width of a cross-section
    section_depth: float | None = None      # m, depth of a cross-section panel

    @property
    def end(self) -> float:
        return self.start + self.line.length

    def points(self, stations) -> tuple[np.ndarray, np.ndarray]:
        """Plan points (N, 2) and unit tangents (N, 2) at `stations` (m)."""
        s = np.asarray(stations, float) - self.start
        xy = np.array([self.line.interpolate(v).coords[0] for v in s])
        ahead = np.array([self.line.interpolate(min(v + 0.5, self.line.length)).coords[0]
                          for v in s])
        behind = np.array([self.line.interpolate(max(v - 0.5, 0.0)).coords[0] for v in s])
        tangent = ahead - behind
        return xy, tangent / np.linalg.norm(tangent, axis=1, keepdims=True)


def build_alignment(ctx, raw: dict | None, plan_depths) -> Alignment | None:
    """The site's alignment from its ``[alignment]`` table (None when there is none)."""
    if not raw:
        return None
    where = "alignment"
    if (raw.get("centreline") is None) == (raw.get("body") is None):
        raise InputError("give centreline (or centerline) or body, one of them",
                         file=ctx.cfg.path, key=where)
    if raw.get("body") is not None:
        name = raw["body"]
        if name not in ctx.lines:
            raise InputError(f"{name!r} is not an embankment body (bodies with a "
                             f"centreline: {', '.join(ctx.lines) or 'none'})",
                             file=ctx.cfg.path, key=f"{where}.body")
        line = ctx.lines[name]
    else:
        xy = ctx.xy(raw["centreline"])[:, :2]
        if len(xy) < 2:
            raise InputError("needs at least 2 vertices", file=ctx.cfg.path,
                             key=f"{where}.centreline")
        line = LineString(xy)
    if line.length <= 0:
        raise InputError("has no length", file=ctx.cfg.path, key=f"{where}.centreline")
    start = raw.get("start_chainage") or 0.0
    chainages = tuple(raw.get("chainages") or ())
    outside = [c for c in chainages if not start - 1e-6 <= c <= start + line.length + 1e-6]
    if outside:
        u = ctx.cfg.units
        raise InputError(f"station {format_station(u.length_out(outside[0]), u.name)} is off "
                         f"the centreline ({format_station(u.length_out(start), u.name)} to "
                         f"{format_station(u.length_out(start + line.length), u.name)})",
                         file=ctx.cfg.path, key=f"{where}.chainages")
    depths = tuple(raw.get("profile_depths") or plan_depths or ())
    if any(d <= 0 for d in depths):
        raise InputError("depths must be > 0", file=ctx.cfg.path, key=f"{where}.profile_depths")
    return Alignment(line, start, chainages, depths, raw.get("profile_step"),
                     raw.get("section_width"), raw.get("section_depth"))
