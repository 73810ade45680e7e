"""Write the Fenmoor Parkway corridor test site (an invented scenario, demo data only).

    python tools/make_corridor_site.py OUT_FOLDER [--miles 3.0]

A curved highway embankment in NAD83 / Texas Central (EPSG:2277, US survey feet), US
customary units: a tangent, a 6,000 ft curve and a second tangent, `--miles` long in all;
two lifts as LandXML TIN surfaces (lift 1 the lower part of the final prism, lift 2 the
rest), a strip survey of existing ground (x, y, z points, 900 ft wide, at state-plane
coordinates), four homes near the toe (one founded by elevation), a 24-inch water main
crossing at a skew (invert elevations), a borehole and a soft clay profile. Everything is
deterministic; the same call writes the same files. The full 3-mile site is the corridor
benchmark input; tests use a short one (``--miles 0.4``).
"""
from __future__ import annotations

import argparse
import math
from pathlib import Path

import numpy as np

CRS = "EPSG:2277"
START = np.array([3_048_000.0, 10_071_000.0])   # ftUS, west end of the alignment
RADIUS, DEFLECTION = 6000.0, 0.6                # curve radius (ft), deflection (rad)
CREST_HALF, SIDE_SLOPE = 30.0, 3.0              # 60 ft crest, 3H:1V
SECTION_STEP = 50.0                             # ft between design TIN sections


def alignment(length: float, step: float, at=None):
    """Points, unit tangents and chainages every `step` ft (or at the chainages `at`)
    along tangent–curve–tangent; the first tangent is a fifth of the length, the curve as
    long as the deflection gives (shortened on a short site)."""
    curve = min(RADIUS * DEFLECTION, 0.5 * length)
    t1 = 0.2 * length
    s = np.r_[np.arange(0.0, length, step), length] if at is None else np.atleast_1d(at)
    heading = np.where(s < t1, 0.0, np.minimum(s - t1, curve) / RADIUS)
    # integrate the heading: exact on the tangents and the arc
    x, y = np.empty_like(s), np.empty_like(s)
    for k, sk in enumerate(s):
        a = min(sk, t1)
        b = min(max(sk - t1, 0.0), curve)
        c = max(sk - t1 - curve, 0.0)
        th = b / RADIUS
        x[k] = a + RADIUS * math.sin(th) + c * math.cos(th)
        y[k] = RADIUS * (1 - math.cos(th)) + c * math.sin(th)
    tangent = np.c_[np.cos(heading), np.sin(heading)]
    return START + np.c_[x, y], tangent, s


def terrain(length):
    """Existing ground elevation (ft) as z(x, y): a gentle rise, a swell and a creek
    valley crossing the alignment at 55 % of its length."""
    (creek_x, creek_y), = alignment(length, 0.0, at=[0.55 * length])[0]

    def z(x, y):
        x, y = np.asarray(x, float), np.asarray(y, float)
        valley = np.exp(-(np.hypot(x - creek_x, y - creek_y) / 700.0) ** 2)
        return 588.0 + 0.0015 * (x - START[0]) + 5.0 * np.sin((y - START[1]) / 1700.0) \
            - 9.0 * valley
    return z


def heights(s, length):
    """Final fill height (ft) at the crest: 4 ft at grade, 14 ft over the creek
    crossing at 55 % of the length, 9 ft at an overpass approach at 85 %."""
    return (4.0 + 10.0 * np.exp(-((s - 0.55 * length) / (0.06 * length)) ** 2)
            + 5.0 * np.exp(-((s - 0.85 * length) / (0.04 * length)) ** 2))


def section(h, h_lift1):
    """Offsets (ft, left negative) and the tops of lift 1 and of the final fill above
    ground at them: the final prism, lift 1 the part below h_lift1."""
    toe = CREST_HALF + SIDE_SLOPE * h
    lift_edge = CREST_HALF + SIDE_SLOPE * (h - h_lift1)
    half = np.array([0.0, CREST_HALF, lift_edge, toe, toe + 40.0])
    off = np.r_[-half[:0:-1], half]
    final = np.clip(h - (np.abs(off) - CREST_HALF) / SIDE_SLOPE, 0.0, h)
    return off, np.minimum(final, h_lift1), final


