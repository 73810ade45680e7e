"""Report figures drawn with matplotlib's Agg canvas (no display, no pyplot global state).

Each function returns PNG bytes, ready to embed in the HTML report as base64.
"""
from __future__ import annotations

import dataclasses
import io

import numpy as np

from ..io.results import Feature, PlanField

# matplotlib is imported inside the functions that use it: it is slow to load and
# most commands never need it.

PLAN_CMAP = "viridis"   # perceptually uniform
DPI = 110
# A plan map is some 550 pixels wide: a grid of more nodes than twice that shows nothing
# more, while contouring and building its paths grow with the nodes (seconds on a
# corridor). Larger grids are drawn from every k-th node, and the map says so.
DISPLAY_NODES = 1200


#: Margins (left, right, bottom, top; inches) of a chart of one axes: room for a tick
#: label of six characters, the axis label and a title. Drawn with margins fixed, a chart
#: takes some 40 % less time than with the constrained layout, which draws the figure
#: once more to measure its labels; maps (a colour bar, a legend below) keep that layout.
CHART = (0.85, 0.2, 0.55, 0.3)
TWIN_CHART = (0.85, 0.85, 0.55, 0.3)     # a second value axis on the right


def _new_figure(width_in: float, height_in: float, margins=None):
    """A figure on the Agg canvas: laid out by matplotlib's constrained layout, or with
    `margins` (left, right, bottom, top; inches) fixed."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    fig = Figure(figsize=(width_in, height_in), dpi=DPI,
                 layout=None if margins else "constrained")
    FigureCanvasAgg(fig)
    if margins:
        left, right, bottom, top = margins
        fig.subplots_adjust(left=left / width_in, right=1 - right / width_in,
                            bottom=bottom / height_in, top=1 - top / height_in)
    return fig


def plain_log_ticks(axis) -> None:
    """Decades of a log axis written as plain numbers (0.1, 1, 10, 1000), the minor ticks
    unlabelled: what a reader of days or sample counts expects, and quicker to draw than
    the powers of ten typeset by matplotlib's mathtext."""
    from matplotlib.ticker import FuncFormatter, NullFormatter
    axis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
    axis.set_minor_formatter(NullFormatter())


def png_bytes(fig) -> bytes:
    """Render a matplotlib Figure to PNG bytes.

    Examples
    --------
    >>> fig = _new_figure(2, 1)
    >>> png_bytes(fig)[:8] == b"\\x89PNG\\r\\n\\x1a\\n"
    True
    """
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI)
    return buf.getvalue()


def _draw_fill_outline(ax, fill: PlanField | None):
    """Outline of the loaded area: the contour where |thickness| leaves zero."""
    if fill is None:
        return
    t = np.abs(np.where(np.isfinite(fill.values), fill.values, 0.0))
    if t.max() <= 0 or min(t.shape) < 2:
        return
    ax.contour(fill.x, fill.y, t, levels=[1e-3 * t.max()], colors="black",
               linestyles="dashed", linewidths=1.2)


def _label(ax, x, y, text):
    """A receptor id beside its symbol, on a white box so it reads over any colour."""
    ax.annotate(str(text), (x, y), xytext=(4, 4), textcoords="offset points", fontsize=7,
                bbox=dict(boxstyle="round,pad=0.15", facecolor="white", alpha=0.8,
                          edgecolor="none"))


def _draw_features(ax, buildings, pipes, boreholes):
    for feat in buildings:
        for poly in getattr(feat.geometry, "geoms", [feat.geometry]):
            if poly.geom_type == "Polygon":
                x, y = poly.exterior.xy
                ax.fill(x, y, facecolor="white", edgecolor="black", alpha=0.55, linewidth=1.2)
        x0, _, _, y1 = feat.geometry.bounds      # top-left corner: a borehole in the middle
        _label(ax, x0, y1, feat.receptor_id)      # of a building keeps its own label clear
    for feat in pipes:
        for line in getattr(feat.geometry, "geoms", [feat.geometry]):
            if line.geom_type == "LineString":
                x, y = line.xy
                ax.plot(x, y, color="darkorange", linewidth=2.4)
        end = feat.geometry.interpolate(0.15, normalized=True)
        _label(ax, end.x, end.y, feat.receptor_id)
    for feat in boreholes:
        c = feat.geometry.centroid
        ax.plot([c.x], [c.y], marker="o", markersize=7, markerfacecolor="white",
                markeredgecolor="black")
        _label(ax, c.x, c.y, feat.receptor_id)


