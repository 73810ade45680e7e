"""Report section "Headroom for a further load": the map of the largest multiple of a template
load placeable centred on each map cell (headroom.tif), which limit governs where
(headroom_governing.tif and .csv), the cells re-checked on the full settlement model
(headroom_checks.csv) and what the run said of its linearisation (summary.json headroom;
written by :mod:`fillstress.run.headroom`)."""
from __future__ import annotations

import textwrap

import numpy as np

from ..io.results import PlanField, ResultsFolder
from .figures import (_draw_features, _draw_fill_outline, _figure_size, _level_text,
                      _new_figure, png_bytes)
from .tables import esc, html_table, plain

CAUTION = ("Settlement-governed values between re-checked cells are linearised and may be "
           "unsafe.")
NOTE = ("Each cell holds the largest multiple of the template that may be placed centred on "
        "it, every load of the run in place, before the first mapped limit is reached at any "
        "receptor point. Stress limits (Δσz, Δσz/σ'v0) are exact by reciprocity (one FFT "
        "slice per receptor depth). Settlement limits are linearised about the present state "
        "(the tangent of the 1-D e–log σ' law): the settlement of buildings and pipes and the "
        "quantities linear in those settlements — a building's angular distortion (Burland & "
        "Wroth 1974), differential settlement between any two of its points and tilt (the "
        "least-squares plane), a pipe's differential settlement within each length in force "
        "and its curvature. The lowest cells, with some spread over the rest of the map, are "
        "re-checked with the template placed for real on the full settlement; where the full "
        "model allowed less, the settlement limits of every cell are scaled by the worst "
        "ratio found and each re-checked cell holds its full-model value. That scale is a "
        "correction, not a bound: a cell between re-checks may allow less. A body or pile "
        "template keeps its plan shape: its thickness is scaled. The deflection ratio has no "
        "limit and is not mapped. Blank cells reach no mapped limit.")
SHOWN_REGIONS = 4        # governing regions labelled on the map


def headroom_section(folder: ResultsFolder, img) -> str:
    """HTML of the section; `img(png, caption)` embeds a figure. A note when the folder has
    no headroom map ([headroom] not in the site file)."""
    about = folder.summary.get("headroom")
    field = folder.raster("headroom.tif", "headroom", "")
    if not isinstance(about, dict) or field is None:
        return ('<p class="note">No headroom map: the site file has no [headroom] table.</p>')
    u = folder.units
    governing = folder.table("headroom_governing")
    checks = folder.table("headroom_checks")
    codes = folder.raster("headroom_governing.tif", "governing", "")
    settles = _settlement_rows(governing)
    parts = [_finding(about, u)]
    if settles:
        parts.append(f'<div class="caution" id="headroom-caution"><strong>{esc(CAUTION)}'
                     f"</strong>{esc(_scaled_text(about))}</div>")
    png = headroom_figure(field, codes=codes, settlement_rows=settles, governing=governing,
                          checks=checks, least=about.get("least"), plan_unit=u.plan,
                          fill=folder.fill_thickness(), buildings=folder.features("buildings"),
                          pipes=folder.features("pipes"), boreholes=folder.features("boreholes"),
                          template=about.get("template", "template"),
                          height_per_multiple=_template_height(about, u),
                          length_unit=u.length)
    keys = ("; hatched: a settlement-derived limit governs" if settles else "") + (
        "; markers: the cells re-checked on the full model" if about.get("rechecked_cells")
        else "")
    parts.append(img(png, f"Largest multiple of the {about.get('template', 'template')} "
                          f"placeable centred on each map cell{keys}"))
    parts.append(_regions_table(governing, u))
    parts.append(_checks_table(checks, u))
    parts.append(f'<p class="note">{esc(NOTE)} The map is in <code>headroom.tif</code>, the '
                 "governing limits in <code>headroom_governing.csv</code> and "
                 "<code>headroom_governing.tif</code>, the re-checks in "
                 "<code>headroom_checks.csv</code>.</p>")
    return "".join(parts)


STRESS = ("stress_increase", "stress_ratio")     # exact by reciprocity; the rest linearised


