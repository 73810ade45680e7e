"""Report figures drawn with matplotlib's Agg canvas (no display, no pyplot global state).

Each function returns PNG bytes, ready to embed in the HTML report as base64.
"""
from __future__ import annotations

import io

import numpy as np

from .folder import Feature, PlanField

PLAN_CMAP = "viridis"   # perceptually uniform
DPI = 110


def _new_figure(width_in: float, height_in: float):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    fig = Figure(figsize=(width_in, height_in), dpi=DPI, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


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


def _draw_features(ax, buildings, pipes, boreholes):
    for feat in buildings:
        for poly in getattr(feat.geometry, "geoms", [feat.geometry]):
            if poly.geom_type == "Polygon":
                x, y = poly.exterior.xy
                ax.fill(x, y, facecolor="white", edgecolor="black", alpha=0.55, linewidth=1.2)
    for feat in pipes:
        for line in getattr(feat.geometry, "geoms", [feat.geometry]):
            if line.geom_type == "LineString":
                x, y = line.xy
                ax.plot(x, y, color="darkorange", linewidth=2.4)
    for feat in boreholes:
        c = feat.geometry.centroid
        ax.plot([c.x], [c.y], marker="o", markersize=7, markerfacecolor="white",
                markeredgecolor="black")


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
        Receptor geometry drawn over the map.
    length_unit : str
        Axis unit label.
    label : str
        Colour bar label (the unit is appended).
    levels : array_like, optional
        Contour levels; by default 12 levels from 0 (or the minimum) to the maximum.

    Examples
    --------
    >>> f = PlanField("dsz", "plan", 2.0, np.arange(4.0), np.arange(3.0),
    ...               np.arange(12.0).reshape(3, 4), "kPa")
    >>> plan_map(f)[:4] == b"\\x89PNG"
    True
    """
    lo, hi = field.value_range()
    if levels is None:
        lo = min(lo, 0.0)
        levels = np.linspace(lo, hi if hi > lo else lo + 1.0, 13)
    fig = _new_figure(6.4, 5.0)
    ax = fig.add_subplot()
    filled = ax.contourf(field.x, field.y, field.values, levels=levels, cmap=PLAN_CMAP,
                         extend="both")
    lines = ax.contour(field.x, field.y, field.values, levels=levels[1::2], colors="white",
                       linewidths=0.6)
    ax.clabel(lines, fmt="%.3g", fontsize=7)
    _draw_fill_outline(ax, fill)
    _draw_features(ax, buildings, pipes, boreholes)
    ax.set_xlim(field.x[0], field.x[-1])
    ax.set_ylim(field.y[0], field.y[-1])
    ax.set_aspect("equal")
    ax.set_xlabel(f"x, east ({length_unit})")
    ax.set_ylabel(f"y, north ({length_unit})")
    ax.ticklabel_format(useOffset=False, style="plain")
    fig.colorbar(filled, ax=ax, label=f"{label} ({field.units})", shrink=0.85)
    return png_bytes(fig)


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
    fig = _new_figure(4.2, 4.6)
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
    fig = _new_figure(6.4, 3.4)
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


__all__ = ["plan_map", "depth_profile", "chainage_profile", "png_bytes", "Feature"]
