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


@dataclass(frozen=True)
class UnitSystem:
    """Labels and factors to SI for one unit system; `to_si` multiplies."""

    name: str
    length: str
    pressure: str
    unit_weight: str
    settlement: str
    length_to_m: float
    pressure_to_kpa: float
    unit_weight_to_kn_m3: float
    settlement_to_m: float

    def length_si(self, v):
        return v * self.length_to_m

    def pressure_si(self, v):
        return v * self.pressure_to_kpa

    def unit_weight_si(self, v):
        return v * self.unit_weight_to_kn_m3

    def length_out(self, v_m):
        return v_m / self.length_to_m

    def pressure_out(self, v_kpa):
        return v_kpa / self.pressure_to_kpa

    def settlement_out(self, v_m):
        return v_m / self.settlement_to_m


SI = UnitSystem("SI", "m", "kPa", "kN/m3", "mm", 1.0, 1.0, 1.0, 1e-3)
US = UnitSystem("US", "ft", "psf", "pcf", "in", FOOT, PSF_KPA, PCF_KN_M3, FOOT / 12.0)
SYSTEMS = {"SI": SI, "US": US}

#: Unit labels as printed (superscripts; the survey foot spelled out).
UNIT_TEXT = {"m2": "m²", "m3": "m³", "ft2": "ft²", "ft3": "ft³", "kN/m3": "kN/m³",
             "ftUS": "US survey ft"}


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