def design_surfaces(length, ground):
    """Vertices (x, y, z lift 1, z final) and triangles of the two design TINs."""
    pts, tangent, s = alignment(length, SECTION_STEP)
    normal = np.c_[-tangent[:, 1], tangent[:, 0]]          # to the left
    h = heights(s, length)
    rows = []
    for p, n, hk in zip(pts, normal, h):
        off, lift1, final = section(hk, 0.55 * hk)
        xy = p + off[:, None] * n
        g = ground(xy[:, 0], xy[:, 1])
        rows.append(np.c_[xy, g + lift1, g + final])
    vertices = np.concatenate(rows)
    m = len(rows[0])
    tris = []
    for k in range(len(rows) - 1):
        for i in range(m - 1):
            a, b = k * m + i, k * m + i + 1
            tris += [(a, b, a + m), (b, b + m, a + m)]
    return vertices, np.array(tris)


def landxml(vertices, z, tris, name) -> str:
    pnts = "\n".join(f'      <P id="{k + 1}">{v[1]:.3f} {v[0]:.3f} {zk:.3f}</P>'
                     for k, (v, zk) in enumerate(zip(vertices, z)))
    faces = "\n".join(f"      <F>{a + 1} {b + 1} {c + 1}</F>" for a, b, c in tris)
    return f"""<?xml version="1.0" encoding="UTF-8"?>
<LandXML xmlns="http://www.landxml.org/schema/LandXML-1.2" version="1.2">
  <Units><Imperial linearUnit="USSurveyFoot"/></Units>
  <CoordinateSystem epsgCode="2277"/>
  <Surfaces><Surface name="{name}"><Definition surfType="TIN">
    <Pnts>
{pnts}
    </Pnts>
    <Faces>
{faces}
    </Faces>
  </Definition></Surface></Surfaces>
</LandXML>
"""


def survey(length, ground):
    """Strip survey: sections every 100 ft, shots every 30 ft to 450 ft each side,
    jittered by up to 4 ft as a crew's would be."""
    rng = np.random.default_rng(2277)
    pts, tangent, _ = alignment(length, 100.0)
    normal = np.c_[-tangent[:, 1], tangent[:, 0]]
    off = np.arange(-450.0, 451.0, 30.0)
    xy = (pts[:, None, :] + off[None, :, None] * normal[:, None, :]).reshape(-1, 2)
    xy += rng.uniform(-4.0, 4.0, xy.shape)
    return np.c_[xy, ground(xy[:, 0], xy[:, 1])]


def home(centre, tangent, side, depth=None):
    """A 45 × 60 ft home, long side along the road, on `side` (+1 left) of the road."""
    n = np.array([-tangent[1], tangent[0]]) * side
    corners = [(-30, 0), (30, 0), (30, 45), (-30, 45)]
    ring = [centre + a * tangent + b * n for a, b in corners]
    return [[round(float(x), 2), round(float(y), 2)] for x, y in ring]


def site_toml(length, homes, pipe, pipe_inverts, centreline, borehole, stations,
              cell_ft=None, plan_depths_ft=()) -> str:
    def xy(points):
        return "[" + ", ".join(f"[{x:.2f}, {y:.2f}]" for x, y in points) + "]"
    blocks = []
    for hid, ring, depth, elevation in homes:
        level = (f"foundation_elevation = {elevation:.2f}   # ft, slab on grade"
                 if elevation is not None else f"foundation_depth = {depth}   # ft")
        blocks.append(f"""[[buildings]]
id = "{hid}"
outline = {xy(ring)}
{level}
interior_spacing = 10.0
profile_step = 2.0
profile_bottom = 50.0
""")
    return f"""# Fenmoor Parkway (invented test corridor), written by tools/make_corridor_site.py.
# A curved highway embankment {length / 5280:.2f} miles long in two lifts over a strip survey,
# in NAD83 / Texas Central (US survey feet), US customary units.

[site]
name = "Fenmoor Parkway embankment"
description = "Curved four-lane embankment in two lifts on soft clay, homes near the toe, a 24-inch water main crossing at a skew."
crs = "{CRS}"
units = "US"
{"" if cell_ft is None else chr(10) + "[grid]" + chr(10) + f"cell = {cell_ft:g}" + chr(10)}
[ground]
points = "existing_survey.csv"

[bodies.lift_1]
kind = "surfaces"
design = "lift_1.xml"
unit_weight = 125.0        # pcf
stage = 1

[bodies.lift_2]
kind = "surfaces"
design = "lift_2.xml"
existing = "lift_1.xml"
unit_weight = 125.0
stage = 2

[alignment]
centerline = {xy(centreline)}
stations = {stations}
profile_depths = [5.0, 15.0]

{chr(10).join(blocks)}
[[pipes]]
id = "WM-24"
line = {xy(pipe)}
invert_elevation = [{pipe_inverts[0]:.2f}, {pipe_inverts[1]:.2f}]
diameter = 2.0             # ft (24 inch)
spacing = 10.0
differential_length = 20.0

[[boreholes]]
id = "B-7"
x = {borehole[0]:.2f}
y = {borehole[1]:.2f}
top = 1.0
bottom = 50.0
step = 1.0

[soil]
water_table = 5.0
rigid_base = 50.0

[[soil.layers]]
name = "clay crust"
top = 0.0
bottom = 6.0
unit_weight = 118.0
modulus = 150000.0         # psf

[[soil.layers]]
name = "soft clay"
top = 6.0
bottom = 30.0
unit_weight = 104.0
saturated_unit_weight = 106.0
cc = 0.40
cr = 0.05
e0 = 1.15
ocr = 1.3
cv = 15.0                  # ft²/year
drainage = "double"

[[soil.layers]]
name = "dense sand"
top = 30.0
bottom = 50.0
unit_weight = 125.0
saturated_unit_weight = 128.0
modulus = 900000.0

[settlement]
stage_days = [0, 180]
{_plan_grid(plan_depths_ft)}"""


