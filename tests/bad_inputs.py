"""The bad-input corpus: one row per thing a user can get wrong, and what fillstress gives.

Each case builds its inputs in an empty folder and returns the command line; the test
(tests/test_bad_inputs.py) runs it in-process and checks the exit code, that an error is
one line without a traceback naming the key or file, and that no file in the folder was
lost or changed. `docs/reliability.md` is generated from these rows
(tools/write_reliability_table.py).
"""
from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from tiny_site import SITE

PAD = "[bodies.pad]"
HOLE = "[[boreholes]]"
SOIL = """
[soil]
water_table = 1.0

[[soil.layers]]
name = "grey silty clay"
top = 0.0
bottom = 12.0
unit_weight = 18.0
saturated_unit_weight = 19.0
cc = 0.3
cr = 0.03
e0 = 0.9
ocr = 1.0
cv = 2.0
"""
ODDS = """
[uncertainty]
samples = 50

[[uncertainty.parameters]]
layer = "grey silty clay"
parameter = "cc"
{extra}
"""
SURVEY = "x,y,z\n499990,5199990,10\n500030,5199990,10\n499990,5200022,10\n500030,5200022,10\n"


@dataclass
class Case:
    id: str
    area: str          # site file, reader, numbers, command line, signals
    tried: str         # what the user did, in their words
    build: Callable    # build(folder: Path) -> argv (list of str)
    exit: int = 2
    names: tuple = ()  # text the message must contain (the key, the file, the number)
    warns: str = ""    # a warning line expected on an exit-0 case
    absent: tuple = ()  # text the output must not contain (file contents, internal names)
    creates: tuple = ()  # files a successful case writes (everything else unchanged)
    forbids: tuple = ()  # files a successful case must not write
    gives: str = ""    # what the user sees, for the table (default: the names)


def edit(text: str, *pairs) -> str:
    for old, new in pairs:
        assert old in text, old
        text = text.replace(old, new, 1)
    return text


def site(*pairs, append: str = "", command: str = "run", files: dict | None = None,
         args: tuple = ("-q",), name: str = "site.toml", out: str | None = "out"):
    """A builder: the tiny site edited by (old, new) `pairs` plus `append`, written with
    `files` (name -> text, bytes, or one of "fifo", "dir", "loop"), run by `command`."""
    def build(d: Path):
        for fname, content in (files or {}).items():
            make(d / fname, content)
        (d / name).write_text(edit(SITE, *pairs) + append, encoding="utf-8")
        argv = [command, str(d / name)]
        if out and command in ("run", "batch"):
            argv += ["-o", str(d / out)]
        return argv + list(args)
    return build


def make(path: Path, content) -> None:
    if content == "fifo":
        os.mkfifo(path)
    elif content == "dir":
        path.mkdir()
    elif content == "loop":
        os.symlink(path.name + ".b", path)
        os.symlink(path.name, path.with_name(path.name + ".b"))
    elif isinstance(content, bytes):
        path.write_bytes(content)
    else:
        path.write_text(content, encoding="utf-8")


def main_run(d: Path) -> None:
    """A finished results folder d/out of the tiny site, for the view and report cases."""
    from fillstress.cli import main
    assert main(site(args=("-q", "--no-report"))(d)) == 0


def ground_raster_with_hole(path: Path) -> None:
    """A 2 m GeoTIFF of flat ground at 10 m over the site, nodata under the pad's centre."""
    import numpy as np
    import rasterio
    from rasterio.transform import from_origin
    z = np.full((30, 40), 10.0, dtype="float32")
    z[10:16, 12:20] = -9999.0                     # rows from the north: under the pad
    with rasterio.open(path, "w", driver="GTiff", width=40, height=30, count=1,
                       dtype="float32", crs="EPSG:32633", nodata=-9999.0,
                       transform=from_origin(499980.0, 5200030.0, 2.0, 2.0)) as dst:
        dst.write(z, 1)


