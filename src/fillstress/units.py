"""Unit systems at the edges. Inside the code everything is m, kPa, kN/m³.

Conversion factors are exact by definition: international foot = 0.3048 m (1959
agreement), US survey foot = 1200/3937 m, standard gravity 9.80665 m/s², pound =
0.45359237 kg. psf and pcf are pound-force per square / cubic foot.
"""
from __future__ import annotations

from dataclasses import dataclass

from .errors import InputError

FOOT = 0.3048
US_SURVEY_FOOT = 1200.0 / 3937.0
_LBF_KN = 0.45359237 * 9.80665 / 1000.0          # kN per pound-force
PSF_KPA = _LBF_KN / FOOT**2                        # 0.0478802589...
PCF_KN_M3 = _LBF_KN / FOOT**3                      # 0.1570874638...
KIP_KN = 1000.0 * PSF_KPA * FOOT**2                # 1 kip = 1000 lbf; lbf = psf × ft²

#: Physical quantities a value can carry; ``None`` elsewhere marks a dimensionless one.
QUANTITIES = ("length", "area", "volume", "pressure", "unit_weight", "settlement", "force",
              "compressibility", "consolidation")


@dataclass(frozen=True)
class UnitSystem:
    """Labels and factors to SI for one unit system. :meth:`unit` is the one unit table:
    every conversion in the readers and writers goes through it."""

    name: str
    length: str
    pressure: str
    unit_weight: str
    settlement: str
    length_to_m: float
    pressure_to_kpa: float
    unit_weight_to_kn_m3: float
    settlement_to_m: float

    def unit(self, quantity: str) -> tuple[str, float]:
        """(label, SI value of one unit) of `quantity` in this system.

        Examples
        --------
        >>> US.unit("volume")[0], SI.unit("force")
        ('yd3', ('kN', 1.0))
        """
        L = self.length_to_m
        table = {
            "length": (self.length, L),
            "area": (f"{self.length}2", L**2),
            # earthwork volumes in cubic yards on US-customary sites (the trade's unit)
            "volume": ("yd3", (3 * L) ** 3) if self.name == "US" else (f"{self.length}3", L**3),
            "pressure": (self.pressure, self.pressure_to_kpa),
            "unit_weight": (self.unit_weight, self.unit_weight_to_kn_m3),
            "settlement": (self.settlement, self.settlement_to_m),
            "force": ("kip", KIP_KN) if self.name == "US" else ("kN", 1.0),
            "compressibility": (f"per_{self.pressure}", 1.0 / self.pressure_to_kpa),  # mv
            "consolidation": (f"{self.length}2_per_yr", L**2),                      # cv, ch
        }
        if quantity not in table:
            raise InputError(f"unknown quantity {quantity!r}; use one of {', '.join(table)}",
                             argument="quantity")
        return table[quantity]

    def to_si(self, v, quantity: str):
        """`v` given in this system's unit of `quantity` → SI."""
        return v * self.unit(quantity)[1]

    def out(self, v_si, quantity: str):
        """SI `v_si` → this system's unit of `quantity`."""
        return v_si / self.unit(quantity)[1]

    def length_si(self, v):
        return self.to_si(v, "length")

    def pressure_si(self, v):
        return self.to_si(v, "pressure")

    def unit_weight_si(self, v):
        return self.to_si(v, "unit_weight")

    def length_out(self, v_m):
        return self.out(v_m, "length")

    def pressure_out(self, v_kpa):
        return self.out(v_kpa, "pressure")

    def settlement_out(self, v_m):
        return self.out(v_m, "settlement")


SI = UnitSystem("SI", "m", "kPa", "kN/m3", "mm", 1.0, 1.0, 1.0, 1e-3)
US = UnitSystem("US", "ft", "psf", "pcf", "in", FOOT, PSF_KPA, PCF_KN_M3, FOOT / 12.0)
SYSTEMS = {"SI": SI, "US": US}

#: Unit labels as printed (superscripts; the survey foot spelled out).
UNIT_TEXT = {"m2": "m²", "m3": "m³", "ft2": "ft²", "ft3": "ft³", "yd3": "yd³", "kN/m3": "kN/m³",
             "ftUS": "US survey ft", "per_kPa": "1/kPa", "per_psf": "1/psf",
             "m2_per_yr": "m²/year", "ft2_per_yr": "ft²/year"}


def unit_system(name: str) -> UnitSystem:
    """Look up 'SI' or 'US' (customary: ft, psf, pcf, in)."""
    try:
        return SYSTEMS[str(name).upper()]
    except KeyError:
        raise InputError(f"unknown unit system {name!r}; use 'SI' or 'US'", argument="units") from None


def unit_text(label: str) -> str:
    """A unit label as printed.

    Examples
    --------
    >>> unit_text("ft3"), unit_text("kN/m3"), unit_text("psf")
    ('ft³', 'kN/m³', 'psf')
    """
    return UNIT_TEXT.get(label, label)
