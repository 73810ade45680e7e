"""The odds step of a run ([uncertainty]): the settlement, the building and pipe checks and
the utilisation of every settlement limit in force, recomputed for each Latin-hypercube
sample of the uncertain parameters (decide.odds).

The elastic Δσz of each body at the settlement points is the one the settlement step
computed (settle.SettlementColumns), scaled by the sample's factor on that body's unit
weight; the soil parameters and the water table change σ'v0, σ'p and the compressibility
but not Δσz (elastic stress does not depend on them). The settlement along the load history
is vectorised over a block of samples; with a Dask client the blocks run on its workers.

Per receptor: P10/P50/P90 of its settlement, differential settlement and distortion, and of
each settlement limit in force the probability of exceeding it (value > limit) with its
binomial standard error sqrt(p(1−p)/n) and the 95 % Wilson score interval; the estimate with
its interval after the first n samples is the convergence series.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from functools import partial
from typing import NamedTuple

import numpy as np
import pandas as pd

from ..decide.odds import (convergence, exceedance, sampled_load_states, sampled_profiles,
                           wilson_interval)
from ..settlement import drainage_path, final_settlement_of_profiles, time_factor
from ..solve.distributed import map_variants
from . import limits as lm
from .settle import run_checks, structure_plan

BLOCK = 50                     # samples per vectorised block (and per Dask task)
PERCENTILES = (0.10, 0.50, 0.90)
# per kind of receptor: quantity → field of its structures result (boreholes: the surface)
QUANTITIES = {"building": {"settlement": "settlement_max_m",
                           "differential_settlement": "differential_m",
                           "angular_distortion": "angular_distortion", "tilt": "tilt"},
              "pipe": {"settlement": "settlement_max_m",
                       "differential_settlement": "differential_max_m"},
              "borehole": {"settlement": None}}


class _Job(NamedTuple):
    """What a block of samples needs (small enough to send to Dask workers)."""

    soil: object
    columns: object            # settle.SettlementColumns
    checks: list               # settle.StructureCheck of the settlement points
    settings: object           # RunSettings: the limits in force
    boreholes: tuple           # (id, row of its surface point in the targets)
    quantities: tuple          # (kind, receptor id, quantity) in table order
    limits: tuple              # (kind, receptor id, limit label) in table order


@dataclass
class OddsResults:
    """Per sample (rows, in sampling order) of every receptor quantity and limit row, the
    nominal run's values, and the sampled parameters."""

    samples: int
    seed: int
    parameters: dict                    # name → sampled values (SI)
    quantities: tuple
    values: np.ndarray                  # (n, Q)
    nominal: dict                       # (kind, id, quantity) → value of the run
    limit_rows: tuple                   # (kind, id, label) → Limit in `limit_objects`
    utilisation: np.ndarray             # (n, L)
    limit_objects: dict = field(default_factory=dict)
    nominal_t90: dict = field(default_factory=dict)
    layer_t90_days: dict = field(default_factory=dict)   # layer → t90 per sample (cv sampled)
    uncertain: tuple = ()                                # site.uncertainty.UncertainParameter

    def table(self, units) -> pd.DataFrame:
        """odds.csv: one row per receptor, quantity and limit (a quantity without a limit:
        one row with no limit), values in the site's units."""
        rows = []
        for q, key in enumerate(self.quantities):
            kind, rid, quantity = key
            label, factor = lm.unit_of(quantity, units)
            col = self.values[:, q]
            ok = np.isfinite(col)
            pct = (np.quantile(col[ok], PERCENTILES) / factor if ok.sum() >= 2
                   else [np.nan] * 3)
            base = {"receptor_kind": kind, "receptor_id": rid, "quantity": quantity,
                    "unit": label, "nominal": self.nominal.get(key, np.nan) / factor,
                    "p10": pct[0], "p50": pct[1], "p90": pct[2]}
            limits = [(j, k) for j, k in enumerate(self.limit_rows)
                      if k[:2] == (kind, rid) and self.limit_objects[k].quantity == quantity]
            if not limits:
                rows.append(base | _no_limit())
            for j, k in limits:
                rows.append(base | self._exceedance(j, k, factor))
        for layer, t in self.layer_t90_days.items():
            rows.append({"receptor_kind": "soil layer", "receptor_id": layer,
                         "quantity": "t90", "unit": "days", "nominal": self.nominal_t90[layer],
                         **dict(zip(("p10", "p50", "p90"), np.quantile(t, PERCENTILES))),
                         **_no_limit()})
        out = pd.DataFrame(rows, columns=COLUMNS)
        return out.astype({"samples_over": "Int64", "samples": "Int64"})

    def likeliest(self, units) -> dict | None:
        """The limit row of odds.csv most likely exceeded (on equal odds, the one whose P90
        is nearest its limit); None without settlement limits."""
        t = self.table(units)
        t = t[t["limit"] != ""]
        if t.empty:
            return None
        order = t.assign(near=t["p90"] / t["limit_value"]).sort_values(
            ["p_exceed", "near"], ascending=False, kind="stable")
        return order.iloc[0].to_dict()

    def parameter_table(self, units) -> pd.DataFrame:
        """odds_parameters.csv: each uncertain parameter's distribution, its value in the
        site file and the P10/P50/P90 of its samples, in the site's units."""
        rows = []
        for p in self.uncertain:
            label, factor = p.unit(units)
            d = p.distribution
            uniform = d.kind == "uniform"
            rows.append({"parameter": p.name, "distribution": d.kind, "unit": label,
                         "mean": d.mean / factor, "sd": d.sd / factor,
                         "cov": d.sd / abs(d.mean) if d.mean else np.nan,
                         "low": d.low / factor if uniform else np.nan,
                         "high": d.high / factor if uniform else np.nan,
                         "site_value": p.nominal / factor,
                         **{k: v / factor for k, v in zip(
                             ("p10", "p50", "p90"),
                             np.quantile(self.parameters[p.name], PERCENTILES))}})
        return pd.DataFrame(rows, columns=["parameter", "distribution", "unit", "mean", "sd",
                                           "cov", "low", "high", "site_value", "p10", "p50",
                                           "p90"])

    def _exceedance(self, j: int, key, factor: float) -> dict:
        lim = self.limit_objects[key]
        u = self.utilisation[:, j]
        ok = np.isfinite(u)
        n = int(ok.sum())
        p, se = exceedance(u[ok], 1.0) if n >= 2 else (np.array([np.nan]), np.array([np.nan]))
        lo, hi = wilson_interval(p, n) if n >= 2 else (p, p)
        return {"limit": lim.label, "limit_value": lim.value / factor,
                "samples_over": int(np.sum(u[ok] > 1.0)), "samples": n,
                "p_exceed": float(p[0]), "standard_error": float(se[0]),
                "wilson_low": float(np.ravel(lo)[0]), "wilson_high": float(np.ravel(hi)[0]),
                "source": lim.source}

    def convergence_table(self) -> pd.DataFrame:
        """odds_convergence.csv: P(exceed) of each limit row and its 95 % Wilson interval
        after the first n samples."""
        out = []
        for j, (kind, rid, label) in enumerate(self.limit_rows):
            u = self.utilisation[:, j]
            u = u[np.isfinite(u)]
            if len(u) < 2:
                continue
            counts, p, _ = convergence(u, 1.0)
            lo, hi = wilson_interval(p[:, 0], counts)
            out += [{"receptor_kind": kind, "receptor_id": rid, "limit": label,
                     "samples": int(c), "p_exceed": float(pc), "wilson_low": float(a),
                     "wilson_high": float(b)} for c, pc, a, b in zip(counts, p[:, 0], lo, hi)]
        return pd.DataFrame(out, columns=["receptor_kind", "receptor_id", "limit", "samples",
                                          "p_exceed", "wilson_low", "wilson_high"])