def british_grid_surfaces(d: Path) -> None:
    """Design and existing GeoTIFFs in the British National Grid (EPSG:27700), 2 m fill."""
    import numpy as np
    import rasterio
    from rasterio.transform import from_origin
    for name, level in (("existing.tif", 50.0), ("design.tif", 52.0)):
        with rasterio.open(d / name, "w", driver="GTiff", width=30, height=20, count=1,
                           dtype="float32", crs="EPSG:27700",
                           transform=from_origin(431000.0, 291000.0, 2.0, 2.0)) as dst:
            dst.write(np.full((20, 30), level, dtype="float32"), 1)


def raw(text, command="check", args=("-q",)):
    """A builder writing `text` (str or bytes) as the whole site file."""
    def build(d: Path):
        make(d / "site.toml", text)
        return [command, str(d / "site.toml"), *args]
    return build


def argv(*items):
    """A builder of a literal command line; "{d}" becomes the case folder."""
    return lambda d: [str(a).replace("{d}", str(d)) for a in items]


def ground(key, content, fname="ground.csv"):
    return site((HOLE, f'[ground]\n{key} = "{fname}"\n\n{HOLE}'), files={fname: content})


def footprint_file(content, fname="pad.geojson", extra=""):
    return site(('outline = [[500000.0, 5200000.0], [500020.0, 5200000.0], '
                 '[500020.0, 5200012.0], [500000.0, 5200012.0]]',
                 f'file = "{fname}"{extra}'), files={fname: content})


def key(table_line, old, new):
    return site((f"{table_line}", f"{table_line}"), (old, new))


GEOJSON_POINT = ('{"type": "FeatureCollection", "features": [{"type": "Feature", '
                 '"properties": {"id": "a"}, "geometry": {"type": "Point", '
                 '"coordinates": [500000, 5200000]}}]}')
DEEP = "outline = " + "[" * 400 + "]" * 400

