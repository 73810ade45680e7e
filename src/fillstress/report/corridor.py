"""Report section "Along the alignment": the longitudinal profile, the cross-sections and
the pipes' largest differential settlement and gradient, from the alignment tables of a
results folder (written by :mod:`fillstress.run.corridor`)."""
from __future__ import annotations

import re

import numpy as np

from ..io.results import ResultsFolder
from ..site.alignment import format_station
from .figures import _new_figure, nice_levels, png_bytes
from .sheets import plan_sheets


def _station_axis(ax, system: str, unit: str) -> None:
    """Round stations on the axis, written the trade's way (10+00, 1+000)."""
    from matplotlib.ticker import FuncFormatter, MaxNLocator
    ax.xaxis.set_major_locator(MaxNLocator(nbins=8, steps=[1, 2, 2.5, 5, 10]))
    ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: format_station(v, system)))
    ax.tick_params(axis="x", labelsize=7)
    ax.set_xlabel(f"station ({unit})")


def _columns(df, pattern: str) -> list[tuple[str, str]]:
    """(column, what it says) for columns matching `pattern` with one group."""
    out = []
    for c in df.columns:
        m = re.fullmatch(pattern, c)
        if m:
            out.append((c, m.group(1)))
    return out


def profile_figure(df, u) -> bytes:
    """Fill over the ground, Δσz at the profile depths and settlement over time along the
    stations (three panels sharing the station axis)."""
    s = df[u.suffixed("station", "length")].to_numpy()
    settle = _columns(df, rf"settlement_([\d.]+yr)_{re.escape(u.settlement)}")
    final = u.suffixed("settlement", "settlement")
    panels = 2 + (final in df.columns)
    fig = _new_figure(7.2, 2.1 * panels + 0.4)
    axes = fig.subplots(panels, 1, sharex=True)
    ground = df[u.suffixed("ground_elevation", "length")].to_numpy()
    fill = df[u.suffixed("fill_height", "length")].to_numpy()
    ax = axes[0]
    if np.isfinite(ground).any():
        ax.fill_between(s, ground, ground + fill, color="tab:olive", alpha=0.6, lw=0,
                        label="fill")
        ax.plot(s, ground, color="saddlebrown", lw=1, label="existing ground")
        ax.set_ylabel(f"elevation ({u.length})")
    else:
        ax.fill_between(s, 0, fill, color="tab:olive", alpha=0.6, lw=0, label="fill")
        ax.set_ylabel(f"fill height ({u.length})")
    ax.legend(fontsize=7, loc="best")
    for col, depth in _columns(df, rf"dsz_at_(.+)_{re.escape(u.pressure)}"):
        axes[1].plot(s, df[col], lw=1.2, label=f"at {depth.replace(u.length, ' ' + u.length)}")
    axes[1].set_ylabel(f"Δσz ({u.pressure})")
    if axes[1].get_legend_handles_labels()[0]:       # no depths: an empty panel, no legend
        axes[1].legend(fontsize=7, loc="best")
    if panels == 3:
        for col, when in settle:
            axes[2].plot(s, df[col], lw=0.9, label=when.replace("yr", " yr"))
        axes[2].plot(s, df[final], color="black", lw=1.4, label="final")
        axes[2].invert_yaxis()
        axes[2].set_ylabel(f"settlement ({u.settlement})")
        axes[2].legend(fontsize=6, ncol=4, loc="best")
    for a in axes:
        a.grid(True, linewidth=0.4, alpha=0.6)
    _station_axis(axes[-1], u.system.name, u.length)
    return png_bytes(fig)


