"""Report section "Odds of exceeding a limit": the percentiles of each receptor's settlement,
differential settlement and distortion over the sampled soil and fill parameters, the
probability of exceeding each settlement limit with its sampling error, and the
convergence of the estimates with the number of samples (odds.csv, odds_parameters.csv and
odds_convergence.csv of a results folder, written by :mod:`fillstress.run.odds`)."""
from __future__ import annotations

from ..io.results import ResultsFolder
from .figures import CHART, _new_figure, plain_log_ticks, png_bytes
from .tables import esc, html_table, plain

SHOWN = 4                # limit rows drawn in the convergence plot
NOTE = ("Each sample draws every uncertain parameter from its distribution (seeded Latin "
        "hypercube, McKay, Beckman & Conover 1979; stated rank correlations imposed by "
        "Iman & Conover 1982, other parameters independent) and recomputes the settlement "
        "along the load history and the building and pipe checks. The elastic stress is "
        "the run's: it does not depend on the soil parameters, and a fill unit weight scales "
        "its body's stress (linear elasticity). Geometry, the layer depths, the stress "
        "solution, 1-D consolidation itself and the limits are not uncertain here. "
        "P(exceed) is the fraction of samples over the limit; ± is its binomial standard "
        "error sqrt(p(1−p)/n), and the 95 % interval the Wilson (1927) score interval, "
        "which stays open when no sample exceeds. Percentiles are sample percentiles.")


def odds_section(folder: ResultsFolder, img) -> str:
    """HTML of the section; `img(png, caption)` embeds a figure. A note when the folder has
    no odds.csv (no [uncertainty] in the site file)."""
    table = folder.table("odds")
    if table is None or table.empty:
        return ('<p class="note">No parameter was given as a distribution ([uncertainty] in '
                "the site file), so this run has no odds.</p>")
    rows = table.to_dict("records")
    limited = [r for r in rows if not _blank(r["limit"])]
    parts = []
    if limited:
        top = max(limited, key=lambda r: (r["p_exceed"], r["p90"] / r["limit_value"]))
        parts.append(f'<div class="findings{"" if top["p_exceed"] > 0 else " none"}">'
                     f"<strong>Likeliest limit exceeded</strong>: {esc(top['limit'])} at "
                     f"{esc(top['receptor_kind'])} {esc(top['receptor_id'])}: "
                     f"{_percent(top['p_exceed'])} ({esc(plain(top['samples_over']))} of "
                     f"{esc(plain(top['samples']))} samples; 95 % interval "
                     f"{_percent(top['wilson_low'])} – {_percent(top['wilson_high'])}).</div>")
    heads = ["receptor", "id", "quantity", "unit", "value of the run", "P10", "P50", "P90",
             "limit", "limit value", "P(exceed)", "± s.e.", "95 % interval"]
    body = [[r["receptor_kind"], r["receptor_id"], r["quantity"].replace("_", " "),
             "" if str(r["unit"]) == "1" else r["unit"], r["nominal"], r["p10"], r["p50"],
             r["p90"], r["limit"], r["limit_value"], _percent(r["p_exceed"]),
             _percent(r["standard_error"]),
             "" if _blank(r["limit"]) else
             f"{_percent(r['wilson_low'])} – {_percent(r['wilson_high'])}"] for r in rows]
    parts.append(html_table(heads, body))
    parts.append(_parameters(folder))
    series = folder.table("odds_convergence")
    if series is not None and not series.empty and limited:
        parts.append(img(convergence_figure(series, _shown(limited)),
                         "Probability of exceeding a limit against the number of samples, "
                         "with its 95 % Wilson interval (shaded)"))
    parts.append(f'<p class="note">{esc(NOTE)} Every row is in <code>odds.csv</code>, the '
                 "sampled parameters in <code>odds_parameters.csv</code> and the series "
                 "drawn in <code>odds_convergence.csv</code>.</p>")
    return "".join(parts)


def _parameters(folder: ResultsFolder) -> str:
    t = folder.table("odds_parameters")
    if t is None or t.empty:
        return ""
    heads = ["parameter", "distribution", "unit", "mean", "COV", "low", "high",
             "site value", "sampled P10", "P50", "P90"]
    rows = [[r["parameter"], r["distribution"], "" if str(r["unit"]) == "1" else r["unit"],
             r["mean"], r["cov"], r["low"], r["high"], r["site_value"], r["p10"], r["p50"],
             r["p90"]] for r in t.to_dict("records")]
    return "<h3>Uncertain parameters</h3>" + html_table(heads, rows)


def _shown(limited: list[dict]) -> list[tuple]:
    """The (kind, id, limit) rows drawn: the likeliest exceeded, then those nearest."""
    order = sorted(limited, key=lambda r: (r["p_exceed"], r["p90"] / r["limit_value"]),
                   reverse=True)
    return [(r["receptor_kind"], r["receptor_id"], r["limit"]) for r in order[:SHOWN]]


def convergence_figure(series, keys: list[tuple]) -> bytes:
    """P(exceed) against the number of samples for each (kind, id, limit) of `keys`, with
    its Wilson band (odds_convergence.csv rows).

    Examples
    --------
    >>> import pandas as pd
    >>> s = pd.DataFrame({"receptor_kind": "building", "receptor_id": "B1", "limit": "beta",
    ...                   "samples": [10, 100], "p_exceed": [0.1, 0.12],
    ...                   "wilson_low": [0.02, 0.07], "wilson_high": [0.4, 0.2]})
    >>> convergence_figure(s, [("building", "B1", "beta")])[:4] == b"\\x89PNG"
    True
    """
    fig = _new_figure(6.4, 3.4, CHART)
    ax = fig.add_subplot()
    top = 1.0
    for k, (kind, rid, limit) in enumerate(keys):
        g = series[(series["receptor_kind"] == kind) & (series["receptor_id"].astype(str) == str(rid))
                   & (series["limit"] == limit)].sort_values("samples")
        if g.empty:
            continue
        n = g["samples"].to_numpy(float)
        colour = f"C{k}"
        top = max(top, 100 * float(g["wilson_high"].max()))
        ax.fill_between(n, 100 * g["wilson_low"], 100 * g["wilson_high"], color=colour,
                        alpha=0.18, linewidth=0)
        ax.plot(n, 100 * g["p_exceed"], color=colour, marker=".",
                label=f"{limit} at {kind} {rid}".replace("$", r"\$"))
    ax.set_xscale("log")
    plain_log_ticks(ax.xaxis)
    ax.set_ylim(bottom=0.0, top=1.05 * top)
    ax.set_xlabel("number of samples (log scale)")
    ax.set_ylabel("P(exceed) (%)")
    ax.grid(True, which="both", linewidth=0.4, alpha=0.5)
    ax.legend(fontsize=7, loc="upper right")
    return png_bytes(fig)


def _blank(value) -> bool:
    return plain(value) == ""


def _percent(value) -> str:
    text = plain(value)
    return "" if text == "" else f"{100 * float(value):.3g} %"
