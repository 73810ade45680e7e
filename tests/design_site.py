"""An invented site for the design-page tests ("Brindle Marsh depot"): a pad, a capped pile
and a short embankment on inline geometry, a building, a pipe, a borehole and one soil
layer, on a small 2 m lattice so every test runs in seconds."""
from __future__ import annotations

from pathlib import Path

SITE = '''\
# Brindle Marsh depot: a trial layout (invented for the tests)
[site]
name = "Brindle Marsh depot"
crs = "EPSG:32630"
units = "SI"

[grid]
cell = 2.0
margin = 12.0
convergence_check = false

[bodies.pad]
kind = "footprint"
outline = [[400000.0, 6100000.0], [400030.0, 6100000.0], [400030.0, 6100020.0], [400000.0, 6100020.0]]
height = 2.5
unit_weight = 19.0

[bodies.heap]
kind = "pile"
outline = [[400050.0, 6100000.0], [400074.0, 6100000.0], [400074.0, 6100022.0], [400050.0, 6100022.0]]
repose_angle = 36.0
crest_height = 5.0
unit_weight = 17.0
stage = 2

[bodies.bund]
kind = "embankment"
centreline = [[400000.0, 6100040.0], [400070.0, 6100044.0]]
crest_width = 3.0
side_slope = 2.0
heights = [[0.0, 1.5], [70.2, 2.5]]
unit_weight = 18.0

[[buildings]]
id = "pump_house"
outline = [[400036.0, 6100004.0], [400046.0, 6100004.0], [400046.0, 6100012.0], [400036.0, 6100012.0]]
foundation_depth = 1.0
interior_spacing = 5.0
profile_bottom = 8.0

[[pipes]]
id = "drain_D300"
line = [[399990.0, 6100030.0], [400080.0, 6100031.0]]
crown_depth = 1.2
diameter = 0.3
spacing = 5.0
differential_length = 10.0

[[boreholes]]
id = "BM-2"
x = 400015.0
y = 6100010.0
top = 1.0
bottom = 9.0
step = 2.0

[soil]
water_table = 1.5

[[soil.layers]]
name = "alluvial silt"
top = 0.0
bottom = 20.0
unit_weight = 18.0
saturated_unit_weight = 19.0
mv = 0.0004
'''


# US customary units on a US-survey-foot CRS: a levee raise beside a staging pad (invented
# "Cobble Creek"); the levee's toe has corners beyond the discs the grid estimate uses.
US_SITE = '''\
[site]
name = "Cobble Creek levee raise"
crs = "EPSG:2229"
units = "US"

[grid]
cell = 4.0
margin = 40.0
convergence_check = false

[bodies.levee]
kind = "embankment"
centreline = [[6400000.0, 1900000.0], [6400300.0, 1900060.0]]
crest_width = 12.0
side_slope = 3.0
heights = [[0.0, 8.0], [306.0, 10.0]]
unit_weight = 120.0

[bodies.staging_pad]
kind = "footprint"
outline = [[6400100.0, 1899900.0], [6400180.0, 1899900.0], [6400180.0, 1899950.0], [6400100.0, 1899950.0]]
height = 4.0
unit_weight = 115.0
stage = 2

[[pipes]]
id = "W-12in"
line = [[6399950.0, 1899960.0], [6400350.0, 1899990.0]]
crown_depth = 5.0
diameter = 1.0
spacing = 10.0
differential_length = 40.0

[[boreholes]]
id = "CB-3"
x = 6400150.0
y = 1899925.0
top = 2.0
bottom = 40.0
step = 2.0

[soil]
water_table = 6.0

[[soil.layers]]
name = "levee foundation silt"
top = 0.0
bottom = 60.0
unit_weight = 115.0
saturated_unit_weight = 122.0
mv = 0.00002
'''


def write_design_site(folder: Path, text: str = SITE) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "depot.toml"
    path.write_text(text, encoding="utf-8")
    return path
