"""Soil layers, the water table and the in-situ (geostatic) stresses.

Depth ``z`` is in metres, positive downward below the existing ground surface. Unit weights
are in kN/m³, stresses in kPa. The pore pressure is hydrostatic below a single water table
(no perched water, no artesian pressure, no water above the ground surface).

A layer's compressibility is given in exactly one of four ways (its ``kind``):

``"index"``
    compression index ``cc``, recompression (swelling) index ``cr``, initial void ratio
    ``e0`` and either the preconsolidation pressure ``sigma_p_kpa`` (constant over the
    layer) or the overconsolidation ratio ``ocr`` (σ'p = OCR · σ'v0 at each depth);
``"mv"``
    coefficient of volume compressibility ``mv_per_kpa`` (1/kPa);
``"modulus"``
    constrained (oedometer) modulus ``modulus_kpa`` (kPa), settlement h·Δσ/M;
``"incompressible"``
    ``incompressible=True``: the layer carries load but does not settle (rock, dense gravel).

Beyond primary loading a layer may carry: an unloading/reloading modulus (``mv``/``modulus``
layers; index layers unload and reload on ``cr``), a secondary compression index (``c_alpha``
with ``e0``, or ``c_alpha_eps`` = Cα/(1+e0) directly) with a reduced ratio after surcharging,
a horizontal coefficient of consolidation ``ch_m2_per_yr`` for vertical drains, and a stated
end of primary consolidation ``end_of_primary_yr``.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, fields
from typing import Sequence

import numpy as np

from ._validate import finite, finite_array, positive
from .errors import InputError

DRAINAGE_KINDS = ("double", "single", "single-top", "single-bottom")
_INDEX_KEYS = ("cc", "cr", "e0", "sigma_p_kpa", "ocr")
_BOUNDARY_TOL_M = 1e-6   # layer boundaries closer than a micrometre are taken as equal


def _layer_error(name: str, key: str, reason: str) -> InputError:
    return InputError(reason, key=f"layers.{name}.{key}")


def _number(name: str, key: str, value, *, minimum=None, strict=True) -> float | None:
    """A finite float (or None), optionally above `minimum`; error names layer and key."""
    if value is None:
        return None
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise _layer_error(name, key, f"must be a number, got {value!r}") from None
    if not math.isfinite(v):
        raise _layer_error(name, key, f"must be finite, got {value!r}")
    if minimum is not None and (v <= minimum if strict else v < minimum):
        op = ">" if strict else ">="
        raise _layer_error(name, key, f"must be {op} {minimum:g}, got {v:g}")
    return v


@dataclass(frozen=True)
class SoilLayer:
    """One horizontal soil layer between two depths.

    Parameters
    ----------
    name : str
        Label used in messages and per-layer results; unique within a profile.
    top_m, bottom_m : float
        Depths (m) of the top and bottom of the layer, ``bottom_m > top_m >= 0``.
    unit_weight : float
        Unit weight above the water table, kN/m³.
    saturated_unit_weight : float, optional
        Unit weight below the water table, kN/m³; defaults to `unit_weight`.
    cc, cr, e0 : float, optional
        Compression index, recompression (swelling) index (``0 < cr <= cc``) and initial
        void ratio (``e0 > 0``) for an ``"index"`` layer.
    sigma_p_kpa, ocr : float, optional
        Preconsolidation pressure σ'p (kPa) or overconsolidation ratio (>= 1), exactly one
        of them for an ``"index"`` layer. OCR = 1 is a normally consolidated layer.
    mv_per_kpa : float, optional
        Coefficient of volume compressibility (1/kPa) for an ``"mv"`` layer.
    modulus_kpa : float, optional
        Constrained modulus M (kPa) for a ``"modulus"`` layer.
    incompressible : bool
        True for a layer that does not settle.
    cv_m2_per_yr : float, optional
        Coefficient of consolidation (m²/year) for the time rate.
    drainage : str
        ``"double"`` (drains at top and bottom) or ``"single"`` (one face drains;
        ``"single-top"``/``"single-bottom"`` say which, and give the same average degree of
        consolidation for a uniform initial excess pore pressure).
    unloading_modulus_kpa : float, optional
        Constrained modulus (kPa) for unloading and reloading below the largest past
        effective stress, ``"mv"`` and ``"modulus"`` layers; default the loading value.
    c_alpha, c_alpha_eps : float, optional
        Secondary compression: Cα = Δe per log cycle of time (index layers; divided by
        1 + e_p, the void ratio at the end of primary consolidation), or Cα/(1+e0) directly
        (any compressible layer). At most one.
    c_alpha_ratio_surcharged : float
        Cα'/Cα (0 < ratio <= 1) where the layer ends below its largest past effective stress
        (after a surcharge is removed); a user value following Mesri's Cα/Cc concept. Default 1.
    ch_m2_per_yr : float, optional
        Horizontal coefficient of consolidation (m²/year) for radial flow to vertical drains;
        default `cv_m2_per_yr`.
    end_of_primary_yr : float, optional
        Time (years after loading) of the end of primary consolidation for secondary
        compression; default the time at which the layer reaches U = 95 %.

    Examples
    --------
    >>> clay = SoilLayer("grey clay", 2.0, 8.0, 17.0, 17.5, cc=0.45, cr=0.06, e0=1.2, ocr=1.0)
    >>> clay.kind, clay.thickness_m, clay.mid_depth_m
    ('index', 6.0, 5.0)
    >>> SoilLayer("sand", 0.0, 2.0, 18.0, modulus_kpa=25000).kind
    'modulus'
    """

    name: str
    top_m: float
    bottom_m: float
    unit_weight: float
    saturated_unit_weight: float | None = None
    cc: float | None = None
    cr: float | None = None
    e0: float | None = None
    sigma_p_kpa: float | None = None
    ocr: float | None = None
    mv_per_kpa: float | None = None
    modulus_kpa: float | None = None
    incompressible: bool = False
    cv_m2_per_yr: float | None = None
    drainage: str = "double"
    unloading_modulus_kpa: float | None = None
    c_alpha: float | None = None
    c_alpha_eps: float | None = None
    c_alpha_ratio_surcharged: float = 1.0
    ch_m2_per_yr: float | None = None
    end_of_primary_yr: float | None = None

    def __post_init__(self):
        name = str(self.name)
        if not name.strip():
            raise InputError("every layer needs a non-empty name", key="layers.name")
        object.__setattr__(self, "name", name)
        top = _number(name, "top_m", self.top_m, minimum=0.0, strict=False)
        bottom = _number(name, "bottom_m", self.bottom_m)
        if top is None or bottom is None:
            raise _layer_error(name, "top_m/bottom_m", "top and bottom depths are required")
        if bottom - top <= 0:
            raise _layer_error(name, "bottom_m", f"thickness must be positive: bottom {bottom:g} m "
                               f"is not below top {top:g} m (thickness {bottom - top:g} m)")
        gamma = _number(name, "unit_weight", self.unit_weight, minimum=0.0)
        if gamma is None:
            raise _layer_error(name, "unit_weight", "is required (kN/m³)")
        gamma_sat = _number(name, "saturated_unit_weight", self.saturated_unit_weight, minimum=0.0)
        for key, value in (("top_m", top), ("bottom_m", bottom), ("unit_weight", gamma),
                           ("saturated_unit_weight", gamma if gamma_sat is None else gamma_sat)):
            object.__setattr__(self, key, value)
        self._check_compressibility(name)
        cv = _number(name, "cv_m2_per_yr", self.cv_m2_per_yr, minimum=0.0)
        object.__setattr__(self, "cv_m2_per_yr", cv)
        if self.drainage not in DRAINAGE_KINDS:
            raise _layer_error(name, "drainage", f"must be one of {', '.join(DRAINAGE_KINDS)}; "
                               f"got {self.drainage!r}")
        self._check_time_effects(name)

    def _check_time_effects(self, name: str) -> None:
        """Unloading modulus, secondary compression and radial consolidation parameters."""
        for key in ("unloading_modulus_kpa", "c_alpha", "c_alpha_eps", "ch_m2_per_yr",
                    "end_of_primary_yr"):
            object.__setattr__(self, key, _number(name, key, getattr(self, key), minimum=0.0))
        if self.unloading_modulus_kpa is not None and self._kind not in ("mv", "modulus"):
            raise _layer_error(name, "unloading_modulus_kpa", "applies to mv and modulus layers; "
                               "index layers unload and reload on cr")
        if self.c_alpha is not None and self.c_alpha_eps is not None:
            raise _layer_error(name, "c_alpha", "give c_alpha or c_alpha_eps, not both")
        if self.c_alpha is not None and self._kind != "index":
            raise _layer_error(name, "c_alpha", "needs the void ratio of an index layer (cc, cr, "
                               "e0); give c_alpha_eps = Cα/(1+e0) for an mv or modulus layer")
        if (self.c_alpha is not None or self.c_alpha_eps is not None) and not self.compressible:
            raise _layer_error(name, "c_alpha", "an incompressible layer has no secondary compression")
        ratio = _number(name, "c_alpha_ratio_surcharged", self.c_alpha_ratio_surcharged, minimum=0.0)
        if ratio > 1.0:
            raise _layer_error(name, "c_alpha_ratio_surcharged", f"Cα'/Cα must lie in (0, 1], "
                               f"got {ratio:g}: a surcharge does not raise the secondary rate")
        object.__setattr__(self, "c_alpha_ratio_surcharged", ratio)

    def _check_compressibility(self, name: str) -> None:
        given = {"index": [k for k in _INDEX_KEYS if getattr(self, k) is not None],
                 "mv": ["mv_per_kpa"] if self.mv_per_kpa is not None else [],
                 "modulus": ["modulus_kpa"] if self.modulus_kpa is not None else [],
                 "incompressible": ["incompressible"] if self.incompressible else []}
        kinds = [k for k, keys in given.items() if keys]
        if not kinds:
            raise _layer_error(name, "compressibility", "missing: give cc, cr, e0 with sigma_p_kpa "
                               "or ocr; or mv_per_kpa; or modulus_kpa; or incompressible = true")
        if len(kinds) > 1:
            mixed = "; ".join(", ".join(given[k]) for k in kinds)
            raise _layer_error(name, "compressibility", f"give one kind only, got a mix of {mixed}")
        object.__setattr__(self, "_kind", kinds[0])
        if kinds[0] == "index":
            self._check_index(name)
        elif kinds[0] == "mv":
            object.__setattr__(self, "mv_per_kpa", _number(name, "mv_per_kpa", self.mv_per_kpa, minimum=0.0))
        elif kinds[0] == "modulus":
            object.__setattr__(self, "modulus_kpa", _number(name, "modulus_kpa", self.modulus_kpa, minimum=0.0))

    def _check_index(self, name: str) -> None:
        missing = [k for k in ("cc", "cr", "e0") if getattr(self, k) is None]
        if missing:
            raise _layer_error(name, missing[0], f"missing: an index layer needs cc, cr and e0 "
                               f"(missing {', '.join(missing)})")
        cc = _number(name, "cc", self.cc, minimum=0.0)
        cr = _number(name, "cr", self.cr, minimum=0.0)
        e0 = _number(name, "e0", self.e0)
        if e0 <= 0:
            raise _layer_error(name, "e0", f"initial void ratio must be > 0, got {e0:g}")
        if cr > cc:
            raise _layer_error(name, "cr", f"recompression index cr = {cr:g} exceeds the "
                               f"compression index cc = {cc:g}")
        if (self.sigma_p_kpa is None) == (self.ocr is None):
            raise _layer_error(name, "sigma_p_kpa/ocr", "give exactly one of sigma_p_kpa and ocr "
                               "(ocr = 1 for a normally consolidated layer)")
        sigma_p = _number(name, "sigma_p_kpa", self.sigma_p_kpa, minimum=0.0)
        ocr = _number(name, "ocr", self.ocr)
        if ocr is not None and ocr < 1.0:
            raise _layer_error(name, "ocr", f"OCR = {ocr:g} is below 1 (underconsolidated); "
                               "this tool needs OCR >= 1, with 1 for a normally consolidated layer")
        for key, value in (("cc", cc), ("cr", cr), ("e0", e0), ("sigma_p_kpa", sigma_p), ("ocr", ocr)):
            object.__setattr__(self, key, value)

    @property
    def kind(self) -> str:
        """How compressibility is given: 'index', 'mv', 'modulus' or 'incompressible'."""
        return self._kind

    @property
    def thickness_m(self) -> float:
        """Thickness of the layer, m."""
        return self.bottom_m - self.top_m

    @property
    def mid_depth_m(self) -> float:
        """Depth of the middle of the layer, m."""
        return 0.5 * (self.top_m + self.bottom_m)

    @property
    def compressible(self) -> bool:
        """Whether the layer settles (any kind but incompressible)."""
        return self._kind != "incompressible"

    @property
    def double_drained(self) -> bool:
        """Whether both faces of the layer drain."""
        return self.drainage == "double"

    @property
    def ch(self) -> float | None:
        """Horizontal coefficient of consolidation, m²/year (default cv)."""
        return self.cv_m2_per_yr if self.ch_m2_per_yr is None else self.ch_m2_per_yr

    @property
    def has_secondary(self) -> bool:
        """Whether a secondary compression coefficient is given."""
        return self.c_alpha is not None or self.c_alpha_eps is not None


class SoilProfile:
    """Layers from the ground surface down, a water table and an optional rigid base.

    Parameters
    ----------
    layers : sequence of SoilLayer
        Top-down, contiguous: the first starts at 0 m, each starts where the previous ends.
    water_table_m : float
        Depth of the water table (m, >= 0; may be below the last layer).
    rigid_base_m : float, optional
        Depth below which nothing settles; defaults to the bottom of the last layer.
    gamma_w : float
        Unit weight of water, kN/m³.

    Examples
    --------
    >>> p = SoilProfile([SoilLayer("fill", 0, 2, 18.0, modulus_kpa=20000),
    ...                  SoilLayer("clay", 2, 10, 16.0, 17.0, cc=0.4, cr=0.05, e0=1.1, ocr=1.0)],
    ...                 water_table_m=1.0, gamma_w=10.0)
    >>> p.sigma_v0([1.0, 2.0, 4.0]).tolist()      # 18; 18 + 18; 36 + 2·17
    [18.0, 36.0, 70.0]
    >>> p.u0([1.0, 2.0, 4.0]).tolist()
    [0.0, 10.0, 30.0]
    >>> p.sigma_v0_eff([1.0, 2.0, 4.0]).tolist()
    [18.0, 26.0, 40.0]
    """

    def __init__(self, layers: Sequence[SoilLayer], water_table_m: float,
                 rigid_base_m: float | None = None, gamma_w: float = 9.81):
        self.layers = tuple(layers)
        self._check_layers()
        self.gamma_w = positive(gamma_w, "gamma_w")
        self.water_table_m = self._water_table(water_table_m)
        self.rigid_base_m = self._rigid_base(rigid_base_m)
        self._build_stress_table()
        self._check_saturated_weights()
        self._check_preconsolidation()

    # --- validation -------------------------------------------------------------------
    def _check_layers(self) -> None:
        if not self.layers:
            raise InputError("a soil profile needs at least one layer", argument="layers")
        for layer in self.layers:
            if not isinstance(layer, SoilLayer):
                raise InputError(f"every item must be a SoilLayer, got {type(layer).__name__}",
                                 argument="layers")
        names = [layer.name for layer in self.layers]
        dupes = sorted({n for n in names if names.count(n) > 1})
        if dupes:
            raise InputError(f"layer names must be unique, repeated: {', '.join(dupes)}", argument="layers")
        first = self.layers[0]
        if abs(first.top_m) > _BOUNDARY_TOL_M:
            raise _layer_error(first.name, "top_m", f"the first layer must start at the ground "
                               f"surface (0 m), got {first.top_m:g} m")
        for above, below in zip(self.layers, self.layers[1:]):
            step = below.top_m - above.bottom_m
            if step > _BOUNDARY_TOL_M:
                raise _layer_error(below.name, "top_m", f"gap of {step:g} m: starts at {below.top_m:g} m "
                                   f"but layer {above.name!r} ends at {above.bottom_m:g} m")
            if step < -_BOUNDARY_TOL_M:
                raise _layer_error(below.name, "top_m", f"overlap of {-step:g} m: starts at "
                                   f"{below.top_m:g} m but layer {above.name!r} ends at "
                                   f"{above.bottom_m:g} m")

    def _water_table(self, value) -> float:
        v = finite(value, "water_table_m")
        if v < 0:
            raise InputError(f"water above the ground surface is not supported (depth {v:g} m); "
                             "give a depth >= 0", argument="water_table_m")
        return v

    def _rigid_base(self, value) -> float:
        if value is None:
            return self.bottom_m
        v = positive(value, "rigid_base_m")
        if v > self.bottom_m + _BOUNDARY_TOL_M:
            raise InputError(f"rigid base at {v:g} m is below the last layer (bottom "
                             f"{self.bottom_m:g} m); extend the layers down to it", argument="rigid_base_m")
        return min(v, self.bottom_m)

    def _check_saturated_weights(self) -> None:
        for layer in self.layers:
            if layer.bottom_m > self.water_table_m and layer.saturated_unit_weight <= self.gamma_w:
                raise _layer_error(layer.name, "saturated_unit_weight",
                                   f"{layer.saturated_unit_weight:g} kN/m³ below the water table must "
                                   f"exceed the unit weight of water {self.gamma_w:g} kN/m³")

    def _check_preconsolidation(self) -> None:
        for layer in self.layers:
            if layer.kind != "index" or layer.sigma_p_kpa is None:
                continue
            s0 = float(self.sigma_v0_eff(layer.mid_depth_m)[0])
            if layer.sigma_p_kpa < s0 * (1 - 1e-9):
                raise _layer_error(layer.name, "sigma_p_kpa",
                                   f"sigma_p = {layer.sigma_p_kpa:g} kPa is below the effective "
                                   f"overburden sigma'v0 = {s0:.4g} kPa at mid-depth "
                                   f"{layer.mid_depth_m:g} m, so the layer cannot be "
                                   "overconsolidated; check sigma_p, or give ocr = 1 if it is "
                                   "normally consolidated")

    # --- geometry ---------------------------------------------------------------------
    @property
    def bottom_m(self) -> float:
        """Depth of the bottom of the last layer, m."""
        return self.layers[-1].bottom_m

    @property
    def names(self) -> list[str]:
        """The layer names, top down."""
        return [layer.name for layer in self.layers]

    def layer_index(self, z) -> np.ndarray:
        """Index of the layer holding each depth (a boundary depth belongs to the lower layer).

        Parameters
        ----------
        z : float or array_like
            Depths below the ground surface, m (>= 0).

        Returns
        -------
        numpy.ndarray
            Layer index (0 = top layer), the shape of `z`.

        Examples
        --------
        >>> p = SoilProfile([SoilLayer("a", 0, 2, 18, modulus_kpa=1e4),
        ...                  SoilLayer("b", 2, 5, 18, modulus_kpa=1e4)], water_table_m=9)
        >>> p.layer_index([0.5, 2.0, 5.0]).tolist()
        [0, 1, 1]
        """
        z = self._depths(z)
        tops = np.array([layer.top_m for layer in self.layers])
        return np.clip(np.searchsorted(tops, z, side="right") - 1, 0, len(self.layers) - 1)

    def _depths(self, z) -> np.ndarray:
        arr = np.atleast_1d(finite_array(z, "z"))
        if arr.size and (arr.min() < 0 or arr.max() > self.bottom_m + _BOUNDARY_TOL_M):
            raise InputError(f"depths must lie within the profile, 0 … {self.bottom_m:g} m; got "
                             f"{arr.min():g} … {arr.max():g} m", argument="z")
        return arr

    # --- stresses ---------------------------------------------------------------------
    def _build_stress_table(self) -> None:
        """Total stress at every layer boundary and the water table; linear in between."""
        cuts = {0.0, self.bottom_m} | {layer.bottom_m for layer in self.layers}
        if 0.0 < self.water_table_m < self.bottom_m:
            cuts.add(self.water_table_m)
        z = np.array(sorted(cuts))
        mids = 0.5 * (z[:-1] + z[1:])
        idx = self.layer_index(mids)
        gamma = np.where(mids < self.water_table_m,
                         [self.layers[i].unit_weight for i in idx],
                         [self.layers[i].saturated_unit_weight for i in idx])
        self._table_z = z
        self._table_sigma = np.concatenate([[0.0], np.cumsum(gamma * np.diff(z))])

    def sigma_v0(self, z) -> np.ndarray:
        """Total vertical stress (kPa) at depths `z` (m) before any fill.

        Parameters
        ----------
        z : float or array_like
            Depths below the ground surface, m (>= 0).

        Returns
        -------
        numpy.ndarray
            σv0, kPa, the shape of `z`.

        Examples
        --------
        >>> p = SoilProfile([SoilLayer("silt", 0, 6, 17.0, 19.0, modulus_kpa=8000)], water_table_m=2.0)
        >>> p.sigma_v0([0.0, 2.0, 6.0]).tolist()   # 0; 2·17; 34 + 4·19
        [0.0, 34.0, 110.0]
        """
        return np.interp(self._depths(z), self._table_z, self._table_sigma)

    def u0(self, z) -> np.ndarray:
        """Hydrostatic pore pressure (kPa) at depths `z` (m): γw · max(z − z_w, 0).

        Parameters
        ----------
        z : float or array_like
            Depths below the ground surface, m (>= 0).

        Returns
        -------
        numpy.ndarray
            u0, kPa, the shape of `z`.

        Examples
        --------
        >>> p = SoilProfile([SoilLayer("silt", 0, 6, 17.0, 19.0, modulus_kpa=8000)],
        ...                 water_table_m=2.0, gamma_w=10.0)
        >>> p.u0([1.0, 5.0]).tolist()
        [0.0, 30.0]
        """
        return self.gamma_w * np.maximum(self._depths(z) - self.water_table_m, 0.0)

    def sigma_v0_eff(self, z) -> np.ndarray:
        """Effective vertical stress σ'v0 = σv0 − u0 (kPa) at depths `z` (m).

        Parameters
        ----------
        z : float or array_like
            Depths below the ground surface, m (>= 0).

        Returns
        -------
        numpy.ndarray
            σ'v0, kPa, the shape of `z`.

        Examples
        --------
        >>> p = SoilProfile([SoilLayer("silt", 0, 6, 17.0, 19.0, modulus_kpa=8000)],
        ...                 water_table_m=2.0, gamma_w=10.0)
        >>> p.sigma_v0_eff([2.0, 6.0]).tolist()   # 34; 110 − 40
        [34.0, 70.0]
        """
        return self.sigma_v0(z) - self.u0(z)

    def __repr__(self) -> str:
        names = ", ".join(self.names)
        return (f"SoilProfile([{names}], water_table_m={self.water_table_m:g}, "
                f"rigid_base_m={self.rigid_base_m:g}, gamma_w={self.gamma_w:g})")


def layer_fields() -> list[str]:
    """Names of the SoilLayer parameters, for readers that map a table onto a layer.

    Examples
    --------
    >>> layer_fields()[:4]
    ['name', 'top_m', 'bottom_m', 'unit_weight']
    """
    return [f.name for f in fields(SoilLayer)]