def nice_levels(lo: float, hi: float, n: int = 12) -> np.ndarray:
    """Contour levels at round numbers covering [lo, hi] (from 0 when lo ≥ 0).

    Examples
    --------
    >>> nice_levels(0.2, 2997.0).tolist()
    [0.0, 250.0, 500.0, 750.0, 1000.0, 1250.0, 1500.0, 1750.0, 2000.0, 2250.0, 2500.0, 2750.0, 3000.0]
    """
    from matplotlib.ticker import MaxNLocator
    lo = min(lo, 0.0)
    hi = hi if hi > lo else lo + 1.0
    return MaxNLocator(nbins=n, steps=[1, 2, 2.5, 5, 10]).tick_values(lo, hi)


def _level_text(value: float) -> str:
    return f"{value:,.0f}" if abs(value) >= 100 else f"{value:g}"


def _figure_size(field: PlanField, width_in: float = 7.2) -> tuple[float, float]:
    """Figure size that follows the plan's aspect ratio (colour bar on the right)."""
    dx, dy = np.ptp(field.x), np.ptp(field.y)
    aspect = dy / dx if dx > 0 and dy > 0 else 0.75
    return width_in, float(np.clip((width_in - 2.3) * aspect + 0.9, 3.0, 9.0))


def plan_map(field: PlanField, *, fill: PlanField | None = None, buildings=(), pipes=(),
             boreholes=(), length_unit: str = "m", label: str = r"$\Delta\sigma_z$",
             levels=None) -> bytes:
    """Filled contour map of a plan field with the fill outline and receptors drawn over it.

    Parameters
    ----------
    field : PlanField
        The values to contour (e.g. Δσz at one depth).
    fill : PlanField, optional
        Fill thickness; its outline is drawn dashed.
    buildings, pipes, boreholes : sequences of Feature
        Receptor geometry drawn over the map, each labelled with its id.
    length_unit : str
        Unit of the plan coordinates (the CRS's axis unit), shown on both axes.
    label : str
        Colour bar label (the unit is appended).
    levels : array_like, optional
        Contour levels; by default round numbers from 0 (or the minimum) to the maximum
        (:func:`nice_levels`). Pass the same levels to maps that are to be compared.

    Examples
    --------
    >>> f = PlanField("dsz", "plan", 2.0, np.arange(4.0), np.arange(3.0),
    ...               np.arange(12.0).reshape(3, 4), "kPa")
    >>> plan_map(f)[:4] == b"\\x89PNG"
    True
    """
    return plan_maps([field], fill=fill, buildings=buildings, pipes=pipes,
                     boreholes=boreholes, length_unit=length_unit, label=label,
                     levels=levels)[0]


def plan_maps(fields, *, levels=None, **common) -> list[bytes]:
    """:func:`plan_map` of each field, sharing one layout when they share the levels.

    Maps of one plan grid have the same extent, receptors, colour bar and ticks, so the
    constrained layout solved for the first (the slow part of drawing a map: it draws the
    figure once more to measure it) places the others exactly as it would place them.
    `levels` (default: :func:`nice_levels` of all the fields) and the keywords of
    :func:`plan_map` apply to every map.

    Examples
    --------
    >>> f = PlanField("dsz", "plan", 2.0, np.arange(4.0), np.arange(3.0),
    ...               np.arange(12.0).reshape(3, 4), "kPa")
    >>> [png[:4] for png in plan_maps([f, f])] == [b"\\x89PNG"] * 2
    True
    """
    if levels is None:
        ranges = np.array([f.value_range() for f in fields], float)
        levels = nice_levels(ranges[:, 0].min(), ranges[:, 1].max())
    levels = np.asarray(levels, float)
    out, positions = [], None
    for field in fields:
        fig, axes = _plan_figure(field, levels, positions, **common)
        out.append(png_bytes(fig))
        positions = positions or [a.get_position(original=True) for a in axes]  # the first
    return out


