"""`fillstress monitor`: a site file and its readings to a monitoring results folder."""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from ..errors import InputError


@dataclass
class MonitorSummary:
    results: object
    folder: Path

    def tables(self):
        r = self.results
        u = r.site.units
        rows = []
        for i in r.instruments.itertuples():
            rows.append([i.instrument, f"{u.settlement_out(i.measured_last):.0f}",
                         f"{u.settlement_out(i.predicted_last):.0f}",
                         f"{i.measured_over_predicted:.2f}",
                         f"{u.settlement_out(i.final_revised):.0f}", f"{i.degree_now:.2f}",
                         "" if i.day_target_degree != i.day_target_degree
                         else f"{i.day_target_degree:.0f}"])
        heads = ["instrument", f"measured ({u.settlement})", f"predicted ({u.settlement})",
                 "ratio", f"final, revised ({u.settlement})", "U now",
                 f"day U = {r.settings.target_degree:.0%}"]
        return [(f"readings against prediction, {r.site.name} (day {r.now_day:.0f})", heads, rows)]

    def closing_lines(self):
        r = self.results
        lines = []
        if r.site_fit is not None and not r.site_fit.identifiable:
            lines.append("site fit: the readings do not separate compressibility from cv; "
                         "the forecast is not determined by them (see the cautions)")
        elif r.site_fit is not None:
            f = r.site_fit
            lines.append(f"site fit: compressibility × {f.f_c:.2f} ({f.f_c_ci[0]:.2f} … "
                         f"{f.f_c_ci[1]:.2f}), cv × {f.f_cv:.2f} ({f.f_cv_ci[0]:.2f} … "
                         f"{f.f_cv_ci[1]:.2f}), 95 % intervals")
        lines += [f"caution: {c}" for c in r.cautions[:-1]]
        lines.append(f"results written to {self.folder}")
        return lines


def monitor_site_file(site_path, readings_path, out=None, *, day0=None, construction=None,
                      target_degree: float = 0.9, residual_limit=None,
                      design_life_years: float = 50.0, overwrite: bool = False,
                      report: bool = True) -> MonitorSummary:
    """Compare readings with the site's prediction and write a monitoring results folder.

    Parameters
    ----------
    site_path, readings_path : path-like
        The site file (TOML) and the readings CSV (io.readings); without `readings_path`,
        `day0` or `construction`, the site file's ``[monitoring]`` table gives them.
    out : path-like, optional
        Folder; default ``monitor-<site file stem>``; an existing one is refused unless
        `overwrite`, and replaced only when the new one is complete.
    day0 : str, optional
        The calendar date of the site's day 0 (needed when files give dates).
    construction : path-like, optional
        The construction record CSV; without it the design stages are assumed.
    target_degree : float
        Degree of consolidation at which the surcharge may come off (default 0.9).
    residual_limit : float, optional
        Residual settlement limit over the design life, in the site's settlement unit.
    design_life_years : float

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from fillstress.examples import example_site
    >>> site = pathlib.Path(example_site("preload_surcharge"))
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "mon"
    >>> s = monitor_site_file(site, site.parent / "readings.csv", out, day0="2025-03-03",
    ...                       construction=site.parent / "construction.csv", report=False)
    >>> (out / "manifest.json").is_file(), round(s.results.site_fit.f_c, 1)
    (True, 0.8)
    """
    from ..io.atomic import ResultsWriter
    from ..io.readings import parse_day0, read_construction, read_readings
    from ..site.build import load_site
    from .analyse import Settings, analyse
    from .files import write_monitoring
    site = load_site(site_path)
    out = Path(out) if out else Path(f"monitor-{Path(site_path).stem}")
    folder = ResultsWriter(out, overwrite=overwrite)
    stated = site.settings
    readings_path = readings_path or stated.readings
    if readings_path is None:
        raise InputError("missing: give the readings file, or [monitoring] readings in the "
                         "site file", argument="readings")
    construction = construction or stated.construction
    day0 = parse_day0(day0 or stated.day0)
    limit = None
    if residual_limit is not None:
        try:
            limit = float(residual_limit) * site.units.settlement_to_m
        except (TypeError, ValueError):
            raise InputError(f"must be a number, got {residual_limit!r}",
                             argument="--residual-limit") from None
    settings = Settings(float(target_degree), limit, float(design_life_years))
    readings = read_readings(readings_path, day0, site.metres_per_unit)
    placements = None
    if construction is not None:
        placements = read_construction(construction, day0, site.stages)
    res = analyse(site, readings, placements, settings)
    inputs = [Path(readings_path)] + ([Path(construction)] if construction else [])
    with folder:
        write_monitoring(res, folder, report=report, inputs=inputs, day0=day0)
    return MonitorSummary(res, out)
