"""Write the data files of the bundled sample sites (invented scenarios, demo data only).

    python tools/make_sample_sites.py

The site files (site.toml) and READMEs are written by hand; this script makes the
vector and survey files they refer to, deterministically, so they can be regenerated.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1] / "sample_sites"


def feature_collection(features, crs: str) -> dict:
    return {"type": "FeatureCollection",
            "crs": {"type": "name", "properties": {"name": crs}},
            "features": features}


def polygon(ring, **props) -> dict:
    ring = [list(map(lambda v: round(float(v), 3), p)) for p in ring]
    if ring[0] != ring[-1]:
        ring.append(ring[0])
    return {"type": "Feature", "properties": props,
            "geometry": {"type": "Polygon", "coordinates": [ring]}}


def blob(cx, cy, rx, ry, wobble, n=28, phase=0.0):
    """An irregular closed toe outline: an ellipse with a few smooth bumps."""
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    r = 1 + wobble * (0.6 * np.sin(3 * t + phase) + 0.4 * np.cos(5 * t - phase))
    return np.c_[cx + rx * r * np.cos(t), cy + ry * r * np.sin(t)]


def write_json(path: Path, data) -> None:
    path.write_text(json.dumps(data, indent=1) + "\n", encoding="utf-8")


def stockpile_yard():
    d = ROOT / "stockpile_yard"
    x0, y0 = 512_300.0, 5_763_400.0
    piles = [
        polygon(blob(x0 + 60, y0 + 70, 38, 24, 0.10, phase=0.4), id="ore_east", material="iron ore"),
        polygon(blob(x0 - 30, y0 + 75, 48, 17, 0.06, phase=1.3), id="coal_west", material="coal"),
        polygon(blob(x0 + 5, y0 + 130, 22, 18, 0.12, phase=2.1), id="aggregate_north",
                material="crushed aggregate"),
    ]
    write_json(d / "pile_toes.geojson", feature_collection(piles, "EPSG:32632"))
    warehouse = [[x0 + 30, y0 + 12], [x0 + 96, y0 + 12], [x0 + 96, y0 + 38], [x0 + 30, y0 + 38]]
    write_json(d / "buildings.geojson", feature_collection(
        [polygon(warehouse, id="warehouse", foundation_depth=1.2)], "EPSG:32632"))


def preload_surcharge():
    """Survey of the surcharge top: a flat pad 4.0 m above ground with 1.5H:1V sides,
    sampled on a 4 m grid plus the toe line, as surveyed x, y, z points."""
    d = ROOT / "preload_surcharge"
    x0, y0, ground = 452_100.0, 218_300.0, 2.80
    half_x, half_y, height, slope = 45.0, 30.0, 4.0, 1.5
    xs = np.arange(-half_x - slope * height - 8, half_x + slope * height + 8.1, 4.0)
    ys = np.arange(-half_y - slope * height - 8, half_y + slope * height + 8.1, 4.0)
    gx, gy = np.meshgrid(xs, ys)
    outside = np.maximum(np.abs(gx) - half_x, np.abs(gy) - half_y).clip(min=0)
    z = ground + np.clip(height - outside / slope, 0, None)
    rng = np.random.default_rng(7)
    z = np.where(z > ground, z + rng.normal(0, 0.02, z.shape), ground)  # survey scatter
    lines = ["easting,northing,elevation"]
    for x, y, zz in zip(gx.ravel() + x0, gy.ravel() + y0, z.ravel()):
        lines.append(f"{x:.2f},{y:.2f},{zz:.3f}")
    (d / "surcharge_top_survey.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")


if __name__ == "__main__":
    for make in (stockpile_yard, preload_surcharge):
        make()
    print(f"wrote sample data under {ROOT}")