def _settlement_rows(governing) -> set[int]:
    """1-based rows of headroom_governing.csv whose limit is derived from settlement
    (settlement, angular distortion, differential, tilt, curvature: linearised)."""
    if governing is None or governing.empty:
        return set()
    return {k + 1 for k, q in enumerate(governing["quantity"]) if str(q) not in STRESS}


def _template_height(about: dict, u) -> float | None:
    """Height (site length unit) of a body template at multiple 1, from the least cell."""
    least = about.get("least") or {}
    h = least.get(f"height_{u.length}")
    m = least.get("multiple")
    return float(h) / float(m) if h is not None and m else None


def _finding(about: dict, u) -> str:
    least = about.get("least")
    template = esc(about.get("template", "template"))
    if not least:
        return (f'<div class="findings none">The {template} reaches no mapped limit anywhere '
                "on the map.</div>")
    height = least.get(f"height_{u.length}")
    high = "" if height is None else f" ({esc(plain(float(height)))} {esc(u.length)} high)"
    x, y = (plain(float(least[k])) for k in ("x", "y"))
    return (f'<div class="findings{"" if least["multiple"] < 1 else " none"}"><strong>Least '
            f"headroom</strong>: × {esc(plain(float(least['multiple'])))} of the {template}"
            f"{high} at ({esc(x)}, {esc(y)}) {esc(u.plan)}, where {esc(least['limit'])} at "
            f"{esc(least['receptor_kind'])} {esc(least['receptor_id'])} governs"
            f"{_rechecked(about)}.</div>")


def _rechecked(about: dict) -> str:
    n = int(about.get("rechecked_cells") or 0)
    return f" ({n} cells re-checked on the full settlement model)" if n else ""


def _scaled_text(about: dict) -> str:
    if not about.get("linearisation_unsafe"):
        return ""
    worst = float(about["worst_settlement_full_over_linearised"])
    return (f" At the re-checked cells the full settlement model allowed up to "
            f"{100 * (1 - worst):.0f} % less than the linearisation (worst full ÷ "
            f"linearised {worst:.3g}): the settlement limits of every cell are scaled by "
            f"{float(about['settlement_scale_applied']):.3g}, the linearised map is in "
            "headroom_linearised.tif.")


def _regions_table(governing, u) -> str:
    """Each receptor and limit that governs somewhere: its cells and area in all, and its
    least multiple with the point, edge or pair giving it (headroom_governing.csv has a row
    per point)."""
    if governing is None or governing.empty:
        return ""
    area = next(c for c in governing.columns if c.startswith("area"))
    x, y = (next(c for c in governing.columns if c.startswith(k)) for k in ("x_at", "y_at"))
    keys = ["receptor_kind", "receptor_id", "limit"]
    grouped = governing.groupby(keys, sort=False)       # rows are by least multiple first
    least = grouped.head(1).set_index(keys)
    total = grouped[["cells", area]].sum()
    rows = [[kind, rid, limit, r["quantity"], int(total.loc[key, "cells"]),
             float(total.loc[key, area]),
             r["multiple_min"], r["point_id"], r[x], r[y]]
            for key, r in least.iterrows() for kind, rid, limit in [key]]
    unit = area.removeprefix("area_")
    return ("<h3>Where each limit governs</h3>"
            + html_table(["receptor", "id", "limit", "quantity", "cells", f"area ({unit})",
                          "least multiple", "at point, edge or pair", f"x ({u.plan})",
                          f"y ({u.plan})"], rows))


def _checks_table(checks, u) -> str:
    if checks is None or checks.empty:
        return ('<p class="note">No cell was re-checked on the full settlement model (no '
                "settlement limit mapped, or [headroom] recheck = 0).</p>")
    x, y = (next(c for c in checks.columns if c.startswith(k)) for k in ("x_", "y_"))
    rows = [[r[x], r[y], r["selection"], r["linearised_multiple"], r["full_multiple"],
             f"{100 * float(r['difference']):+.1f} %", r["settlement_ratio"]]
            for r in checks.to_dict("records")]
    return ("<h3>Cells re-checked on the full settlement model</h3>"
            + html_table([f"x ({u.plan})", f"y ({u.plan})", "chosen as", "linearised multiple",
                          "full-model multiple", "full − linearised",
                          "settlement full ÷ linearised"], rows))