def section_figure(surface, panel, u, label: str) -> bytes:
    """One cross-section: the fill with the settlement trough above, Δσz isobars below
    (offsets positive to the left of the direction of stationing)."""
    off = surface[u.suffixed("offset", "length")].to_numpy()
    fill = surface[u.suffixed("fill_height", "length")].to_numpy()
    final = u.suffixed("settlement", "settlement")
    fig = _new_figure(7.2, 5.0)
    top, bottom = fig.subplots(2, 1, sharex=True, height_ratios=(1, 1.6))
    top.fill_between(off, 0, fill, color="tab:olive", alpha=0.6, lw=0, label="fill")
    top.set_ylabel(f"fill height ({u.length})")
    top.grid(True, linewidth=0.4, alpha=0.6)
    if final in surface.columns:
        trough = top.twinx()
        trough.plot(off, surface[final], color="tab:red", lw=1.2)
        trough.invert_yaxis()
        trough.set_ylabel(f"settlement ({u.settlement})", color="tab:red")
    po = panel[u.suffixed("offset", "length")].to_numpy()
    pd_ = panel[u.suffixed("depth", "length")].to_numpy()
    dsz = panel[u.suffixed("dsz", "pressure")].to_numpy()
    n_off = len(np.unique(po))
    grid = (dsz.reshape(-1, n_off), po.reshape(-1, n_off), pd_.reshape(-1, n_off))
    levels = nice_levels(0.0, float(np.nanmax(dsz)) if np.isfinite(dsz).any() else 1.0)
    cs = bottom.contour(grid[1], grid[2], grid[0], levels=levels[levels > 0], cmap="viridis",
                        linewidths=0.9)
    bottom.clabel(cs, fontsize=6, fmt="%g")
    bottom.invert_yaxis()
    bottom.set_ylabel(f"depth ({u.length})")
    bottom.set_xlabel(f"offset from the centreline ({u.length}; left of the stationing positive)")
    bottom.grid(True, linewidth=0.4, alpha=0.4)
    top.set_title(f"Station {label}: fill, settlement trough and Δσz isobars ({u.pressure})",
                  fontsize=9)
    return png_bytes(fig)


def pipe_highlights(folder: ResultsFolder, u) -> list[tuple[str, str]]:
    """(pipe, text) of each pipe's largest differential settlement and gradient."""
    df = folder.summary_tables().get("pipes")
    diff = u.suffixed("differential_settlement", "settlement")
    if df is None or diff not in df.columns:
        return []
    out = []
    for row in df.to_dict("records"):
        if not np.isfinite(row.get(diff, np.nan)):
            continue
        a = row.get(u.suffixed("differential_from", "length"))
        b = row.get(u.suffixed("differential_to", "length"))
        over = row.get(u.suffixed("differential_length", "length"))
        out.append((str(row["receptor_id"]),
                    f"largest differential settlement {row[diff]:.2f} {u.settlement} over "
                    f"{over:g} {u.length} (pipe chainage {a:,.0f}–{b:,.0f} {u.length}); "
                    f"steepest settlement gradient {row.get('gradient_max', np.nan):.4f} "
                    f"(1 in {1 / max(row.get('gradient_max', np.nan), 1e-12):,.0f})"))
    return out


def alignment_section(folder: ResultsFolder, img, esc) -> str:
    """HTML of the section; `img(png, caption)` and `esc` are the report's own."""
    u = folder.units
    profile = folder.table("alignment_profile")
    if profile is None:
        return '<p class="note">No [alignment] in this site: no profile or sections.</p>'
    parts = []
    highlights = pipe_highlights(folder, u)
    if highlights:
        parts.append('<div class="findings"><strong>Pipes along the corridor</strong><ul>'
                     + "".join(f"<li><strong>{esc(p)}</strong>: {esc(t)}</li>"
                               for p, t in highlights) + "</ul></div>")
    for png, caption in plan_sheets(folder, profile):
        parts.append(img(png, caption))
    parts.append(img(profile_figure(profile, u),
                     "Longitudinal profile along the centreline: fill over the existing "
                     "ground, Δσz under the final load at the profile depths, and the "
                     "consolidation settlement at times after the start of stage 1 "
                     "(alignment_profile.csv)."))
    surface = folder.table("alignment_section_surface")
    panel = folder.table("alignment_section_dsz")
    if surface is not None and panel is not None and len(surface):
        key = u.suffixed("station", "length")
        for station, grp in surface.groupby(key, sort=True):
            label = str(grp["station_label"].iloc[0])
            parts.append(img(section_figure(grp, panel[panel[key] == station], u, label),
                             f"Cross-section at station {label} (alignment_section_surface.csv, "
                             "alignment_section_dsz.csv)."))
    return "".join(parts)
