"""Plan sheets along an alignment: the long thin fill shown in frames that follow the
centreline, each rotated so its stretch of the alignment runs left to right, instead of
one map of the bounding box where a corridor is a hair-thin ribbon."""
from __future__ import annotations

import math

import numpy as np
import shapely
from shapely.geometry import LineString

from ..io.results import PlanField, ResultsFolder
from ..site.alignment import format_station
from .figures import PLAN_CMAP, _new_figure, nice_levels, png_bytes

SHEET_ASPECT = 3.0     # sheet length : sheet width
MAX_SHEETS = 8         # a longer corridor gets longer sheets, not more of them
_MARGIN = 1.25         # the frame's half-width over the farthest fill or receptor


def _frame_field(folder: ResultsFolder) -> tuple[PlanField, str] | None:
    """The shallowest Δσz slice when the run has plan grids, else the fill thickness."""
    slices = folder.plan_slices("dsz")
    if slices:
        s = min(slices, key=lambda f: f.depth)
        return s, f"Δσz ({s.units}) at {s.depth:g} {folder.units.length}"
    fill = folder.fill_thickness()
    return (fill, f"fill thickness ({fill.units})") if fill is not None else None


def _half_width(line: LineString, field: PlanField, receptors) -> float:
    """Largest distance from the centreline of a loaded cell or a receptor, with a margin."""
    gx, gy = np.meshgrid(field.x, field.y)
    loaded = np.isfinite(field.values) & (field.values != 0)
    xs, ys = gx[loaded], gy[loaded]
    step = max(1, xs.size // 20_000)                   # a sample is enough for a frame
    far = shapely.distance(line, shapely.points(xs[::step], ys[::step]))
    far = [float(far.max())] if far.size else []
    far += [line.distance(f.geometry) for f in receptors]
    return _MARGIN * max(far + [1.0])


def sheet_ranges(length: float, half_width: float) -> list[tuple[float, float]]:
    """(from, to) chainages of the sheets over an alignment `length` long.

    >>> sheet_ranges(1000.0, 50.0)                   # 300 long sheets: 4 of 250
    [(0.0, 250.0), (250.0, 500.0), (500.0, 750.0), (750.0, 1000.0)]
    >>> sheet_ranges(200.0, 50.0)                    # shorter than one sheet: no sheets
    []
    """
    n = math.ceil(length / (SHEET_ASPECT * 2.0 * half_width) - 1e-9)
    if n < 2:
        return []
    n = min(n, MAX_SHEETS)
    edges = np.linspace(0.0, length, n + 1)
    return [(float(a), float(b)) for a, b in zip(edges[:-1], edges[1:])]


def _rotate(x, y, origin, angle):
    """Plan coordinates into the sheet's frame: along the chord, and to its left."""
    c, s = math.cos(angle), math.sin(angle)
    dx, dy = np.asarray(x, float) - origin[0], np.asarray(y, float) - origin[1]
    return dx * c + dy * s, -dx * s + dy * c


def sheet_figure(folder: ResultsFolder, line: LineString, station_at, a: float, b: float,
                 half_width: float, field: PlanField, label: str, system: str) -> bytes:
    """One sheet from chainage `a` to `b` of `line` (plan units); `station_at(chainage)`
    gives the station there."""
    pa, pb = line.interpolate(a), line.interpolate(b)
    angle = math.atan2(pb.y - pa.y, pb.x - pa.x)
    origin, chord = (pa.x, pa.y), math.hypot(pb.x - pa.x, pb.y - pa.y)
    fig = _new_figure(7.2, max(2.6, 6.6 * 2 * half_width / max(chord, 1e-9) + 1.9))
    ax = fig.add_subplot()
    gx, gy = np.meshgrid(field.x, field.y)
    u, v = _rotate(gx, gy, origin, angle)
    inside = (u > -half_width) & (u < chord + half_width) & (np.abs(v) < 2 * half_width)
    rows, cols = np.flatnonzero(inside.any(axis=1)), np.flatnonzero(inside.any(axis=0))
    if rows.size and cols.size:
        win = np.s_[rows[0]:rows[-1] + 1, cols[0]:cols[-1] + 1]
        values = np.ma.masked_invalid(np.where(field.values[win] == 0, np.nan, field.values[win]))
        lo, hi = field.value_range()
        mesh = ax.pcolormesh(u[win], v[win], values, shading="nearest", cmap=PLAN_CMAP,
                             vmin=min(lo, 0.0), vmax=nice_levels(lo, hi)[-1])
        fig.colorbar(mesh, ax=ax, label=label, orientation="horizontal", fraction=0.08,
                     pad=0.2, aspect=40)
    _draw_centreline(ax, line, station_at, a, b, origin, angle, system)
    _draw_receptors(ax, folder, origin, angle)
    _north_arrow(ax, angle, chord, half_width)
    ax.set_xlim(0.0, chord)
    ax.set_ylim(-half_width, half_width)
    ax.set_aspect("equal")
    ax.set_xlabel(f"along the sheet ({folder.units.plan})")
    ax.set_ylabel(f"offset ({folder.units.plan})")
    return png_bytes(fig)


def _draw_centreline(ax, line, station_at, a, b, origin, angle, system) -> None:
    chain = np.linspace(a, b, 200)
    pts = shapely.line_interpolate_point(line, chain)
    u, v = _rotate(shapely.get_x(pts), shapely.get_y(pts), origin, angle)
    ax.plot(u, v, color="black", lw=0.8, ls="--")
    st = station_at(chain)
    step = _round_step((st[-1] - st[0]) / 5)
    for target in np.arange(math.ceil(st[0] / step) * step, st[-1] + 1e-9, step):
        k = int(np.argmin(np.abs(st - target)))
        ax.plot([u[k]], [v[k]], marker="|", color="black", markersize=8)
        ax.annotate(format_station(float(target), system), (u[k], v[k]), fontsize=6,
                    xytext=(0, 5), textcoords="offset points", ha="center")


def _round_step(span: float) -> float:
    """A round station interval near `span`: 1, 2, 5 × a power of ten."""
    power = 10.0 ** math.floor(math.log10(max(span, 1e-9)))
    return next(m * power for m in (1, 2, 5, 10) if m * power >= span)


def _draw_receptors(ax, folder, origin, angle) -> None:
    for feat in folder.features("buildings"):
        for poly in getattr(feat.geometry, "geoms", [feat.geometry]):
            u, v = _rotate(*poly.exterior.xy, origin, angle)
            ax.fill(u, v, facecolor="white", edgecolor="black", alpha=0.7, lw=0.8)
    for feat in folder.features("pipes"):
        for part in getattr(feat.geometry, "geoms", [feat.geometry]):
            ax.plot(*_rotate(*part.xy, origin, angle), color="darkorange", lw=1.6)
    for feat in folder.features("boreholes"):
        c = feat.geometry.centroid
        ax.plot(*_rotate([c.x], [c.y], origin, angle), marker="o", markersize=4,
                markerfacecolor="white", markeredgecolor="black")


def _north_arrow(ax, angle, chord, half_width) -> None:
    """Grid north in the rotated frame, at the sheet's top-left."""
    size = 0.5 * half_width
    nu, nv = math.sin(angle) * size, math.cos(angle) * size    # (0, 1) rotated by −angle
    x0, y0 = 0.06 * chord, 0.45 * half_width
    ax.annotate("N", xy=(x0 + nu, y0 + nv), xytext=(x0, y0), fontsize=7, ha="center",
                arrowprops=dict(arrowstyle="->", lw=0.8))


def plan_sheets(folder: ResultsFolder, profile) -> list[tuple[bytes, str]]:
    """(png, caption) of each sheet along the alignment of `profile` (the rows of
    alignment_profile.csv); none when the alignment fits one ordinary plan view."""
    u = folder.units
    found = _frame_field(folder)
    xs, ys = profile.get(f"x_{u.plan_suffix}"), profile.get(f"y_{u.plan_suffix}")
    if found is None or xs is None or ys is None or len(profile) < 2:
        return []
    xs, ys = xs.to_numpy(float), ys.to_numpy(float)
    field, label = found
    line = LineString(np.column_stack([xs, ys]))
    receptors = [f for k in ("buildings", "pipes", "boreholes") for f in folder.features(k)]
    half = _half_width(line, field, receptors)
    # stations (length unit) at the profile's points, by their distance along the line
    stations = profile[u.suffixed("station", "length")].to_numpy(float)
    along = np.r_[0.0, np.cumsum(np.hypot(np.diff(xs), np.diff(ys)))]

    def station_at(chainage):
        return np.interp(chainage, along, stations)
    out = []
    ranges = sheet_ranges(line.length, half)
    for k, (a, b) in enumerate(ranges, start=1):
        png = sheet_figure(folder, line, station_at, a, b, half, field, label, u.system.name)
        sa, sb = station_at(a), station_at(b)
        out.append((png, f"Plan sheet {k} of {len(ranges)} along the alignment, stations "
                         f"{format_station(float(sa), u.system.name)} to "
                         f"{format_station(float(sb), u.system.name)}: {label}, the centreline "
                         "dashed with its stations, buildings, pipes (orange) and boreholes; "
                         "the arrow points to grid north."))
    return out
