"""The monitoring report: readings against the prediction, as one self-contained HTML page.

Figures (matplotlib Agg, PNG): per instrument the readings, the design prediction, the
prediction for the fill as built and the revised forecast against time; the Asaoka plot;
the plan of plates coloured by measured ÷ predicted; piezometer excess pore pressure.
Every text from the inputs passes through `esc`.
"""
from __future__ import annotations

import html as _html

import numpy as np

from .figures import CHART, _new_figure, png_bytes
from .html import _img, _mpl_text

COLOURS = {"readings": "black", "design": "tab:gray", "built": "tab:blue",
           "revised": "tab:red"}


def instrument_figure(name, days, design, built, revised, readings, *, unit: str,
                      scale: float, stage_days=(), baseline_day=0.0) -> bytes:
    """Readings, design prediction, prediction as built and revised forecast vs time.

    Settlement is shown from the instrument's baseline reading, downward, in `unit`
    (`scale` converts metres to it).

    Examples
    --------
    >>> png = instrument_figure("P1", [0, 10, 20], [0, .1, .2], [0, .1, .2], [0, .08, .15],
    ...                         ([10.0], [0.09]), unit="mm", scale=1000)
    >>> png[:4] == b"\\x89PNG"
    True
    """
    fig = _new_figure(6.4, 3.4, CHART)
    ax = fig.add_subplot()
    days = np.asarray(days, float)
    at_base = np.interp(baseline_day, days, design), np.interp(baseline_day, days, built), \
        np.interp(baseline_day, days, revised)
    after = days >= baseline_day
    for key, curve, zero, label in (("design", design, at_base[0], "design prediction"),
                                    ("built", built, at_base[1], "prediction, fill as built"),
                                    ("revised", revised, at_base[2], "revised forecast")):
        ax.plot(days[after], (np.asarray(curve)[after] - zero) * scale, color=COLOURS[key],
                label=label, linestyle="--" if key == "design" else "-", linewidth=1.2)
    rd, rs = readings
    ax.plot(rd, np.asarray(rs) * scale, "o", color=COLOURS["readings"], markersize=2.5,
            label="readings")
    for d in stage_days:
        ax.axvline(d, color="gray", linestyle=":", linewidth=0.8)
    ax.invert_yaxis()
    ax.set_xlabel("days after day 0")
    ax.set_ylabel(f"settlement since first reading ({unit})")
    ax.set_title(_mpl_text(name), fontsize=9)
    ax.grid(True, linewidth=0.4, alpha=0.5)
    ax.legend(fontsize=7, loc="upper right")
    return png_bytes(fig)


def asaoka_figure(name, fit, *, unit: str, scale: float) -> bytes:
    """Asaoka plot: s_j against s_{j−1}, the fitted line and the 45° line.

    Examples
    --------
    >>> import numpy as np
    >>> from fillstress.monitoring import asaoka
    >>> t = np.arange(0.0, 101.0, 10.0)
    >>> fit = asaoka(t, 0.8 * (1 - 0.6 * np.exp(-t / 50)))
    >>> asaoka_figure("P1", fit, unit="mm", scale=1000)[:4] == b"\\x89PNG"
    True
    """
    fig = _new_figure(4.2, 3.8, CHART)
    ax = fig.add_subplot()
    prev, cur = fit.previous * scale, fit.current * scale
    top = max(float(fit.ultimate * scale), float(cur.max())) * 1.05
    low = float(prev.min())
    ax.plot(prev, cur, "o", color="black", markersize=3, label="readings (equal steps)")
    line = np.array([low, top])
    ax.plot(line, fit.beta0 * scale + fit.beta1 * line, color="tab:red",
            label=f"s_j = β0 + β1·s_j−1, β1 = {fit.beta1:.3f}")
    ax.plot(line, line, color="gray", linestyle="--", linewidth=0.8, label="s_j = s_j−1")
    ax.plot([fit.ultimate * scale], [fit.ultimate * scale], "s", color="tab:red")
    ax.annotate(f"ultimate {fit.ultimate * scale:.0f} {unit}",
                (fit.ultimate * scale, fit.ultimate * scale), xytext=(-6, 8),
                textcoords="offset points", ha="right", fontsize=8)
    ax.set_xlabel(f"s_j−1 ({unit})")
    ax.set_ylabel(f"s_j ({unit})")
    ax.set_title(_mpl_text(f"{name}: Asaoka, Δt = {fit.step_days:.3g} days"), fontsize=9)
    ax.grid(True, linewidth=0.4, alpha=0.5)
    ax.legend(fontsize=7, loc="lower right")
    return png_bytes(fig)


def ratio_map(x, y, ratio, names, *, plan_unit: str, outline=None) -> bytes:
    """Plan of the settlement instruments coloured by measured ÷ predicted (last reading).

    Examples
    --------
    >>> ratio_map([0, 10], [0, 5], [0.9, 1.2], ["A", "B"], plan_unit="m")[:4] == b"\\x89PNG"
    True
    """
    from matplotlib.colors import TwoSlopeNorm
    fig = _new_figure(6.0, 4.6)
    ax = fig.add_subplot()
    ratio = np.asarray(ratio, float)
    if outline is not None:
        ax.contour(*outline, levels=[1e-6], colors="gray", linewidths=0.8)
    spread = max(0.05, float(np.nanmax(np.abs(ratio - 1.0))) if np.isfinite(ratio).any() else 0.05)
    sc = ax.scatter(x, y, c=ratio, cmap="coolwarm", s=60, edgecolors="black",
                    norm=TwoSlopeNorm(1.0, 1.0 - spread, 1.0 + spread))
    for xi, yi, n, r in zip(x, y, names, ratio):
        ax.annotate(_mpl_text(f"{n} {r:.2f}"), (xi, yi), xytext=(5, 4),
                    textcoords="offset points", fontsize=7)
    fig.colorbar(sc, ax=ax, label="measured ÷ predicted (last reading)")
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_xlabel(f"x ({plan_unit})")
    ax.set_ylabel(f"y ({plan_unit})")
    ax.ticklabel_format(useOffset=False, style="plain")
    ax.tick_params(axis="x", labelrotation=30)
    ax.grid(True, linewidth=0.4, alpha=0.5)
    return png_bytes(fig)


def piezometer_figure(name, days, predicted, revised, readings, *, unit: str,
                      scale: float) -> bytes:
    """Excess pore pressure: readings against the predicted and revised dissipation.

    Examples
    --------
    >>> piezometer_figure("PZ", [0, 1], [5, 4], [5, 3], ([1.0], [3.5]), unit="kPa",
    ...                   scale=1.0)[:4] == b"\\x89PNG"
    True
    """
    fig = _new_figure(6.4, 3.2)
    ax = fig.add_subplot()
    ax.plot(days, np.asarray(predicted) * scale, color=COLOURS["built"],
            label="predicted, fill as built")
    ax.plot(days, np.asarray(revised) * scale, color=COLOURS["revised"], label="revised cv")
    ax.plot(readings[0], np.asarray(readings[1]) * scale, "o", color="black", markersize=2.5,
            label="readings")
    ax.set_xlabel("days after day 0")
    ax.set_ylabel(f"excess pore pressure ({unit})")
    ax.set_title(_mpl_text(name), fontsize=9)
    ax.grid(True, linewidth=0.4, alpha=0.5)
    ax.legend(fontsize=7)
    return png_bytes(fig)


def paragraph(text: str) -> str:
    return f"<p>{_html.escape(text)}</p>"


def image(png: bytes, caption: str) -> str:
    return _img(png, caption)
