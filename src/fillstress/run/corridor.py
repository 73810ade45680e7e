"""Results along the alignment: a longitudinal profile and cross-sections (SI tables).

Profile, every ``profile_step`` along the centreline: fill height, Δσz at the profile
depths under the final load, and with a soil profile the consolidation settlement after
each stage and at times after the start (stages placed at their ``stage_days``).
Cross-section at each chosen station, square to the centreline: the fill height, the
ground and the settlement across it, and Δσz on a panel of offsets × depths (isobars).
Everything comes from the same load grids and solvers as the receptors.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from .. import settlement as st
from .settle import column_layers

#: Times (years after the start of stage 1) of the settlement columns of the profile.
PROFILE_YEARS = (0.5, 1.0, 2.0, 5.0, 10.0, 25.0)
SECTION_OFFSETS, SECTION_DEPTHS = 81, 24       # points across, levels down


def _fill_at(site, xy) -> np.ndarray:
    """Fill height (m) of the final stage at plan points: the value of their cell."""
    spec, t = site.spec, site.fill_thickness()
    i = np.floor((xy[:, 0] - spec.x0) / spec.dx).astype(int)
    j = np.floor((xy[:, 1] - spec.y0) / spec.dy).astype(int)
    inside = (i >= 0) & (i < spec.nx) & (j >= 0) & (j < spec.ny)
    out = np.zeros(len(xy))
    out[inside] = t[j[inside], i[inside]]
    return out


def _ground_at(site, xy) -> np.ndarray:
    if site.ground is None:
        return np.full(len(xy), np.nan)
    return np.asarray(site.ground(xy[:, 0], xy[:, 1]), float).reshape(-1)


def _stage_years(site) -> np.ndarray:
    return np.asarray(site.stage_start_days(), float) / 365.25


def _stage_layers(site, point_sets, grids, evaluate) -> list:
    """Settlement by soil layer (N, S, L) of the columns below each (N, 2) plan point set
    after each stage (settle.column_layers), or None per set where nothing settles; grid
    by grid, so that `evaluate` prepares each stage's grid once for every set."""
    by_grid = [[column_layers(site.soil, xy[:, 0], xy[:, 1], 0.0, [g], evaluate)
                for xy in point_sets] for g in grids]
    return [None if parts[0] is None else np.concatenate(parts, axis=1)
            for parts in zip(*by_grid)]


def _settlements(site, layers, with_time: bool) -> dict:
    """Columns of surface settlement (m) at plan points from their stage `layers`
    (:func:`_stage_layers`): per stage, and at PROFILE_YEARS."""
    if layers is None:
        return {}
    cols = {f"settlement_stage{k}": layers[:, s].sum(axis=1)
            for s, k in enumerate(site.stages)}
    cols["settlement"] = cols[f"settlement_stage{site.stages[-1]}"]
    if with_time and any(L.compressible and L.cv_m2_per_yr for L in site.soil.layers):
        cv, hdr = st.time_parameters(site.soil, no_cv="immediate")
        years = np.asarray(PROFILE_YEARS)
        at = np.full((len(layers), len(years)), np.nan)
        for n in range(len(layers)):
            if not np.isnan(layers[n]).any():
                at[n] = st.settlement_time_curve(st.stage_increments(layers[n]),
                                                 _stage_years(site), years, cv, hdr)
        cols.update({f"settlement_{y:g}yr": at[:, k] for k, y in enumerate(years)})
    return cols


def profile_step(site) -> float:
    """Spacing (m) of the profile points: the stated step, or about 400 points over the
    centreline but no closer than the cell."""
    a = site.alignment
    return a.profile_step or max(a.line.length / 400.0, site.spec.dx)


def profile_stations(site) -> np.ndarray:
    """Stations (m) of the profile points, every :func:`profile_step` and at the end."""
    a = site.alignment
    return np.unique(np.r_[np.arange(a.start, a.end, profile_step(site)), a.end])


def profile_table(site) -> pd.DataFrame:
    """The profile's points along the centreline: station (m), x, y, ground, fill."""
    stations = profile_stations(site)
    xy, _ = site.alignment.points(stations)
    return pd.DataFrame({"station": stations, "x": xy[:, 0], "y": xy[:, 1],
                         "ground_elevation": _ground_at(site, xy),
                         "fill_height": _fill_at(site, xy)})


