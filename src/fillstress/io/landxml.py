"""Read a TIN surface from LandXML (1.1 or 1.2).

Structure used: ``LandXML/Surfaces/Surface/Definition/Pnts/P`` (attribute ``id``, text
"northing easting elevation" — LandXML puts northing first) and ``Faces/F`` (text: three
point ids; a face with ``i="1"`` is invisible and is skipped). Elevation units come from
``Units/Metric`` or ``Units/Imperial`` (``linearUnit``); the CRS from
``CoordinateSystem/@epsgCode`` when present.
"""
from __future__ import annotations

import os
import xml.etree.ElementTree as ET

import numpy as np

from .. import crs as crsmod
from .._validate import positive
from ..errors import InputError
from ..shapes.surfaces import TinSurface
from ..units import FOOT, US_SURVEY_FOOT

NAMESPACES = ("http://www.landxml.org/schema/LandXML-1.2",
              "http://www.landxml.org/schema/LandXML-1.1")

#: linearUnit values of the LandXML schema and their metres.
LINEAR_UNITS = {"meter": 1.0, "millimeter": 1e-3, "centimeter": 1e-2, "kilometer": 1e3,
                "foot": FOOT, "ussurveyfoot": US_SURVEY_FOOT, "inch": FOOT / 12.0}


def _local(tag: str) -> str:
    return tag.rsplit("}", 1)[-1]


def _children(node, name: str):
    return [c for c in node if _local(c.tag) == name]


def _child(node, name: str):
    found = _children(node, name)
    return found[0] if found else None


def _parse(path):
    try:
        root = ET.parse(path).getroot()
    except ET.ParseError as exc:
        raise InputError(f"is not well-formed XML ({exc})", file=path) from None
    ns = root.tag[1:].split("}")[0] if root.tag.startswith("{") else ""
    if _local(root.tag) != "LandXML" or (ns and ns not in NAMESPACES):
        raise InputError(f"is not LandXML 1.1/1.2 (root {root.tag!r})", file=path)
    return root


def _pick_surface(root, name, path):
    surfaces_node = _child(root, "Surfaces")
    surfaces = [] if surfaces_node is None else _children(surfaces_node, "Surface")
    if not surfaces:
        raise InputError("holds no Surfaces/Surface", file=path)
    names = [s.get("name") for s in surfaces]
    if name is None:
        return surfaces[0]
    if name not in names:
        raise InputError(f"has no surface named {name!r}; surfaces are {names}", file=path)
    return surfaces[names.index(name)]


def _numbers(text, count, what, path):
    parts = (text or "").split()
    try:
        values = [float(p) for p in parts]
    except ValueError:
        values = []
    if len(values) != count:
        raise InputError(f"{what} must hold {count} numbers, got {len(parts)} item(s)",
                         file=path)
    return values


def _tin(surface, path):
    definition = _child(surface, "Definition")
    pnts = None if definition is None else _child(definition, "Pnts")
    faces = None if definition is None else _child(definition, "Faces")
    if pnts is None or not _children(pnts, "P"):
        raise InputError("surface has no Definition/Pnts/P points", file=path)
    ids, points = {}, []
    for p in _children(pnts, "P"):
        pid = p.get("id")
        if pid is None or pid in ids:
            raise InputError(f"point id {pid!r} is missing or repeated", file=path)
        n, e, z = _numbers(p.text, 3, f"point {pid}", path)
        ids[pid] = len(points)
        points.append((e, n, z))  # LandXML order is northing easting elevation
    tris = []
    for k, f in enumerate([] if faces is None else _children(faces, "F"), start=1):
        if f.get("i") == "1":
            continue
        refs = (f.text or "").split()
        if len(refs) != 3:
            raise InputError(f"face {k} must name 3 points, names {len(refs)}", file=path)
        try:
            tris.append([ids[r] for r in refs])
        except KeyError:
            raise InputError(f"face {k} refers to an unknown point (no P element has its id)",
                             file=path) from None
    if not tris:
        raise InputError("surface has no visible Faces/F triangles", file=path)
    return np.array(points, dtype=float), np.array(tris, dtype=int)


def _units(root, path):
    units = _child(root, "Units")
    node = None
    if units is not None:  # (an Element with no children is falsy: test for None)
        metric = _child(units, "Metric")
        node = metric if metric is not None else _child(units, "Imperial")
    if node is None or node.get("linearUnit") is None:
        return None
    unit = node.get("linearUnit").lower()
    if unit not in LINEAR_UNITS:
        raise InputError(f"unknown linearUnit {node.get('linearUnit')!r}", file=path)
    return LINEAR_UNITS[unit]


def _file_crs(root):
    cs = _child(root, "CoordinateSystem")
    if cs is None:
        return None
    if cs.get("epsgCode"):
        return f"EPSG:{cs.get('epsgCode')}"
    return cs.get("ogcWktCode") or None


def read_landxml_surface(path, site_crs=None, *, surface_name=None, crs=None,
                         z_to_m=None) -> TinSurface:
    """Read one TIN surface of a LandXML file into internal site metres.

    Parameters
    ----------
    path : str or path-like
        LandXML 1.1 or 1.2 file.
    site_crs : (pyproj.CRS, float) or CRS-like, optional
        The site CRS.
    surface_name : str, optional
        Which ``Surface`` (its ``name``); default the first.
    crs : CRS-like, optional
        CRS of the file when it states none (else the site CRS is assumed).
    z_to_m : float, optional
        Metres per elevation unit when the file declares no ``Units``; default 1.

    Returns
    -------
    TinSurface

    Examples
    --------
    >>> import tempfile, os
    >>> xml = '''<LandXML xmlns="http://www.landxml.org/schema/LandXML-1.2">
    ... <Units><Metric linearUnit="meter"/></Units><Surfaces><Surface name="ground">
    ... <Definition surfType="TIN"><Pnts><P id="1">0 0 10</P><P id="2">0 10 12</P>
    ... <P id="3">10 0 10</P></Pnts><Faces><F>1 2 3</F></Faces></Definition>
    ... </Surface></Surfaces></LandXML>'''
    >>> f = os.path.join(tempfile.mkdtemp(), "ground.xml")
    >>> _ = open(f, "w").write(xml)
    >>> s = read_landxml_surface(f, "EPSG:32632")
    >>> float(s.sample(5.0, 2.0))   # x = easting 5, y = northing 2
    11.0
    """
    given = 1.0 if z_to_m is None else positive(z_to_m, "z_to_m")
    if not os.path.exists(path):
        raise InputError("file not found", file=path)
    root = _parse(path)
    points, tris = _tin(_pick_surface(root, surface_name, path), path)
    declared = _units(root, path)
    factor = given if declared is None else declared
    layer, site = crsmod.layer_and_site(_file_crs(root) or crs, site_crs, file=path)
    moved = crsmod.near_miss_shift(points[:, :2].mean(axis=0), layer, site)
    points = crsmod.to_site(points, layer, site, file=path)
    points[:, 2] *= factor
    surface = TinSurface(points, tris, crs=crsmod.metric_twin(site[0]), source=str(path))
    surface.moved_m = moved
    return surface