def display_field(field: PlanField, most: int | None = None) -> tuple[PlanField, int]:
    """`field` thinned for display to every k-th node along x and y (the last row and
    column kept, so the extent stays), k the least step leaving at most `most` (+1;
    default :data:`DISPLAY_NODES`) nodes each way; `field` itself and k = 1 when it is
    small enough.

    Examples
    --------
    >>> f = PlanField("dsz", "plan", 2.0, np.arange(7.0), np.arange(2.0),
    ...               np.arange(14.0).reshape(2, 7), "kPa")
    >>> shown, k = display_field(f, most=3)
    >>> k, shown.x.tolist(), shown.values.tolist()
    (3, [0.0, 3.0, 6.0], [[0.0, 3.0, 6.0], [7.0, 10.0, 13.0]])
    """
    k = max(1, -(-max(field.values.shape) // (most or DISPLAY_NODES)))
    if k == 1:
        return field, 1
    rows, cols = (np.unique(np.r_[np.arange(0, n, k), n - 1]) for n in field.values.shape)
    return dataclasses.replace(field, x=field.x[cols], y=field.y[rows],
                               values=field.values[np.ix_(rows, cols)]), k


def _plan_figure(field: PlanField, levels, positions=None, *, fill=None, buildings=(),
                 pipes=(), boreholes=(), length_unit="m", label=r"$\Delta\sigma_z$"):
    """The map's figure and its (map, colour bar) axes; with `positions` (from a map of
    the same layout) the axes are placed there instead of by the constrained layout."""
    from matplotlib.ticker import FuncFormatter, MaxNLocator
    fig = _new_figure(*_figure_size(field))
    if positions is not None:
        fig.set_layout_engine("none")
    field, step = display_field(field)
    if fill is not None:
        fill, fill_step = display_field(fill)
        step = max(step, fill_step)
    if step > 1:
        fig.text(0.995, 0.005, f"drawn from 1 node in {step} along x and y (display only; "
                 "the files hold every node)", ha="right", va="bottom", fontsize=6,
                 color="dimgray")
    ax = fig.add_subplot()
    filled = ax.contourf(field.x, field.y, field.values, levels=levels, cmap=PLAN_CMAP,
                         extend="both")
    lines = ax.contour(field.x, field.y, field.values, levels=levels[1::2], colors="white",
                       linewidths=0.7)
    texts = ax.clabel(lines, fmt=_level_text, fontsize=8, inline=True, inline_spacing=6)
    for t in texts:      # dark text on a light box: readable over every colour of the map
        t.set_color("black")
        t.set_bbox(dict(boxstyle="round,pad=0.1", facecolor="white", alpha=0.75,
                        edgecolor="none"))
    _draw_fill_outline(ax, fill)
    _draw_features(ax, buildings, pipes, boreholes)
    ax.set_xlim(field.x[0], field.x[-1])
    ax.set_ylim(field.y[0], field.y[-1])
    ax.set_aspect("equal")
    ax.set_xlabel(f"x, east ({length_unit})")
    ax.set_ylabel(f"y, north ({length_unit})")
    plain = FuncFormatter(lambda v, _: f"{v:.0f}" if abs(v) >= 100 else f"{v:g}")
    for axis in (ax.xaxis, ax.yaxis):
        axis.set_major_locator(MaxNLocator(nbins=5))
        axis.set_major_formatter(plain)
    bar = fig.colorbar(filled, ax=ax, label=f"{label} ({field.units})", shrink=0.9,
                       ticks=levels)
    bar.ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _: _level_text(v)))
    axes = (ax, bar.ax)
    for a, pos in zip(axes, positions or ()):
        a.set_position(pos)
    return fig, axes


