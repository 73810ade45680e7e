"""The uncertain parameters of a site ([uncertainty] of the site file), typed: each a
distribution (decide.odds) on a soil parameter of one layer, a fill body's unit weight or
the water table, named as the correlations name it."""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..decide.odds import (Distribution, correlation_matrix, latin_hypercube, lognormal, normal,
                           sampled_profiles, uniform)
from ..errors import InputError
from .schema import UNCERTAIN_UNITS

# site-file parameter → SoilLayer field(s) it replaces
LAYER_FIELDS = {"cc": "cc", "cr": "cr", "e0": "e0", "sigma_p": "sigma_p_kpa", "ocr": "ocr",
                "cv": "cv_m2_per_yr", "mv": "mv_per_kpa", "modulus": "modulus_kpa",
                "unit_weight": "unit_weight", "saturated_unit_weight": "saturated_unit_weight"}
WATER_TABLE = "water_table"
# schema unit kind of a parameter → units.UnitSystem quantity (None: a ratio)
_UNIT_QUANTITY = {"": None, "length": "length", "pressure": "pressure",
                  "unit_weight": "unit_weight", "1/pressure": "compressibility",
                  "length2/time": "consolidation"}
# smallest value each parameter may take (exclusive; ocr >= 1 and the water table >= 0)
_FLOOR = {"ocr": (1.0, False), WATER_TABLE: (0.0, False)}


@dataclass(frozen=True)
class UncertainParameter:
    """One sampled parameter: ``name`` ("firm clay.cc", "ore_east.unit_weight",
    "water_table"), its distribution (SI), its value in the site file, and what it
    replaces: ``soil_keys`` for decide.odds.profile_with ("<layer>.<SoilLayer field>",
    "water_table_m"), or the ``body`` whose load it scales (γ / nominal γ)."""

    name: str
    parameter: str
    distribution: Distribution
    nominal: float
    soil_keys: tuple[str, ...] = ()
    body: str | None = None
    key: str = ""                 # where it is given in the site file, for messages

    def unit(self, units) -> tuple[str, float]:
        """(label, SI value of one unit) of this parameter in the site's unit system."""
        q = _UNIT_QUANTITY[UNCERTAIN_UNITS[self.parameter]]
        return units.unit(q) if q else ("1", 1.0)


@dataclass(frozen=True)
class Uncertainty:
    """[uncertainty]: the sampled parameters, their rank correlations, the number of
    samples and the seed."""

    parameters: tuple[UncertainParameter, ...] = ()
    correlations: dict = field(default_factory=dict)     # (name, name) → coefficient
    samples: int = 400
    seed: int = 0

    def draw(self) -> dict[str, np.ndarray]:
        """The Latin-hypercube samples of every parameter by name (SI); out-of-range
        values (a normal reaching below zero) are refused naming the parameter."""
        if not self.parameters:
            return {}
        values = latin_hypercube({p.name: p.distribution for p in self.parameters},
                                 self.samples, self.seed, self.correlations or None)
        for p in self.parameters:
            low, strict = _FLOOR.get(p.parameter, (0.0, True))
            bad = int(np.sum(values[p.name] <= low if strict else values[p.name] < low))
            if bad:
                raise InputError(f"{bad} of {self.samples} samples of {p.name} are "
                                 f"{'≤' if strict else '<'} {low:g}: this "
                                 f"{p.distribution.kind} distribution reaches values the "
                                 "parameter cannot take; use a lognormal (or bounds) or a "
                                 "smaller spread", key=p.key)
        return values

    def soil_samples(self, drawn: dict) -> dict[str, np.ndarray]:
        """The drawn values keyed as decide.odds.profile_with takes them."""
        return {k: drawn[p.name] for p in self.parameters for k in p.soil_keys}

    def soil_profiles(self, soil, drawn: dict) -> list:
        """One soil profile per sample (the nominal one when no soil parameter is
        uncertain); a sample the soil model refuses (Cr above Cc) is named."""
        samples = self.soil_samples(drawn)
        return sampled_profiles(soil, samples) if samples else [soil] * self.samples

    def describe(self, units) -> list[list[str]]:
        """[where, text] rows for `fillstress check`."""
        rows = [["uncertainty", f"{self.samples} Latin-hypercube samples, seed {self.seed}"]]
        for p in self.parameters:
            d, (label, f) = p.distribution, p.unit(units)
            unit = "" if label == "1" else f" {label}"
            spread = (f"uniform {d.low / f:.4g} … {d.high / f:.4g}{unit}" if d.kind == "uniform"
                      else f"{d.kind}, mean {d.mean / f:.4g}{unit}, COV {d.sd / abs(d.mean):.3g}")
            rows.append([f"uncertain: {p.name}", f"{spread} (site value {p.nominal / f:.4g})"])
        rows += [[f"correlated: {a} ~ {b}", f"rank correlation {rho:g}"]
                 for (a, b), rho in self.correlations.items()]
        return rows