def _fill_width(site, centre, normal) -> float:
    """Width (m) across the centreline where the final fill is thicker than 1 mm."""
    reach = np.linspace(-1000.0, 1000.0, 2001)
    h = _fill_at(site, centre + reach[:, None] * normal)
    loaded = reach[h > 1e-3]
    return float(loaded.max() - loaded.min()) if loaded.size else 0.0


def section_cuts(site) -> list[tuple[pd.DataFrame, pd.DataFrame]]:
    """Per chosen station (surface, panel): the points across it with their fill and
    ground, and the panel of offsets × depths for Δσz (SI; offsets positive to the left of
    the direction of stationing); nothing computed yet."""
    a = site.alignment
    centres, tangents = a.points(a.chainages)
    cuts = []
    for station, centre, t in zip(a.chainages, centres, tangents):
        normal = np.array([-t[1], t[0]])
        width = _fill_width(site, centre, normal)
        half = 0.5 * (a.section_width or max(2.5 * width, 20 * site.spec.dx))
        offsets = np.linspace(-half, half, SECTION_OFFSETS)
        xy = centre + offsets[:, None] * normal
        surface = pd.DataFrame({"station": station, "offset": offsets, "x": xy[:, 0],
                                "y": xy[:, 1], "ground_elevation": _ground_at(site, xy),
                                "fill_height": _fill_at(site, xy)})
        bottom = a.section_depth or max(width, 10 * site.spec.dx)
        if a.section_depth is None and site.soil is not None:
            bottom = min(bottom, site.soil.bottom_m)      # the stated profile
        depths = np.linspace(bottom / SECTION_DEPTHS, bottom, SECTION_DEPTHS)
        off, dep = np.meshgrid(offsets, depths)
        pts = centre + off.ravel()[:, None] * normal
        panel = pd.DataFrame({"station": station, "offset": off.ravel(), "depth": dep.ravel(),
                              "x": pts[:, 0], "y": pts[:, 1]})
        cuts.append((surface, panel))
    return cuts


def solver_calls(site) -> list[tuple[str, int, int]]:
    """(step, points, stage) of each Δσz call :func:`corridor_results` makes, in its
    order: what the run estimate (run/plan.py) counts."""
    a = site.alignment
    if a is None:
        return []
    final = site.stages[-1]
    sublayers = 0 if site.soil is None else len(st.sublayers(site.soil, top_depth=0.0)[0])

    n = len(profile_stations(site))
    calls = []
    if sublayers:           # _stage_layers: stage by stage, every section, then the profile
        for k in site.stages:
            calls += [("alignment sections", SECTION_OFFSETS * sublayers, k)
                      for _ in a.chainages]
            calls.append(("alignment profile", n * sublayers, k))
    calls += [("alignment profile", n, final) for _ in a.profile_depths]
    return calls + [("alignment sections", SECTION_OFFSETS * SECTION_DEPTHS, final)
                    for _ in a.chainages]


def corridor_results(site, evaluate) -> dict:
    """``{"alignment_profile", "alignment_section_surface", "alignment_section_dsz"}``
    DataFrames (SI), or {} without an [alignment]; `evaluate(grid, xyz)` gives Δσz (kPa)."""
    a = site.alignment
    if a is None:
        return {}
    line, cuts = profile_table(site), section_cuts(site) if a.chainages else []
    grids = [site.load_grid(k) for k in site.stages]   # one object each, prepared once
    surfaces = [surface for surface, _ in cuts] + [line]
    layers = (_stage_layers(site, [t[["x", "y"]].to_numpy() for t in surfaces], grids, evaluate)
              if site.soil is not None else [None] * len(surfaces))
    final = grids[-1]
    for depth in a.profile_depths:
        xyz = np.column_stack([line[["x", "y"]].to_numpy(), np.full(len(line), depth)])
        line[f"dsz_z{depth:g}"] = evaluate(final, xyz)
    line = line.assign(**_settlements(site, layers[-1], with_time=True))
    out = {"alignment_profile": line, "alignment_section_surface": pd.DataFrame(),
           "alignment_section_dsz": pd.DataFrame()}
    if cuts:
        out["alignment_section_surface"] = pd.concat(
            [t.assign(**_settlements(site, L, with_time=False))
             for (t, _), L in zip(cuts, layers)], ignore_index=True)
        out["alignment_section_dsz"] = pd.concat(
            [panel[["station", "offset", "depth"]].assign(
                dsz=evaluate(final, panel[["x", "y", "depth"]].to_numpy()))
             for _, panel in cuts], ignore_index=True)
    return out