def depth_profile(depth, series: dict, *, length_unit: str, value_label: str,
                  title: str = "") -> bytes:
    """Values against depth (depth increasing downward), one line per series.

    Examples
    --------
    >>> depth_profile([1, 2, 4], {"dsz": [30, 20, 9]}, length_unit="m",
    ...               value_label="kPa")[:4] == b"\\x89PNG"
    True
    """
    depth = np.asarray(depth, float)
    order = np.argsort(depth)
    fig = _new_figure(4.2, 4.6, CHART)
    ax = fig.add_subplot()
    for (name, values), marker in zip(series.items(), "osd^v"):
        ax.plot(np.asarray(values, float)[order], depth[order], marker=marker, label=name)
    ax.invert_yaxis()
    ax.set_xlabel(value_label)
    ax.set_ylabel(f"depth below existing ground ({length_unit})")
    ax.grid(True, linewidth=0.4, alpha=0.6)
    ax.set_xlim(left=min(0.0, ax.get_xlim()[0]))
    ax.legend(fontsize=8)
    if title:
        ax.set_title(title, fontsize=9)
    return png_bytes(fig)


def chainage_profile(chainage, values, *, length_unit: str, value_label: str,
                     second=None, second_label: str = "", title: str = "") -> bytes:
    """Values along a pipe's chainage, with an optional second quantity on a right axis.

    Examples
    --------
    >>> chainage_profile([0, 5, 10], [3, 8, 2], length_unit="m",
    ...                  value_label="kPa")[:4] == b"\\x89PNG"
    True
    """
    chainage = np.asarray(chainage, float)
    order = np.argsort(chainage)
    fig = _new_figure(6.4, 3.4, TWIN_CHART if second is not None else CHART)
    ax = fig.add_subplot()
    ax.plot(chainage[order], np.asarray(values, float)[order], color="tab:blue", marker=".")
    ax.set_xlabel(f"chainage ({length_unit})")
    ax.set_ylabel(value_label, color="tab:blue")
    ax.grid(True, linewidth=0.4, alpha=0.6)
    if second is not None:
        ax2 = ax.twinx()
        ax2.plot(chainage[order], np.asarray(second, float)[order], color="tab:red",
                 linestyle="--")
        ax2.set_ylabel(second_label, color="tab:red")
    if title:
        ax.set_title(title, fontsize=9)
    return png_bytes(fig)


def settlement_time(days, settlement, *, settlement_unit: str, title: str = "",
                    stage_days=()) -> bytes:
    """Settlement against time since the first stage (log time axis, settlement down).

    Time 0 cannot sit on a log axis: the curve starts at its first positive time.
    The final value is written at the end of the curve.

    Examples
    --------
    >>> settlement_time([0, 1, 10, 100], [0, 5, 20, 31], settlement_unit="mm")[:4] == b"\\x89PNG"
    True
    """
    days = np.asarray(days, float)
    values = np.asarray(settlement, float)
    order = np.argsort(days)
    days, values = days[order], values[order]
    keep = (days > 0) & np.isfinite(values)
    fig = _new_figure(6.4, 3.4, CHART)
    ax = fig.add_subplot()
    ax.plot(days[keep], values[keep], color="tab:blue")
    for d in stage_days:
        if d > 0:
            ax.axvline(d, color="gray", linestyle=":", linewidth=1)
    if keep.any():
        ax.set_xscale("log")
        plain_log_ticks(ax.xaxis)
        ax.annotate(f"{values[keep][-1]:.3g} {settlement_unit}",
                    (days[keep][-1], values[keep][-1]), xytext=(-4, 6),
                    textcoords="offset points", ha="right", fontsize=8)
    ax.set_ylim(bottom=0.0)
    ax.invert_yaxis()                     # settlement plotted downward
    ax.set_xlabel("time since the first stage was placed (days, log scale)")
    ax.set_ylabel(f"settlement ({settlement_unit})")
    ax.grid(True, which="both", linewidth=0.4, alpha=0.5)
    if title:
        ax.set_title(title, fontsize=9)
    return png_bytes(fig)


__all__ = ["plan_map", "plan_maps", "depth_profile", "chainage_profile", "settlement_time", "nice_levels",
           "png_bytes", "Feature"]