COLUMNS = ["receptor_kind", "receptor_id", "quantity", "unit", "nominal", "p10", "p50", "p90",
           "limit", "limit_value", "samples_over", "samples", "p_exceed", "standard_error",
           "wilson_low", "wilson_high", "source"]


#: numeric columns of the odds tables: already in the site's units row by row
TABLE_QUANTITIES = dict.fromkeys(COLUMNS + ["mean", "sd", "cov", "low", "high",
                                            "site_value"], None)


def _no_limit() -> dict:
    return {"limit": "", "limit_value": np.nan, "samples_over": np.nan, "samples": np.nan,
            "p_exceed": np.nan, "standard_error": np.nan, "wilson_low": np.nan,
            "wilson_high": np.nan, "source": ""}


def odds_results(res, client=None) -> OddsResults | None:
    """The odds of a run after its settlement and limits steps (`res`: RunResults); None
    when the settlement step had no points."""
    site, cols = res.site, res.settlement_columns
    unc = site.settings.uncertainty
    if cols is None or unc is None:
        return None
    drawn = unc.draw()
    n = unc.samples
    soil_samples = unc.soil_samples(drawn)
    factors = np.ones((n, len(site.bodies)))
    index = {b.name: i for i, b in enumerate(site.bodies)}
    for p in unc.parameters:
        if p.body is not None:
            factors[:, index[p.body]] = drawn[p.name] / p.nominal
    targets = cols.targets
    holes = np.flatnonzero((targets["receptor_kind"] == "borehole").to_numpy())
    boreholes = tuple((str(targets["receptor_id"].iloc[k]), int(k)) for k in holes)
    nominal = _measures(res.buildings, res.pipes, boreholes,
                        targets["settlement"].to_numpy(float))
    found = res.limits.rows if res.limits is not None else ()
    settle_rows = [r for r in found if r.row.limit.quantity not in lm.POINT_QUANTITIES]
    limit_keys = tuple((r.kind, r.row.receptor_id, r.row.limit.label) for r in settle_rows)
    job = _Job(site.soil, cols, structure_plan(site, targets), site.settings, boreholes,
               tuple(nominal), limit_keys)
    blocks = [({k: v[a:a + BLOCK] for k, v in soil_samples.items()}, factors[a:a + BLOCK],
               min(BLOCK, n - a)) for a in range(0, n, BLOCK)]
    parts = map_variants(partial(_block, job), blocks, client)
    values = np.concatenate([v for v, _ in parts])
    util = np.concatenate([u for _, u in parts])
    out = OddsResults(n, unc.seed, drawn, tuple(nominal), values, nominal, limit_keys, util,
                      {k: r.row.limit for k, r in zip(limit_keys, settle_rows)},
                      uncertain=unc.parameters)
    out.layer_t90_days, out.nominal_t90 = _layer_times(site.soil, unc.parameters, drawn)
    return out


