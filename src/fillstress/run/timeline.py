"""The load history of a run: load states in time order (stages placed over their build
durations, bodies removed on their removal day) and, per settlement point, the stress path
through them, the settlement–time curve with drains where they act, secondary compression
and the preload answers (all SI; days only at the edges)."""
from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
import shapely

from .. import settlement as st
from ..errors import InputError

DAYS_PER_YEAR = 365.25
U_END_OF_PRIMARY = 0.95       # tp rule for secondary compression (common practice)


@dataclass(frozen=True)
class LoadState:
    """One change of load: ``event`` text, start ``day``, ramp ``duration_days``, ``active``
    bodies (bool per site body), ``stage`` (None for a removal) and whether it ``loads``."""

    event: str
    day: float
    duration_days: float
    active: tuple
    stage: int | None
    loads: bool


def load_states(site) -> list[LoadState]:
    """Stage placements and body removals in time order, from [settlement] stage_days,
    stage_durations and each body's removal_day (stages that are not given a duration are
    placed at once)."""
    days = site.stage_start_days()
    start = dict(zip(site.stages, days))
    build = dict(zip(site.stages, site.stage_build_days()))
    removal = {}
    for b in site.bodies:
        day = site.removal_days.get(b.name)
        if day is None:
            continue
        if day < start[b.stage] + build[b.stage]:
            raise InputError(f"day {day:g} is before body {b.name!r} is complete (stage "
                             f"{b.stage} starts on day {start[b.stage]:g} and takes "
                             f"{build[b.stage]:g} days)", file=site.path,
                             key=f"bodies.{b.name}.removal_day")
        removal[b.name] = day
    events = [(start[k], 0, f"stage {k}", k) for k in site.stages]
    events += [(d, 1, f"removal of {name}", None) for name, d in removal.items()]
    states, active = [], {b.name: False for b in site.bodies}
    for day, _, label, stage in sorted(events, key=lambda e: (e[0], e[1], e[2])):
        if stage is not None:
            for b in site.bodies:
                active[b.name] |= b.stage == stage
        else:
            active[label.removeprefix("removal of ")] = False
        states.append(LoadState(label, float(day), build.get(stage, 0.0) if stage is not None else 0.0,
                                tuple(active[b.name] for b in site.bodies), stage,
                                stage is not None))
    return states


def removable(site) -> np.ndarray:
    """Bool per body: it has a removal day (a surcharge)."""
    return np.array([b.name in site.removal_days for b in site.bodies])


# --- per point ------------------------------------------------------------------------
def drain_rates(site, x: float, y: float, z: np.ndarray, layers) -> np.ndarray:
    """Radial rate λ = 8·ch/(de²·μ) (1/year) of each sublayer below (x, y); 0 outside drain
    zones, below the drain tip, or in a layer without ch."""
    out = np.zeros(z.size)
    for _, poly, drains in site.drains:
        if not shapely.contains_xy(poly, x, y):
            continue
        for k, (depth, layer) in enumerate(zip(z, layers)):
            if depth < drains.depth_m and layer.ch:
                out[k] = float(drains.radial_rate(layer.ch))
        break                                 # the first zone holding the point applies
    return out


@dataclass(frozen=True)
class PointHistory:
    """The time behaviour of one settlement point: increments (S, K), the load states' days
    and durations (years), per-sublayer vertical and radial rates."""

    increments: np.ndarray
    start_yr: np.ndarray
    duration_yr: np.ndarray
    cv: np.ndarray
    h_dr: np.ndarray
    radial: np.ndarray

    def curve(self, years, states=None) -> np.ndarray:
        """Settlement (m) at `years`; `states` selects a subset of the load states."""
        sel = slice(None) if states is None else np.asarray(states)
        return st.settlement_time_curve(self.increments[sel], self.start_yr[sel], years,
                                        self.cv, self.h_dr, durations=self.duration_yr[sel],
                                        radial_rate=self.radial)

    def end_of_primary(self, layers) -> np.ndarray:
        """tp (years after loading) of each sublayer: stated, or U = 95 % (instant load)."""
        vertical = self.cv / self.h_dr**2
        out = np.empty(vertical.size)
        for k, layer in enumerate(layers):
            if layer.end_of_primary_yr is not None:
                out[k] = layer.end_of_primary_yr
            elif math.isinf(vertical[k]):
                out[k] = 1.0 / DAYS_PER_YEAR            # drains at once: a day
            else:
                out[k] = _end_of_primary_yr(float(vertical[k]), float(self.radial[k]))
        return out


@functools.lru_cache(maxsize=1024)
def _end_of_primary_yr(vertical: float, radial: float) -> float:
    """Years to U = 95 % under an instant load, for consolidation rates cv/H_dr² and
    8·ch/(de²·μ) (1/year): kept, as the sublayers of a layer and the points of a site
    share their rates."""
    return st.time_to_fraction(lambda t: st.ramp_degree(t, 0.0, vertical, radial),
                               U_END_OF_PRIMARY, 1.0, 1e4)


def sublayer_time_parameters(soil, z: np.ndarray):
    """cv (m²/year, inf = at once) and H_dr (m) of each sublayer, from its layer."""
    cv, hdr = st.time_parameters(soil, no_cv="immediate")
    idx = soil.layer_index(z)
    return cv[idx], hdr[idx]


def secondary(soil, z, h, path: st.StressPath, tp_years: np.ndarray, life_years: float) -> np.ndarray:
    """Secondary compression (m) of each sublayer at one point over the design life,
    S = Cα/(1+e_p)·h·log10(t/tp), Cα' = ratio·Cα where the sublayer ends below its past
    maximum (after a surcharge). `path` is the point's stress path (one point). Only
    sublayers the load took beyond σ'p (onto the virgin line; loaded at all, for linear
    layers) creep: in recompression secondary compression is taken as negligible (common
    practice), so a point the fill hardly loads gets none."""
    idx = soil.layer_index(z)
    strain = path.strain[0, -1]
    unloaded = path.sigma[0, -1] < path.sigma_max[0, -1] * (1 - 1e-9)
    virgin = path.sigma_max[0, -1] > np.where(path.is_index, path.sp, path.s0) * (1 + 1e-9)
    out = np.zeros(z.size)
    for k, i in enumerate(idx):
        layer = soil.layers[i]
        if not layer.has_secondary or not virgin[k]:
            continue
        ca = float(st.secondary_strain_index(layer, strain[k]))
        if unloaded[k]:
            ca *= layer.c_alpha_ratio_surcharged
        out[k] = float(st.secondary_compression(ca, h[k], life_years, tp_years[k]))
    return out