CASES = [
    # --- the site file itself ----------------------------------------------------
    Case("site-missing", "site file", "site file that does not exist",
         argv("check", "{d}/nope.toml"), names=("site file not found", "nope.toml")),
    Case("site-folder", "site file", "a folder given as the site file",
         argv("check", "{d}"), names=("is a folder",)),
    Case("site-fifo", "site file", "a named pipe given as the site file",
         lambda d: (make(d / "p.toml", "fifo"), ["check", str(d / "p.toml")])[1],
         names=("named pipe", "p.toml")),
    Case("site-dev-zero", "site file", "/dev/zero given as the site file",
         argv("check", "/dev/zero"), names=("/dev/zero is a device",)),
    Case("site-loop", "site file", "a symlink loop given as the site file",
         lambda d: (make(d / "s.toml", "loop"), ["check", str(d / "s.toml")])[1],
         names=("s.toml", "symbolic links")),
    Case("site-not-toml", "site file", "a site file that is not TOML",
         raw("[site\nname = 1\n"), names=("site.toml", "not valid TOML")),
    Case("site-binary", "site file", "a binary file as the site file",
         raw(b"\xff\xfe\x00\x01garbage"), names=("not a UTF-8 text file",)),
    Case("site-empty", "site file", "an empty site file",
         raw(""), names=("[site]", "missing the [site] table")),
    Case("site-deep-arrays", "site file", "an outline of 400 nested arrays",
         site(("outline = [[500000.0", DEEP + "\nzz = [[500000.0")),
         names=("site.toml",), absent=("RecursionError",)),
    Case("site-duplicate-key", "site file", "the same key twice in a table",
         site(("height = 2.0", "height = 2.0\nheight = 3.0"), command="check"),
         names=("site.toml", "not valid TOML")),
    Case("unknown-top-table", "site file", "a misspelt table [grd]",
         site(("[grid]", "[grd]")), names=("[grd]", "did you mean 'grid'")),
    Case("unknown-body-key", "site file", "a misspelt body key hieght",
         site(("height = 2.0", "hieght = 2.0")), names=("bodies.pad.hieght", "height")),
    Case("missing-unit-weight", "site file", "a body without unit_weight",
         site(("unit_weight = 20.0\n", "")), names=("bodies.pad.unit_weight", "required")),
    Case("bad-body-kind", "site file", "a body kind that does not exist",
         site(('kind = "footprint"', 'kind = "mound"')), names=("bodies.pad.kind", "mound")),
    Case("no-bodies", "site file", "a site file with no fill bodies",
         lambda d: raw(SITE[:SITE.index(PAD)] + SITE[SITE.index(HOLE):])(d),
         names=("[bodies]",)),
    Case("bad-units", "site file", "units = \"imperial\"",
         site(('units = "SI"', 'units = "imperial"')), names=("site.units", "imperial")),
    Case("bad-crs", "site file", "an EPSG code that does not exist",
         site(('crs = "EPSG:32633"', 'crs = "EPSG:999999"')),
         names=("EPSG:999999", "[site.crs]")),
    Case("degree-crs", "site file", "a geographic (degree) CRS",
         site(('crs = "EPSG:32633"', 'crs = "EPSG:4326"')), names=("4326",)),
    Case("outline-one-point", "site file", "an outline with one vertex",
         site(('outline = [[500000.0, 5200000.0], [500020.0, 5200000.0], '
               '[500020.0, 5200012.0], [500000.0, 5200012.0]]',
               "outline = [[500000.0, 5200000.0]]")), names=("bodies.pad.outline",)),
    Case("outline-text", "site file", "an outline vertex written as text",
         site(("[500020.0, 5200000.0]", '["500020", "5200000"]')),
         names=("bodies.pad.outline", "item 1")),
    Case("outline-zero-area", "site file", "an outline whose vertices lie on a line",
         site(("[500020.0, 5200012.0], [500000.0, 5200012.0]",
               "[500010.0, 5200000.0], [500005.0, 5200000.0]")), names=("pad",)),
    Case("height-text", "site file", "height = \"two\"",
         site(("height = 2.0", 'height = "two"')), names=("bodies.pad.height", "number")),
    Case("height-bool", "site file", "height = true",
         site(("height = 2.0", "height = true")), names=("bodies.pad.height", "number")),
    Case("borehole-no-id", "site file", "a borehole without an id",
         site(('id = "B1"\n', "")), names=("boreholes[0].id", "required")),
    Case("borehole-bottom-above-top", "site file", "a borehole bottom above its top",
         site(("bottom = 6.0", "bottom = 0.5")), names=("boreholes[0].bottom",)),
    Case("soil-no-layers", "site file", "[soil] without layers",
         site(append="\n[soil]\nwater_table = 1.0\n"), names=("soil.layers",)),
    Case("soil-gap", "site file", "soil layers with a gap between them",
         site(append=SOIL + '\n[[soil.layers]]\nname = "sand"\ntop = 14.0\nbottom = 20.0\n'
              "unit_weight = 19.0\nmodulus = 40000.0\n"), names=("[soil]", "gap of 2 m")),
    Case("soil-unknown-key", "site file", "a soil key that the schema does not have",
         site(append=SOIL.replace("cv = 2.0", "incompressible = true")),
         names=("soil.layers[0].incompressible",)),
    Case("plan-extent-reversed", "site file", "a plan grid extent with xmax < xmin",
         site(append='\n[[plan_grids]]\nname = "p"\ndepths = [2.0]\n'
              "extent = [500020, 5200000, 500000, 5200012]\n"),
         names=("plan_grids[0].extent",)),
    Case("plan-name-path", "site file", "a plan grid name with a slash",
         site(append='\n[[plan_grids]]\nname = "../p"\ndepths = [2.0]\n'),
         names=("plan_grids",)),
    Case("stage-fraction", "site file", "stage = 1.5",
         site(("unit_weight = 20.0", "unit_weight = 20.0\nstage = 1.5")),
         names=("bodies.pad.stage", "whole number")),
    Case("stage-zero", "site file", "stage = 0",
         site(("unit_weight = 20.0", "unit_weight = 20.0\nstage = 0")),
         names=("bodies.pad.stage",)),
    Case("outputs-not-bool", "site file", "[outputs] report = \"no\"",
         site(append='\n[outputs]\nreport = "no"\n'), names=("outputs.report",)),

    # --- numbers -------------------------------------------------------------------
    Case("height-negative", "numbers", "a negative fill height",
         site(("height = 2.0", "height = -2.0")), names=("bodies.pad.height", "-2")),
    Case("height-nan", "numbers", "height = nan",
         site(("height = 2.0", "height = nan")), names=("bodies.pad.height", "finite")),
    Case("height-inf", "numbers", "height = inf",
         site(("height = 2.0", "height = inf")), names=("bodies.pad.height", "finite")),
    Case("unit-weight-zero", "numbers", "unit_weight = 0",
         site(("unit_weight = 20.0", "unit_weight = 0.0")), names=("bodies.pad.unit_weight",)),
    Case("cell-zero", "numbers", "cell = 0",
         site(("cell = 2.0", "cell = 0.0")), names=("grid.cell",)),
    Case("cell-negative", "numbers", "cell = -1",
         site(("cell = 2.0", "cell = -1.0")), names=("grid.cell",)),
    Case("cell-tiny", "numbers", "cell = 1e-6 (a micrometre grid)",
         site(("cell = 2.0", "cell = 1e-6"), command="check"),
         names=("grid", "GB", "cap")),
    Case("cell-tiny-run", "numbers", "cell = 1e-6 at run",
         site(("cell = 2.0", "cell = 1e-6")), names=("grid", "GB", "cap")),
    Case("margin-huge", "numbers", "margin = 1e7 (ten thousand kilometres)",
         site(("margin = 8.0", "margin = 1e7")), names=("grid", "GB", "cap")),
    Case("wrong-epsg", "numbers",
         "a Texas state-plane EPSG code declared over British-grid rasters and boreholes",
         lambda d: (british_grid_surfaces(d), site(
             ('crs = "EPSG:32633"', 'crs = "EPSG:2277"'),
             ('kind = "footprint"', 'kind = "surfaces"\ndesign = "design.tif"\n'
              'existing = "existing.tif"'),
             ('outline = [[500000.0, 5200000.0], [500020.0, 5200000.0], '
              '[500020.0, 5200012.0], [500000.0, 5200012.0]]\n', ""), ("height = 2.0\n", ""),
             ("x = 500010.0\ny = 5200006.0", "x = 431030.0\ny = 290980.0"),
             command="check")(d))[1],
         names=("grid", "TB", "cap", "[bodies.pad] lies", "borehole B1")),
    Case("margin-negative", "numbers", "margin = -5",
         site(("margin = 8.0", "margin = -5.0")), names=("grid.margin",)),
    Case("memory-cap-zero", "numbers", "memory_cap = 0",
         site(("cell = 2.0", "cell = 2.0\nmemory_cap = 0.0")), names=("grid.memory_cap",)),
    Case("memory-cap-tiny", "numbers", "memory_cap = 1e-9 GB (one byte)",
         site(("cell = 2.0", "cell = 2.0\nmemory_cap = 1e-9")), names=("cap",)),
    Case("poisson-half-check", "numbers", "Westergaard with Poisson's ratio 0.5 at check",
         site(("cell = 2.0", 'cell = 2.0\nmethod = "westergaard"\npoisson = 0.5'),
              command="check"), names=("grid.poisson", "0.5")),
    Case("poisson-half-run", "numbers", "Westergaard with Poisson's ratio 0.5 at run",
         site(("cell = 2.0", 'cell = 2.0\nmethod = "westergaard"\npoisson = 0.5')),
         names=("grid.poisson", "0.5")),
    Case("poisson-negative", "numbers", "poisson = -0.1",
         site(("cell = 2.0", "cell = 2.0\npoisson = -0.1")), names=("grid.poisson",)),
    Case("borehole-step-zero", "numbers", "a borehole step of 0",
         site(("step = 1.0", "step = 0.0")), names=("boreholes[0].step",)),
    Case("far-receptor", "numbers", "a borehole 1000 km east (a coordinate typo)", exit=0,
         build=site(("x = 500010.0", "x = 1500010.0"), command="check", args=()),
         warns="times the"),
    Case("far-receptor-diagonal", "numbers", "a borehole 1000 km north-east",
         site(("x = 500010.0", "x = 1500010.0"), ("y = 5200006.0", "y = 6200006.0"),
              command="check"), names=("analysis grid", "GB", "cap")),
    Case("fill-height-huge", "numbers", "a fill 1e6 m high", exit=0,
         build=site(("height = 2.0", "height = 1e6"), command="check", args=()),
         warns="1e+06"),
    Case("pile-repose-steep", "numbers", "a pile angle of repose of 95°",
         site(('kind = "footprint"', 'kind = "pile"'), ("height = 2.0", "repose_angle = 95.0")),
         names=("bodies.pad.repose_angle",)),
    Case("stage-days-mismatch-check", "numbers",
         "two stage start days for one stage, at check", exit=0,
         build=site(append=SOIL + "\n[settlement]\nstage_days = [0, 30]\n", command="check",
                    args=()), warns="stage_days"),
    Case("soil-negative-cc", "numbers", "a negative compression index",
         site(append=SOIL.replace("cc = 0.3", "cc = -0.3")), names=("soil.layers[0].cc",)),

    # --- every reader ----------------------------------------------------------------
    Case("survey-fifo", "reader", "a named pipe as the ground survey",
         ground("points", "fifo"), names=("ground.points", "named pipe")),
    Case("survey-dev-zero", "reader", "/dev/zero as the ground survey",
         site((HOLE, f'[ground]\npoints = "/dev/zero"\n\n{HOLE}')),
         names=("ground.points", "/dev/zero is a device")),
    Case("survey-folder", "reader", "a folder as the ground survey",
         ground("points", "dir"), names=("ground.points", "is a folder")),
    Case("survey-loop", "reader", "a symlink loop as the ground survey",
         ground("points", "loop"), names=("ground.points", "symbolic links")),
    Case("survey-missing", "reader", "a ground survey that does not exist",
         site((HOLE, f'[ground]\npoints = "gone.csv"\n\n{HOLE}')),
         names=("ground.points", "not found")),
    Case("survey-empty", "reader", "an empty survey file",
         ground("points", ""), names=("ground.csv", "no points")),
    Case("survey-no-z", "reader", "a survey header without a z column",
         ground("points", "x,y,h\n1,2,3\n"), names=("ground.csv", "z column")),
    Case("survey-text-row", "reader", "a survey row with text in it",
         ground("points", SURVEY + "500000,oops,10\n"), names=("ground.csv", "line 6")),
    Case("survey-nan", "reader", "a survey elevation of nan",
         ground("points", SURVEY + "500005,5200005,nan\n"), names=("ground.csv", "NaN")),
    Case("survey-two-points", "reader", "a survey of two points",
         ground("points", "x,y,z\n0,0,1\n5,5,1\n"), names=("ground.csv", "3 distinct")),
    Case("survey-clash", "reader", "two survey elevations at one point",
         ground("points", SURVEY + "499990,5199990,12\n"), names=("ground.csv",)),
    Case("survey-system-file", "reader", "a system text file given as the survey",
         ground("points", "root:x:0:0:root:/root:/bin/bash\nsecret line\n"),
         names=("ground.csv",), absent=("root:", "secret")),
    Case("survey-binary", "reader", "a binary file given as the survey",
         ground("points", b"\x89PNG\r\n\x1a\n\xff\xfe"), names=("ground.csv",)),
    Case("raster-not-tiff", "reader", "a text file named .tif as the ground raster",
         ground("raster", "not a tiff", "ground.tif"), names=("ground.tif",)),
    Case("raster-nodata-hole", "reader", "a ground raster with a nodata hole under the fill",
         lambda d: (ground_raster_with_hole(d / "dem.tif"),
                    site((HOLE, f'[ground]\nraster = "dem.tif"\n\n{HOLE}'),
                         args=("-q", "--no-report"))(d))[1],
         exit=0, creates=("out",), gives="runs: the footprint's load needs no ground"),
    Case("raster-nodata-under-surfaces", "reader",
         "a surfaces body over a ground raster with a nodata hole",
         lambda d: (ground_raster_with_hole(d / "dem.tif"), make(d / "top.csv", SURVEY.replace(
             ",10\n", ",12\n")), site(
             ('kind = "footprint"', 'kind = "surfaces"\ndesign = "top.csv"\nexisting = "dem.tif"'),
             ('outline = [[500000.0, 5200000.0], [500020.0, 5200000.0], '
              '[500020.0, 5200012.0], [500000.0, 5200012.0]]\n', ""), ("height = 2.0\n", ""),
             args=("--no-report",))(d))[2],
         exit=0, creates=("out",), warns="dem.tif has no data under"),
    Case("raster-folder", "reader", "a folder as the ground raster",
         ground("raster", "dir", "ground.tif"), names=("ground.raster", "is a folder")),
    Case("landxml-broken", "reader", "a LandXML file cut short",
         ground("landxml", "<LandXML><Surfaces>", "g.xml"), names=("g.xml", "well-formed")),
    Case("landxml-content", "reader", "a LandXML point holding text",
         ground("landxml", '<LandXML><Surfaces><Surface name="a"><Definition><Pnts>'
                '<P id="1">password hunter2</P></Pnts></Definition></Surface></Surfaces>'
                "</LandXML>", "g.xml"), names=("g.xml", "point 1"), absent=("hunter2",)),
    Case("vector-garbage", "reader", "a footprint file that is not a vector file",
         footprint_file("this is not json"), names=("pad.geojson",)),
    Case("vector-empty", "reader", "a footprint file with no features",
         footprint_file('{"type": "FeatureCollection", "features": []}'),
         names=("pad.geojson",)),
    Case("vector-points", "reader", "a footprint file of points, not polygons",
         footprint_file(GEOJSON_POINT), names=("pad.geojson",)),
    Case("vector-where-none", "reader", "a footprint selection that matches nothing",
         footprint_file(GEOJSON_POINT, extra='\nwhere = "zz"'), names=("pad.geojson",)),
    Case("vector-folder", "reader", "a folder as the footprint file",
         footprint_file("dir"), names=("bodies.pad.file", "is a folder")),
    Case("buildings-missing", "reader", "a buildings file that does not exist",
         site(append='\n[[buildings]]\nfile = "houses.geojson"\n'),
         names=("buildings[0].file", "not found")),
    Case("pipes-fifo", "reader", "a named pipe as the pipes file",
         site(append='\n[[pipes]]\nfile = "mains.geojson"\n', files={"mains.geojson": "fifo"}),
         names=("pipes[0].file", "named pipe")),
    Case("variants-missing", "reader", "a batch variants file that does not exist",
         lambda d: site(command="batch")(d)[:2] + [str(d / "v.toml"), "-o", str(d / "o"), "-q"],
         names=("v.toml", "not found")),
    Case("variants-not-toml", "reader", "a batch variants file that is not TOML",
         lambda d: (make(d / "v.toml", "[[variants"),
                    site(command="batch")(d)[:2] + [str(d / "v.toml"), "-o", str(d / "o"),
                                                    "-q"])[1],
         names=("v.toml", "TOML")),
    Case("variants-unknown-key", "reader", "a variants file with a misspelt key",
         lambda d: (make(d / "v.toml", '[[variants]]\nname = "a"\nhieght_factor = 2.0\n'),
                    site(command="batch")(d)[:2] + [str(d / "v.toml"), "-o", str(d / "o"),
                                                    "-q"])[1],
         names=("v.toml", "hieght_factor")),

    # --- the command line ----------------------------------------------------------
    Case("point-pair", "command line", "fillstress point with two numbers",
         lambda d: ["point", site()(d)[1], "500010", "5200006"], names=("xyz",)),
    Case("point-negative-depth", "command line", "a point above the ground (depth < 0)",
         lambda d: ["point", site()(d)[1], "500010", "5200006", "-2"], names=("depth",)),
    Case("point-text", "command line", "a coordinate written as text",
         lambda d: ["point", site()(d)[1], "east", "5200006", "2"], names=("xyz", "east")),
    Case("unknown-command", "command line", "a command that does not exist",
         argv("compute", "site.toml"), names=("compute",)),
    Case("unknown-option", "command line", "an option that does not exist",
         lambda d: ["run", site()(d)[1], "--fast"], names=("--fast",)),
    Case("workers-negative", "command line", "--workers -1",
         site(args=("-q", "--workers", "-1")), names=("--workers",)),
    Case("workers-zero", "command line", "--workers 0", exit=0,
         build=site(args=("--workers", "0", "--no-report")), warns="--workers 0",
         creates=("out",)),
    Case("workers-and-scheduler", "command line", "--workers and --scheduler together",
         site(args=("-q", "--workers", "2", "--scheduler", "tcp://127.0.0.1:1")),
         names=("--workers",)),
    Case("scheduler-unreachable", "command line", "a Dask scheduler that is not there",
         site(args=("-q", "--scheduler", "tcp://127.0.0.1:9")), names=("--scheduler",
                                                                          "127.0.0.1:9")),
    Case("out-exists", "command line", "a results folder that exists, without --overwrite",
         lambda d: (make(d / "out", "dir"), site()(d))[1], names=("out", "--overwrite")),
    Case("out-site-folder", "command line", "--overwrite on the site's own folder",
         lambda d: ["run", site()(d)[1], "-o", str(d), "--overwrite", "-q"],
         names=("holds site.toml",)),
    Case("out-not-results", "command line", "--overwrite on a folder of other files",
         lambda d: (make(d / "docs", "dir"), make(d / "docs" / "letter.txt", "keep"),
                    ["run", site()(d)[1], "-o", str(d / "docs"), "--overwrite", "-q"])[2],
         names=("docs", "not a fillstress results folder")),
    Case("out-read-only", "command line", "a results folder where nothing can be written",
         lambda d: ["run", site()(d)[1], "-o", "/sys/fillstress-results", "-q"],
         names=("/sys", "cannot create the results folder")),
    Case("out-is-file", "command line", "a results folder name that is a file",
         lambda d: ["run", site()(d)[1], "-o", site()(d)[1], "--overwrite", "-q"],
         names=("site.toml",)),
    Case("report-not-results", "command line", "fillstress report on a folder of other files",
         argv("report", "{d}"), names=("not a fillstress results folder",)),
    Case("report-manifest-link", "command line",
         "a results folder whose manifest is a link to a file outside",
         lambda d: (make(d / "res", "dir"), make(d / "m.json", '{"program": "fillstress"}'),
                    os.symlink(d / "m.json", d / "res" / "manifest.json"),
                    ["report", str(d / "res"), "-q"])[3],
         names=("manifest.json", "outside the results folder")),
    Case("view-not-results", "command line", "fillstress view on a folder of other files",
         argv("view", "{d}", "--png", "{d}/v.png"), names=("not a fillstress results folder",)),
    Case("view-no-display", "command line", "fillstress view with no display and no --png",
         lambda d: (main_run(d), ["view", str(d / "out")])[1],
         names=("no display", "--png")),
    Case("view-bad-quantity", "command line", "fillstress view --quantity stress",
         lambda d: (main_run(d), ["view", str(d / "out"), "--png", str(d / "v.png"),
                                  "--quantity", "stress"])[1],
         names=("quantity", "stress")),
    Case("example-unknown", "command line", "an example name that does not exist",
         argv("example", "moon_base", "-o", "{d}/o"), names=("moon_base",)),
    Case("limits-unknown-receptor", "site file", "a [[limits.overrides]] entry for a "
         "receptor the site does not have",
         site(append='\n[limits]\nstress_ratio = 0.2\n[[limits.overrides]]\n'
              'receptor = "B9"\nstress_ratio = 0.3\n', command="check"),
         names=("limits.overrides[0].receptor", "'B9'")),
    Case("limits-misspelt-key", "site file", "[limits] settlment = 50 (misspelt)",
         site(append="\n[limits]\nsettlment = 50.0\n", command="check"),
         names=("limits.settlment", "did you mean 'settlement'")),
    Case("limits-length-missing", "site file", "[limits] pipe_differential without its length",
         site(append="\n[limits]\npipe_differential = 20.0\n", command="check"),
         names=("limits.pipe_differential", "pipe_differential_length")),
    Case("odds-negative-cov", "site file", "an uncertain Cc with cov = -0.2",
         site(append=SOIL + ODDS.format(extra='distribution = "lognormal"\ncov = -0.2'),
              command="check"),
         names=("uncertainty.parameters[0].cov", "-0.2")),
    Case("odds-unknown-distribution", "site file", 'distribution = "lognorm" (no such name)',
         site(append=SOIL + ODDS.format(extra='distribution = "lognorm"\ncov = 0.3'),
              command="check"),
         names=("uncertainty.parameters[0].distribution", "did you mean 'lognormal'")),
    Case("odds-misspelt-key", "site file", "distrbution = ... in [[uncertainty.parameters]]",
         site(append=SOIL + ODDS.format(extra='distrbution = "normal"\ncov = 0.3'),
              command="check"),
         names=("uncertainty.parameters[0].distrbution", "did you mean 'distribution'")),
    Case("odds-unknown-layer", "site file", "an uncertain parameter of a layer the soil has "
         "not", site(append=SOIL + ODDS.format(extra='distribution = "normal"\ncov = 0.3')
                     .replace('layer = "grey silty clay"', 'layer = "peat"'), command="check"),
         names=("uncertainty.parameters[0].layer", "'peat'")),
    Case("odds-normal-below-zero", "site file", "a normal Cc so wide that samples fall below "
         "zero", site(append=SOIL + ODDS.format(extra='distribution = "normal"\ncov = 0.9')),
         names=("uncertainty.parameters[0]", "lognormal")),
    Case("check-folder", "command line", "fillstress check on a folder",
         argv("check", "{d}"), names=("is a folder",)),

    # --- successful runs that used to fail --------------------------------------------
    Case("embankment-plus-footprint", "site file", "an embankment with a preload footprint",
         site(append='\n[bodies.bank]\nkind = "embankment"\n'
              "centreline = [[499990.0, 5200020.0], [500030.0, 5200020.0]]\n"
              "crest_width = 4.0\nside_slope = 2.0\nheights = [[0, 2.0], [40, 3.0]]\n"
              "unit_weight = 19.0\n", args=("-q", "--no-report")),
         exit=0, creates=("out",)),
    Case("unicode-ids", "site file", "a borehole named Bohrloch-Ü", exit=0,
         build=site(('id = "B1"', 'id = "Bohrloch-Ü"'), args=("-q", "--no-report")),
         creates=("out",)),
    Case("outputs-report-false", "site file", "[outputs] report = false and scene = false",
         site(append="\n[outputs]\nreport = false\nscene = false\n"), exit=0,
         creates=("out",), forbids=("out/report.html", "out/scene.html")),
    Case("markup-in-names", "site file", "a file named pad:x:.geojson that is missing",
         footprint_file("dir", fname="pad[bold]:x:.geojson"),
         names=("pad[bold]:x:.geojson",)),
]
