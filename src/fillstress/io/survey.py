"""Read survey points (x, y, z) and triangulate them into a TIN surface.

Accepted text: CSV (comma, semicolon or tab) or whitespace-separated columns, with a
header naming the columns or, without a header, exactly three columns x y z. Lines
starting with ``#`` are comments. The points are triangulated over the surveyed area
(:func:`fillstress.shapes.surfaces.survey_triangles`: Delaunay, less the outer triangles
whose longest edge exceeds 5 times the median edge); the surface is NaN outside it.
"""
from __future__ import annotations

import os
import re

import numpy as np

from .. import crs as crsmod
from .._validate import positive
from ..errors import InputError
from ..shapes.surfaces import TinSurface

#: Header names recognised for each coordinate (case-insensitive).
COLUMN_NAMES = {
    "x": ("x", "easting", "east", "e"),
    "y": ("y", "northing", "north", "n"),
    "z": ("z", "elevation", "elev", "level", "height"),
}


def _split(line: str) -> list[str]:
    return [t for t in re.split(r"[,;\t]|\s+", line.strip()) if t != ""]


def _is_number(token: str) -> bool:
    try:
        float(token)
    except ValueError:
        return False
    return True


def _columns(header: list[str], path) -> list[int]:
    names = [h.strip().strip('"').lower() for h in header]
    found = []
    for axis, aliases in COLUMN_NAMES.items():
        hits = [k for k, n in enumerate(names) if n in aliases]
        if len(hits) != 1:
            # the header is not echoed: the file may not be a survey at all
            raise InputError(f"the header (first line) needs exactly one {axis} column, "
                             f"named one of {', '.join(aliases)}; found {len(hits)}", file=path)
        found.append(hits[0])
    return found


def parse_survey_text(text: str, path="points") -> np.ndarray:
    """Parse survey text into an (N, 3) array of x, y, z.

    Examples
    --------
    >>> parse_survey_text("id,easting,northing,elevation\\n1,10,20,5.5\\n").tolist()
    [[10.0, 20.0, 5.5]]
    >>> parse_survey_text("0 0 1\\n4 0 2\\n").shape
    (2, 3)
    """
    rows = [(k + 1, _split(line)) for k, line in enumerate(text.splitlines())
            if line.strip() and not line.lstrip().startswith("#")]
    if not rows:
        raise InputError("holds no points", file=path)
    first = rows[0][1]
    if all(_is_number(t) for t in first):
        if len(first) != 3:
            raise InputError(f"without a header each line must be 'x y z'; line "
                             f"{rows[0][0]} has {len(first)} values", file=path)
        cols = [0, 1, 2]
    else:
        cols, rows = _columns(first, path), rows[1:]
    out = np.empty((len(rows), 3))
    for n, (line_no, tokens) in enumerate(rows):
        try:
            out[n] = [float(tokens[c]) for c in cols]
        except (IndexError, ValueError):
            raise InputError(f"line {line_no} is not a point (needs a number in each of "
                             f"the x, y, z columns)", file=path) from None
    bad = np.flatnonzero(~np.all(np.isfinite(out), axis=1))
    if bad.size:
        raise InputError(f"point {bad[0] + 1} has a NaN or infinite value", file=path)
    return out


def _drop_repeats(points: np.ndarray, path) -> np.ndarray:
    """Drop repeated identical points; refuse two elevations at one x, y."""
    xy, first, inverse = np.unique(points[:, :2], axis=0, return_index=True,
                                   return_inverse=True)
    z_first = points[first, 2][inverse.ravel()]
    clash = np.flatnonzero(~np.isclose(points[:, 2], z_first, rtol=0, atol=1e-6))
    if clash.size:
        k = clash[0]
        raise InputError(f"two points at x={points[k, 0]:g}, y={points[k, 1]:g} have "
                         f"different elevations", file=path)
    return points[np.sort(first)]


def read_survey_points(path, site_crs=None, *, crs=None, z_to_m: float = 1.0) -> TinSurface:
    """Read survey points and return their TIN in internal site metres.

    Parameters
    ----------
    path : str or path-like
        Text file of points (see the module docstring).
    site_crs : (pyproj.CRS, float) or CRS-like, optional
        The site CRS. The file is taken to be in it unless `crs` says otherwise.
    crs : CRS-like, optional
        The CRS of the file's x, y (text files carry none).
    z_to_m : float
        Metres per elevation unit.

    Returns
    -------
    TinSurface

    Examples
    --------
    >>> import tempfile, os
    >>> f = os.path.join(tempfile.mkdtemp(), "ground.csv")
    >>> _ = open(f, "w").write("x,y,z\\n0,0,10\\n20,0,12\\n0,20,10\\n20,20,12\\n")
    >>> s = read_survey_points(f, "EPSG:32632")
    >>> float(s.sample(10.0, 10.0))
    11.0
    """
    factor = positive(z_to_m, "z_to_m")
    if not os.path.exists(path):
        raise InputError("file not found", file=path)
    try:
        with open(path, encoding="utf-8-sig") as fh:
            text = fh.read()
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot be read as text ({exc})", file=path) from None
    points = _drop_repeats(parse_survey_text(text, path), path)
    if len(points) < 3:
        raise InputError(f"needs at least 3 distinct points, got {len(points)}", file=path)
    layer, site = crsmod.layer_and_site(crs, site_crs, file=path)
    points = crsmod.to_site(points, layer, site, file=path)
    points[:, 2] *= factor
    return TinSurface.from_points(points, crs=crsmod.metric_twin(site[0]), source=str(path))
