"""Write the field readings of the preload surcharge sample from an invented "true" ground.

    python tools/make_sample_readings.py

The true ground differs from the design of sample_sites/preload_surcharge/site.toml: the
soft clay's compression index Cc is 0.8 × and its cv 2 × the design values (Cr, e0 and
OCR as designed). The fill went on as the construction record says (construction.csv:
the first lift three days late, the second lift in two halves at days 130 and 145, not
whole at day 120). Settlement plates, two extensometer anchors and three piezometers are
read on a realistic schedule with reading noise (level survey σ = 3 mm, piezometers
σ = 1.5 kPa, fixed seed), rounded as a field sheet would be. `fillstress monitor` on
these readings should recover the factors 0.8 and 2 within its stated intervals.
"""
from __future__ import annotations

import dataclasses
import datetime as dt
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
SITE_DIR = ROOT / "sample_sites" / "preload_surcharge"
DAY0 = dt.date(2025, 3, 3)
TRUE_CC_FACTOR, TRUE_CV_FACTOR = 0.8, 2.0
SEED = 20250303
PLATE_NOISE_M, PIEZO_NOISE_KPA = 0.003, 1.5
AS_BUILT = [(1, 3.0, 1.0), (2, 130.0, 0.5), (2, 145.0, 0.5)]     # stage, day, fraction
PLATES = {"SP-01": (452100.0, 218300.0), "SP-02": (452080.0, 218290.0),
          "SP-03": (452120.0, 218310.0), "SP-04": (452060.0, 218300.0),
          "SP-05": (452140.0, 218300.0), "SP-06": (452100.0, 218265.0),
          "SP-07": (452100.0, 218335.0)}
LATE_PLATE = "SP-07"          # installed after the first lift, on day 20
EXTENSOMETER = {"EX-01/A1": 1.5, "EX-01/A2": 7.5}                  # anchor depths at SP-01
PIEZOMETERS = {"PZ-01": 4.5, "PZ-02": 7.5, "PZ-03": 10.5}           # tips at SP-01


def schedule() -> np.ndarray:
    """Reading days: a base reading, weekly while filling, then fortnightly, then monthly."""
    return np.unique(np.r_[-2.0, np.arange(5.0, 200.0, 7.0), np.arange(200.0, 500.0, 14.0),
                           np.arange(500.0, 1500.0, 30.0)])


def main() -> None:
    import sys
    sys.path.insert(0, str(ROOT / "src"))
    from fillstress.monitoring.model import (Placement, piezometer_model, point_model,
                                             scaled_profile)
    from fillstress.site.build import load_site
    site = load_site(SITE_DIR / "site.toml")
    truth = dataclasses.replace(site, soil=scaled_profile(site.soil, TRUE_CC_FACTOR,
                                                          TRUE_CV_FACTOR))
    placed = [Placement(*p) for p in AS_BUILT]
    rng = np.random.default_rng(SEED)
    days = schedule()
    cx, cy = PLATES["SP-01"]
    names = list(PLATES) + list(EXTENSOMETER)
    xy = np.array([PLATES[n] for n in PLATES] + [(cx, cy)] * len(EXTENSOMETER))
    depth = np.r_[np.zeros(len(PLATES)), list(EXTENSOMETER.values())]
    curves = point_model(truth, xy, depth, placed).settlement(days)
    pz = piezometer_model(truth, [(cx, cy, z) for z in PIEZOMETERS.values()], placed)
    excess = pz.excess(days)
    u0 = site.soil.u0(np.array(list(PIEZOMETERS.values())))
    rows = ["instrument,kind,x,y,depth (m),date,settlement (mm),pore pressure (kPa)"]
    for i, name in enumerate(names):
        use = days >= (20.0 if name == LATE_PLATE else days[0])
        s = curves[i, use] - curves[i, use][0] + rng.normal(0, PLATE_NOISE_M, use.sum())
        s[0] = 0.0                                       # the baseline reading is the datum
        kind = "plate" if name in PLATES else "extensometer"
        z = "" if kind == "plate" else f"{depth[i]:.1f}"
        for d, v in zip(days[use], s):
            rows.append(f"{name},{kind},{xy[i, 0]:.1f},{xy[i, 1]:.1f},{z},"
                        f"{DAY0 + dt.timedelta(days=int(d))},{1000 * v:.0f},")
    for i, (name, z) in enumerate(PIEZOMETERS.items()):
        u = u0[i] + excess[i] + rng.normal(0, PIEZO_NOISE_KPA, days.size)
        for d, v in zip(days, u):
            rows.append(f"{name},piezometer,{cx:.1f},{cy:.1f},{z:.1f},"
                        f"{DAY0 + dt.timedelta(days=int(d))},,{v:.1f}")
    (SITE_DIR / "readings.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    record = ["stage,date,placed"] + [f"{k},{DAY0 + dt.timedelta(days=int(d))},{f:g}"
                                      for k, d, f in AS_BUILT]
    (SITE_DIR / "construction.csv").write_text("\n".join(record) + "\n", encoding="utf-8")
    print(f"wrote {len(rows) - 1} readings and {len(AS_BUILT)} placements; day 0 = {DAY0}")


if __name__ == "__main__":
    main()