def _plan_grid(depths_ft) -> str:
    """A plan grid over the whole analysis grid at `depths_ft`, or nothing."""
    if not len(depths_ft):
        return ""
    depths = ", ".join(f"{d:g}" for d in depths_ft)
    return f"""
[[plan_grids]]
name = "plan"
depths = [{depths}]   # ft
"""


def write_corridor_site(folder, miles: float = 3.0, cell_ft=None, plan_depths_ft=()) -> Path:
    """Write the corridor site into `folder`; return the path of its site.toml. The
    default cell is left to fillstress unless `cell_ft` is given (quick tests); a plan grid
    over the whole analysis grid at `plan_depths_ft` when any are given."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    length = miles * 5280.0
    ground = terrain(length)
    vertices, tris = design_surfaces(length, ground)
    for k, name in ((2, "lift_1"), (3, "lift_2")):
        (folder / f"{name}.xml").write_text(landxml(vertices, vertices[:, k], tris, name))
    shots = survey(length, ground)
    np.savetxt(folder / "existing_survey.csv", shots, delimiter=",", fmt="%.2f",
               header="easting,northing,elevation", comments="")
    pts, tangent, s = alignment(length, 100.0)
    h = heights(s, length)

    def at(fraction):
        k = int(round(fraction * (len(s) - 1)))
        return pts[k], tangent[k], h[k]

    homes = []
    for hid, fraction, side, depth in (("home_1", 0.15, 1, 2.0), ("home_2", 0.40, -1, 2.0),
                                       ("home_3", 0.62, 1, None), ("home_4", 0.80, -1, 2.0)):
        p, t, hk = at(fraction)
        n = np.array([-t[1], t[0]]) * side
        front = p + n * (CREST_HALF + SIDE_SLOPE * hk + 25.0)
        ring = home(front, t, side)
        elevation = None
        if depth is None:   # slab 2.5 ft below the ground at its centroid
            c = np.mean(ring, axis=0)
            elevation = float(ground(*c)) - 2.5
        homes.append((hid, ring, depth, elevation))
    p, t, _ = at(0.70)
    skew = math.radians(55.0)
    d = np.array([t[0] * math.cos(skew) - t[1] * math.sin(skew),
                  t[0] * math.sin(skew) + t[1] * math.cos(skew)])
    pipe = [p - 380.0 * d, p + 380.0 * d]
    inverts = [float(ground(*q)) - 7.0 for q in pipe]
    peak, _, _ = at(0.55)
    centre_pts, _, _ = alignment(length, 250.0)
    stations = "[" + ", ".join(f"{v:.0f}" for v in
                               np.round(np.array([0.25, 0.55, 0.70]) * length, -2)) + "]"
    (folder / "site.toml").write_text(site_toml(length, homes, pipe, inverts, centre_pts,
                                                peak, stations, cell_ft, plan_depths_ft))
    return folder / "site.toml"


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("folder")
    ap.add_argument("--miles", type=float, default=3.0)
    ap.add_argument("--cell", type=float, default=None, help="analysis cell (ft)")
    ap.add_argument("--plan-depths", type=float, nargs="+", default=(),
                    help="depths (ft) of a plan grid over the analysis grid")
    args = ap.parse_args(argv)
    site = write_corridor_site(args.folder, args.miles, args.cell, args.plan_depths)
    print(f"wrote {site}")


if __name__ == "__main__":
    main()