def multiple_levels(lo: float, hi: float) -> np.ndarray:
    """Colour levels of a headroom map: 0, then 1-2-5 steps from the last at or below `lo`
    to the first at or above `hi`, at most three decades (far cells are 'anything goes').

    Examples
    --------
    >>> multiple_levels(0.23, 40.0).tolist()
    [0.0, 0.2, 0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0]
    >>> multiple_levels(0.23, 5000.0).tolist()[-1]     # the rest above the last colour
    500.0
    """
    lo = max(lo, 1e-3)
    first = 10.0 ** np.floor(np.log10(lo))
    steps = [float(f"{v * first * 10.0 ** k:.6g}") for k in range(6) for v in (1, 2, 5)]
    start = max(i for i, s in enumerate(steps) if s <= lo * (1 + 1e-12))
    stop = next((i for i, s in enumerate(steps) if s >= min(hi, 1000 * lo)), len(steps) - 1)
    return np.array([0.0] + steps[start:max(stop, start + 1) + 1])


def headroom_figure(field: PlanField, *, codes=None, settlement_rows=(), governing=None,
                    checks=None, least=None, plan_unit="m", fill=None, buildings=(), pipes=(),
                    boreholes=(), template="template", height_per_multiple=None,
                    length_unit="m") -> bytes:
    """The headroom map: the multiple in colour (discrete 1-2-5 levels), the ×1 contour,
    cells where a settlement limit governs hatched, the re-checked cells and the least cell
    marked, the receptors and fill outlines drawn over it; the colour bar also in the
    template body's height when `height_per_multiple` is given.

    Examples
    --------
    >>> f = PlanField("headroom", "", None, np.arange(4.0), np.arange(3.0),
    ...               np.array([[0.3, 1.0, 4.0, np.nan]] * 3), "")
    >>> headroom_figure(f)[:4] == b"\\x89PNG"
    True
    """
    from matplotlib.colors import BoundaryNorm
    from matplotlib.patches import Patch
    import matplotlib
    from matplotlib.ticker import FuncFormatter, MaxNLocator
    values = field.values
    lo, hi = field.value_range()
    levels = multiple_levels(lo if lo > 0 else 1e-3, hi)
    cmap = matplotlib.colormaps["viridis"].resampled(len(levels))   # a colour per bin and over
    fig = _new_figure(*_figure_size(field))
    ax = fig.add_subplot()
    mesh = ax.pcolormesh(_edges(field.x), _edges(field.y), values, cmap=cmap,
                         norm=BoundaryNorm(levels, cmap.N, extend="max"), shading="flat")
    handles = []
    if 0 < 1.0 < hi and min(values.shape) > 1:
        ax.contour(field.x, field.y, np.where(np.isfinite(values), values, 10 * hi), levels=[1.0],
                   colors="black", linewidths=1.6)
        handles.append(_line_handle("black", "× 1: one template just reaches a limit"))
    if codes is not None and settlement_rows:
        mask = np.isin(np.nan_to_num(codes.values, nan=0).astype(int), list(settlement_rows))
        if mask.any():
            ax.contourf(field.x, field.y, mask.astype(float), levels=[0.5, 1.5],
                        colors="none", hatches=["//"])
            handles.append(Patch(facecolor="none", edgecolor="black", hatch="//",
                                 label="a settlement-derived limit governs"))
    _draw_fill_outline(ax, fill)
    _draw_features(ax, buildings, pipes, boreholes)
    handles += _draw_checks(ax, checks)
    if least:
        ax.plot([least["x"]], [least["y"]], marker="*", markersize=15, color="red",
                markeredgecolor="white", linestyle="none", zorder=7)
        handles.append(_line_handle("red", f"least: × {float(least['multiple']):.3g}",
                                    marker="*"))
    handles += _label_regions(ax, governing)
    ax.set_xlim(field.x[0] - _step(field.x) / 2, field.x[-1] + _step(field.x) / 2)
    ax.set_ylim(field.y[0] - _step(field.y) / 2, field.y[-1] + _step(field.y) / 2)
    ax.set_aspect("equal")
    ax.set_xlabel(f"x, east ({plan_unit})")
    ax.set_ylabel(f"y, north ({plan_unit})")
    plain_tick = FuncFormatter(lambda v, _: f"{v:.0f}" if abs(v) >= 100 else f"{v:g}")
    for axis in (ax.xaxis, ax.yaxis):
        axis.set_major_locator(MaxNLocator(nbins=5))
        axis.set_major_formatter(plain_tick)
    k = float(height_per_multiple) if height_per_multiple else None
    bar = fig.colorbar(mesh, ax=ax, shrink=0.95, ticks=levels, spacing="uniform")
    title = textwrap.fill(f"largest multiple (×) of the {template}", 44)
    bar.set_label(title + ("" if k is None else f"\n(in brackets: its height, {length_unit})"),
                  fontsize=8)
    bar.ax.yaxis.set_major_formatter(FuncFormatter(
        lambda v, _: _level_text(v) + ("" if k is None else
                                       f" ({_level_text(float(f'{v * k:.3g}'))})")))
    if handles:
        fig.legend(handles=handles, fontsize=7, loc="outside lower center", ncol=2,
                   frameon=False)
    return png_bytes(fig)