def build_uncertainty(raw: dict | None, soil, body_weights: dict, given_saturated: dict,
                      where_file, *, draw_samples: bool = True) -> Uncertainty | None:
    """The typed [uncertainty] of a validated site file (SI); `body_weights` maps each body
    to its unit weight, `given_saturated` each layer to whether its file gives a saturated
    unit weight. The samples are drawn and checked here unless `draw_samples` is False."""
    if raw is None:
        return None
    if soil is None:
        raise InputError("needs a [soil] profile: the odds are of settlement limits",
                         file=where_file, key="uncertainty")
    params = tuple(_parameter(p, f"uncertainty.parameters[{i}]", soil, body_weights,
                              given_saturated, where_file)
                   for i, p in enumerate(raw["parameters"]))
    names = [p.name for p in params]
    for i, name in enumerate(names):
        if name in names[:i]:
            raise InputError(f"{name} is given twice", file=where_file,
                             key=f"uncertainty.parameters[{i}]")
    out = Uncertainty(params, _correlations(raw["correlations"], names, where_file),
                      int(raw["samples"]), int(raw["seed"]))
    if not draw_samples:
        return out
    try:                 # refused now, not after the stresses: the samples are seeded
        out.soil_profiles(soil, out.draw())
    except InputError as err:
        hint = "" if err.key else ("; the soil model refuses this sample: narrow the "
                                   "distributions or state a correlation")
        raise InputError(err.reason + hint, file=where_file,
                         key=err.key or "uncertainty") from None
    return out


def _parameter(raw, where, soil, body_weights, given_saturated, path) -> UncertainParameter:
    what, layer, body = raw["parameter"], raw.get("layer"), raw.get("body")

    def fail(key, reason):
        raise InputError(reason, file=path, key=f"{where}.{key}")

    if what == WATER_TABLE:
        if layer or body:
            fail("layer" if layer else "body", "the water table belongs to no layer or body")
        name, nominal, soil_keys, target = WATER_TABLE, soil.water_table_m, ("water_table_m",), None
    elif body is not None:
        if layer:
            fail("layer", "give a layer or a body, not both")
        if what != "unit_weight":
            fail("parameter", f"a fill body's uncertain parameter is its unit_weight, got {what!r}")
        if body not in body_weights:
            fail("body", f"no body is named {body!r}; bodies are {', '.join(body_weights)}")
        name, nominal, soil_keys, target = f"{body}.unit_weight", body_weights[body], (), body
    else:
        layers = {lay.name: lay for lay in soil.layers}
        if layer is None:
            fail("layer", f"{what} is a soil parameter: name its layer (or a body for a "
                          "fill unit weight)")
        if layer not in layers:
            fail("layer", f"no soil layer is named {layer!r}; layers are {', '.join(layers)}")
        nominal = getattr(layers[layer], LAYER_FIELDS[what])
        if nominal is None:
            fail("parameter", f"layer {layer!r} has no {what} in the site file: only a value "
                              "it uses can be uncertain")
        fields = [LAYER_FIELDS[what]]
        if what == "unit_weight" and not given_saturated.get(layer):
            fields.append("saturated_unit_weight")          # it stands for both
        name, target = f"{layer}.{what}", None
        soil_keys = tuple(f"{layer}.{f}" for f in fields)
    mean = nominal if raw.get("mean") is None else raw["mean"]
    try:
        dist = _distribution(raw, float(mean))
    except InputError as err:
        fail((err.argument or "distribution").rpartition(".")[2], err.reason)
    return UncertainParameter(name, what, dist, float(nominal), soil_keys, target, where)


def _distribution(raw, mean: float) -> Distribution:
    kind, cov, sd, low, high = (raw["distribution"], raw.get("cov"), raw.get("sd"),
                                raw.get("low"), raw.get("high"))
    bounds = low is not None or high is not None
    if kind == "uniform":
        if sd is not None:
            raise InputError("a uniform distribution takes low and high, or cov", argument="sd")
        if bounds and raw.get("mean") is not None:
            raise InputError("give low and high, or mean and cov, not both", argument="mean")
        return (uniform(low, high, name="distribution") if bounds or cov is None
                else uniform(mean=mean, cov=cov, name="distribution"))
    if bounds:
        raise InputError(f"bounds belong to a uniform distribution, not a {kind} one",
                         argument="low" if low is not None else "high")
    if kind == "lognormal":
        if sd is not None:
            raise InputError("a lognormal distribution takes cov (sd / mean)", argument="sd")
        if cov is None:
            raise InputError("a lognormal distribution needs cov", argument="cov")
        return lognormal(mean, cov, name="distribution")
    if cov is not None and sd is not None:
        raise InputError("give cov or sd, not both", argument="sd")
    if cov is None and sd is None:
        raise InputError("a normal distribution needs cov or sd", argument="cov")
    return normal(mean, cov, sd=sd, name="distribution")


def _correlations(entries, names: list[str], path) -> dict:
    out = {}
    for i, c in enumerate(entries):
        where = f"uncertainty.correlations[{i}]"
        pair = c["between"]
        if len(pair) != 2 or pair[0] == pair[1]:
            raise InputError(f"must name two different parameters, got {pair!r}", file=path,
                             key=f"{where}.between")
        for name in pair:
            if name not in names:
                raise InputError(f"{name!r} is not an uncertain parameter; they are "
                                 f"{', '.join(names) or 'none'}", file=path, key=f"{where}.between")
        rho = c["coefficient"]
        if not (-1.0 < rho < 1.0) or not math.isfinite(rho):
            raise InputError(f"must lie strictly between -1 and 1, got {rho:g}", file=path,
                             key=f"{where}.coefficient")
        out[tuple(pair)] = rho
    try:
        correlation_matrix(names, out)
    except InputError as err:
        raise InputError(err.reason, file=path, key="uncertainty.correlations") from None
    return out