def _layer_times(soil, parameters, drawn) -> tuple[dict, dict]:
    """Time (days) to 90 % primary consolidation of each layer whose cv is sampled, per
    sample and at the site value (Terzaghi, vertical drainage: t = Tv·H_dr²/cv)."""
    layers = {lay.name: lay for lay in soil.layers}
    times, nominal = {}, {}
    for p in parameters:
        layer = layers.get(p.name.rpartition(".")[0])
        if p.parameter != "cv" or layer.top_m >= soil.rigid_base_m:
            continue
        base = soil.rigid_base_m if soil.rigid_base_m < layer.bottom_m else None
        days = time_factor(0.9) * drainage_path(layer, base) ** 2 * 365.25
        times[layer.name] = days / drawn[p.name]
        nominal[layer.name] = days / p.nominal
    return times, nominal


def _block(job: _Job, block) -> tuple[np.ndarray, np.ndarray]:
    """(values (b, Q), utilisation (b, L)) of one block of samples."""
    soil_samples, factors, size = block
    profiles = (sampled_profiles(job.soil, soil_samples) if soil_samples
                else [job.soil] * size)
    cols = job.columns
    settled = np.full((size, len(cols.targets)), np.nan)
    for idx, z, h, per_body in cols.groups:
        if z is None:
            settled[:, idx] = 0.0
            continue
        dsz = sampled_load_states(per_body, cols.active, factors)
        settled[:, idx] = final_settlement_of_profiles(profiles, z, h, dsz)
    values = np.full((size, len(job.quantities)), np.nan)
    util = np.full((size, len(job.limits)), np.nan)
    where_q = {k: i for i, k in enumerate(job.quantities)}
    where_l = {k: i for i, k in enumerate(job.limits)}
    for i in range(size):
        buildings, pipes = run_checks(job.checks, settled[i])
        for key, v in _measures(buildings, pipes, job.boreholes, settled[i]).items():
            if key in where_q:
                values[i, where_q[key]] = v
        for r in lm.check_receptors(job.settings, {}, buildings, pipes).rows:
            j = where_l.get((r.kind, r.row.receptor_id, r.row.limit.label))
            if j is not None:
                util[i, j] = r.row.utilisation
    return values, util


def _measures(buildings, pipes, boreholes, settlement: np.ndarray) -> dict:
    """{(kind, receptor id, quantity): value (SI)} of the structure checks and of the
    surface settlement at each borehole ((id, target row) pairs)."""
    out = {}
    for kind, results in (("building", buildings), ("pipe", pipes)):
        for r in results:
            for quantity, attr in QUANTITIES[kind].items():
                out[(kind, r.receptor_id, quantity)] = float(getattr(r, attr))
    for rid, row in boreholes:
        out[("borehole", rid, "settlement")] = float(settlement[row])
    return out