def _edges(centres: np.ndarray) -> np.ndarray:
    step = _step(centres)
    return np.concatenate([centres - step / 2, [centres[-1] + step / 2]])


def _step(centres: np.ndarray) -> float:
    return float(centres[1] - centres[0]) if len(centres) > 1 else 1.0


def _line_handle(colour, label, marker=None):
    from matplotlib.lines import Line2D
    if marker:
        return Line2D([], [], color=colour, marker=marker, markersize=10, linestyle="none",
                      markeredgecolor="white", label=label)
    return Line2D([], [], color=colour, linewidth=1.6, label=label)


def _draw_checks(ax, checks) -> list:
    """The re-checked cells: lowest as black crosses, spread ones as white-edged pluses."""
    if checks is None or checks.empty:
        return []
    x, y = (next(c for c in checks.columns if c.startswith(k)) for k in ("x_", "y_"))
    out = []
    for chosen, style in (("lowest", dict(marker="x", color="black")),
                          ("spread", dict(marker="P", color="white", markeredgecolor="black"))):
        rows = checks[checks["selection"] == chosen]
        if rows.empty:
            continue
        ax.plot(rows[x], rows[y], linestyle="none", markersize=6, zorder=6, **style)
        out.append(_point_handle(style, f"re-checked on the full model ({chosen})"))
    return out


def _point_handle(style, label):
    from matplotlib.lines import Line2D
    return Line2D([], [], linestyle="none", markersize=6, label=label, **style)


def _label_regions(ax, governing) -> list:
    """A number at the least cell of the first few governing limits, and the legend
    entries that name them (names written on the map overlap where limits meet)."""
    if governing is None or governing.empty:
        return []
    x, y = (next(c for c in governing.columns if c.startswith(k)) for k in ("x_at", "y_at"))
    seen, handles = set(), []
    for r in governing.to_dict("records"):
        key = (r["receptor_kind"], r["receptor_id"], r["limit"])
        if key in seen:
            continue
        seen.add(key)
        number = str(len(seen))
        ax.annotate(number, (r[x], r[y]), xytext=(6, -10), textcoords="offset points",
                    fontsize=7, zorder=7, bbox=dict(boxstyle="circle,pad=0.2",
                                                    facecolor="white", alpha=0.85,
                                                    edgecolor="black", linewidth=0.5))
        text = f"{r['limit']} at {r['receptor_id']}".replace("$", r"\$")
        handles.append(_point_handle(dict(marker=f"${number}$", color="black"),
                                     f"{number}: {text} governs"))
        if len(seen) >= SHOWN_REGIONS:
            break
    return handles
