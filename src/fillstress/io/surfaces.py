"""Surface files of any kind, each read by its own reader: GeoTIFF rasters, LandXML TINs
and survey points (see :mod:`fillstress.shapes.surfaces` for what a surface is)."""
from __future__ import annotations

import os

from .landxml import read_landxml_surface
from .rasters import read_raster_surface
from .survey import read_survey_points


def read_surface(path, site_crs=None, *, z_to_m: float = 1.0, surface_name=None, crs=None):
    """Read a surface file, choosing the reader by its suffix.

    ``.tif``/``.tiff`` → GeoTIFF (:func:`fillstress.io.rasters.read_raster_surface`),
    ``.xml``/``.landxml`` → LandXML (:func:`fillstress.io.landxml.read_landxml_surface`;
    `z_to_m` only when the file declares no units), anything else → survey points
    (:func:`fillstress.io.survey.read_survey_points`).

    Parameters
    ----------
    path : str or path-like
        The surface file.
    site_crs : (pyproj.CRS, float) or CRS-like, optional
        The site CRS; a surface in another CRS is reprojected. None: the file's own CRS
        becomes the site CRS.
    z_to_m : float
        Metres per elevation unit (0.3048 for feet).
    surface_name : str, optional
        Which ``Surface`` of a LandXML file (its ``name``); default the first.
    crs : CRS-like, optional
        CRS to assume when the file states none.

    Returns
    -------
    RasterSurface or TinSurface
        Elevations (m) in internal site metres: ``sample(x, y)``, ``bounds``.

    Examples
    --------
    >>> import tempfile, os
    >>> f = os.path.join(tempfile.mkdtemp(), "pts.txt")
    >>> _ = open(f, "w").write("0 0 1\\n10 0 1\\n0 10 1\\n")
    >>> read_surface(f, "EPSG:32632").bounds
    (0.0, 0.0, 10.0, 10.0)
    """
    suffix = os.path.splitext(str(path))[1].lower()
    if suffix in (".tif", ".tiff"):
        return read_raster_surface(path, site_crs, crs=crs, z_to_m=z_to_m)
    if suffix in (".xml", ".landxml"):
        return read_landxml_surface(path, site_crs, surface_name=surface_name, crs=crs,
                                    z_to_m=z_to_m)
    return read_survey_points(path, site_crs, crs=crs, z_to_m=z_to_m)
