"""Limits on what a fill may do to a receptor, and how much of each limit is used.

A :class:`Limit` names one quantity, its limiting value (SI) and the published source of
that value. ``utilisation = value / limit``: 1 means the limit is just reached. Quantities
carry the names the settlement checks already use (``structures.py``):

=========================  =====  ==========================================================
quantity                   unit   taken from
=========================  =====  ==========================================================
stress_increase            kPa    Δσz at a point
stress_ratio               –      Δσz / σ'v0 at a point
settlement                 m      ``settlement_max_m`` of a building or pipe
differential_settlement    m      building ``differential_m`` (whole building; a limit
                                  with ``length_m`` applies to pipes only); pipe: the
                                  largest differential within ``length_m`` (default the
                                  pipe's own ``differential_length_m``)
angular_distortion         –      building ``angular_distortion`` β (Burland & Wroth 1974)
tilt                       –      building ``tilt`` ω
pipe_curvature             1/m    pipe ``curvature_max_per_m``
=========================  =====  ==========================================================

Values are used signed: heave (negative settlement) and unloading give a negative
utilisation, which never governs a limit on downward movement or added stress.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Sequence

import numpy as np

from .._validate import finite_array, positive
from ..errors import InputError
from ..structures import (BJERRUM_1963_LIMITS, SKEMPTON_MACDONALD_1956_LIMITS,
                          BuildingSettlement, PipeSettlement, largest_differential_within)

QUANTITY_UNITS = {
    "stress_increase": "kPa",
    "stress_ratio": "1",
    "settlement": "m",
    "differential_settlement": "m",
    "angular_distortion": "1",
    "tilt": "1",
    "pipe_curvature": "1/m",
}
# quantity -> attribute of a structures result that holds it
_BUILDING_FIELDS = {"settlement": "settlement_max_m", "differential_settlement": "differential_m",
                    "angular_distortion": "angular_distortion", "tilt": "tilt"}
_PIPE_FIELDS = {"settlement": "settlement_max_m", "pipe_curvature": "curvature_max_per_m",
                "stress_increase": "dsz_crown_max_kpa"}


@dataclass(frozen=True)
class Limit:
    """One limit: a quantity (a key of `QUANTITY_UNITS`), its value in SI units and the text
    naming where the value comes from.

    Parameters
    ----------
    quantity : str
        One of ``QUANTITY_UNITS``.
    value : float
        Limiting value (> 0) in the quantity's unit (kPa, m, 1/m or a ratio).
    source : str
        The published limit this is, e.g. "Bjerrum (1963), safe limit where no cracking is
        acceptable", or "owner's requirement".
    length_m : float, optional
        For ``differential_settlement``: the length (m) over which it is judged along a pipe;
        such a limit does not apply to buildings (their differential is over the building).
    name : str, optional
        Short label for tables; default the quantity.

    Examples
    --------
    >>> lim = Limit("angular_distortion", 1 / 500, "Bjerrum (1963)")
    >>> lim.unit, lim.label
    ('1', 'angular_distortion')
    >>> Limit("settlement", -0.05)
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument value: must be positive and finite, got -0.05
    """

    quantity: str
    value: float
    source: str = ""
    length_m: float | None = None
    name: str = ""

    def __post_init__(self):
        if self.quantity not in QUANTITY_UNITS:
            raise InputError(f"must be one of {', '.join(QUANTITY_UNITS)}, got {self.quantity!r}",
                             argument="quantity")
        object.__setattr__(self, "value", positive(self.value, "value"))
        if self.length_m is not None:
            if self.quantity != "differential_settlement":
                raise InputError("is only used with differential_settlement", argument="length_m")
            object.__setattr__(self, "length_m", positive(self.length_m, "length_m"))

    @property
    def unit(self) -> str:
        """Unit of `value` ("1" for a ratio)."""
        return QUANTITY_UNITS[self.quantity]

    @property
    def label(self) -> str:
        """`name`, or the quantity when no name is given."""
        return self.name or self.quantity


# Published limits for framed buildings, as reproduced in standard foundation texts (the
# angular distortions are the ones structures.py checks; the rest recalled from memory).
BUILDING_LIMITS = (
    Limit("angular_distortion", BJERRUM_1963_LIMITS["no_cracking"],
          "Bjerrum (1963): safe limit for buildings where no cracking is acceptable",
          name="beta_no_cracking"),
    Limit("angular_distortion", SKEMPTON_MACDONALD_1956_LIMITS["sm_cracking"],
          "Skempton & MacDonald (1956): cracking of panel walls and partitions (recalled "
          "from memory)", name="beta_cracking"),
    Limit("tilt", 1.0 / 250.0, "Bjerrum (1963): tilt of tall rigid buildings becomes "
          "visible (recalled from memory)", name="tilt_visible"),
    Limit("settlement", 0.065, "Skempton & MacDonald (1956): maximum settlement of "
          "isolated foundations on clay, 65 mm (recalled from memory)", name="settlement_max"),
    Limit("differential_settlement", 0.040, "Skempton & MacDonald (1956): maximum "
          "differential settlement of foundations on clay, 40 mm (recalled from memory)",
          name="differential_max"),
)


def utilisation(value, limit):
    """Utilisation ``value / limit`` (dimensionless; 1 = the limit is reached).

    Parameters
    ----------
    value : float or array_like
        The result, in the limit's unit; signed (heave or unloading gives < 0).
    limit : Limit, float or array_like
        A :class:`Limit` or limiting value(s) > 0, broadcast against `value`.

    Returns
    -------
    float or numpy.ndarray

    Examples
    --------
    >>> utilisation(0.003, Limit("angular_distortion", 1 / 500))
    1.5
    >>> utilisation([10.0, 30.0], [20.0, 20.0]).tolist()
    [0.5, 1.5]
    """
    v = finite_array(value, "value")
    lim = finite_array(limit.value if isinstance(limit, Limit) else limit, "limit")
    if np.any(lim <= 0):
        raise InputError("must be > 0", argument="limit")
    out = v / lim
    return float(out) if out.ndim == 0 else out


def measure(result, limit: Limit) -> float | None:
    """The value of `limit`'s quantity for one receptor's result, or None when that receptor
    has no such quantity (e.g. tilt of a pipe).

    Parameters
    ----------
    result : BuildingSettlement, PipeSettlement or mapping
        A structures result, or a mapping quantity -> value (e.g. a borehole's
        ``{"stress_ratio": 0.12, "settlement": 0.04}``).
    limit : Limit

    Examples
    --------
    >>> from fillstress.structures import pipe_settlement
    >>> p = pipe_settlement("main", [0, 5, 10, 15], [0.0, 0.01, 0.05, 0.06], [5, 5, 5, 5], 15.0)
    >>> measure(p, Limit("differential_settlement", 0.02, length_m=5.0))   # 0.05 − 0.01
    0.04
    >>> measure({"stress_ratio": 0.12}, Limit("tilt", 0.004)) is None
    True
    """
    if isinstance(result, Mapping):
        value = result.get(limit.quantity)
        return None if value is None else float(finite_array(value, limit.quantity))
    if isinstance(result, PipeSettlement):
        if limit.quantity == "differential_settlement":
            if result.n_points < 2:
                return 0.0
            length = limit.length_m or result.differential_length_m
            return largest_differential_within(result.chainage_m, result.settlement_m, length)[0]
        field = _PIPE_FIELDS.get(limit.quantity)
    elif isinstance(result, BuildingSettlement):
        if limit.quantity == "differential_settlement" and limit.length_m is not None:
            return None             # judged over a length: a pipe's limit, not a building's
        field = _BUILDING_FIELDS.get(limit.quantity)
    else:
        raise InputError("must be a BuildingSettlement, PipeSettlement or a mapping of "
                         f"quantity to value, got {type(result).__name__}", argument="result")
    return None if field is None else float(getattr(result, field))


@dataclass(frozen=True)
class UtilisationRow:
    """One receptor against one limit: the value, the limit and value ÷ limit."""

    receptor_id: str
    limit: Limit
    value: float
    utilisation: float

    def as_row(self) -> dict:
        """A flat dict for one CSV row."""
        return {"receptor_id": self.receptor_id, "limit": self.limit.label,
                "quantity": self.limit.quantity, "unit": self.limit.unit, "value": self.value,
                "limit_value": self.limit.value, "utilisation": self.utilisation,
                "source": self.limit.source}


@dataclass(frozen=True)
class LimitCheck:
    """Every (receptor, limit) utilisation, and the row with the largest (the governing
    receptor and limit; None when no limit applied to any receptor)."""

    rows: tuple[UtilisationRow, ...]
    governing: UtilisationRow | None

    def as_rows(self) -> list[dict]:
        """Rows as dicts, each with ``governing`` True on the governing row."""
        return [{**r.as_row(), "governing": r is self.governing} for r in self.rows]


def limits_for(receptor_id: str, limits: Sequence[Limit],
               overrides: Mapping[str, Sequence[Limit]] | None = None) -> tuple[Limit, ...]:
    """The limits in force at one receptor: `limits`, with every quantity that
    ``overrides[receptor_id]`` names replaced by the override's limits.

    Examples
    --------
    >>> base = [Limit("settlement", 0.05), Limit("tilt", 0.004)]
    >>> [l.value for l in limits_for("shed", base, {"shed": [Limit("settlement", 0.1)]})]
    [0.004, 0.1]
    """
    own = tuple((overrides or {}).get(receptor_id, ()))
    for lim in (*limits, *own):
        if not isinstance(lim, Limit):
            raise InputError(f"must hold Limit objects, got {type(lim).__name__}",
                             argument="limits")
    replaced = {lim.quantity for lim in own}
    return tuple(lim for lim in limits if lim.quantity not in replaced) + own


def check_limits(results: Mapping[str, object], limits: Sequence[Limit],
                 overrides: Mapping[str, Sequence[Limit]] | None = None) -> LimitCheck:
    """Utilisation of every limit at every receptor, and the governing one.

    Parameters
    ----------
    results : mapping receptor id -> result
        Each a BuildingSettlement, PipeSettlement or a mapping quantity -> value (SI units).
    limits : sequence of Limit
        Limits for every receptor that has their quantity.
    overrides : mapping receptor id -> sequence of Limit, optional
        Per-receptor limits; each replaces the general limits of the same quantity there.

    Returns
    -------
    LimitCheck
        Rows in receptor order, then limit order; the governing row has the largest
        utilisation (the first of equals).

    Examples
    --------
    >>> lims = [Limit("stress_ratio", 0.2, "owner's requirement")]
    >>> c = check_limits({"BH1": {"stress_ratio": 0.1}, "BH2": {"stress_ratio": 0.25}}, lims)
    >>> [round(r.utilisation, 3) for r in c.rows], c.governing.receptor_id
    ([0.5, 1.25], 'BH2')
    """
    if not isinstance(results, Mapping):
        raise InputError("must map receptor ids to results", argument="results")
    rows = []
    for rid, result in results.items():
        for lim in limits_for(str(rid), limits, overrides):
            value = measure(result, lim)
            if value is not None:
                rows.append(UtilisationRow(str(rid), lim, value, value / lim.value))
    governing = max(rows, key=lambda r: r.utilisation) if rows else None
    return LimitCheck(tuple(rows), governing)
