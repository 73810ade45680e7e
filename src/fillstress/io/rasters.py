"""Read a GeoTIFF (or any single-band raster rasterio opens) as an elevation surface.

The raster keeps its own pixels; :class:`~fillstress.shapes.surfaces.RasterSurface`
samples it bilinearly at internal site coordinates, so resampling onto a
:class:`~fillstress.grid.GridSpec` is done by the cell-average routines of
:mod:`fillstress.shapes.surfaces`. Nodata pixels (the band mask) become NaN: no fill.
"""
from __future__ import annotations

import os

import numpy as np
import pyproj

from .. import crs as crsmod
from .._validate import positive
from ..errors import InputError
from ..shapes.surfaces import RasterSurface

# rasterio (GDAL) is imported inside the functions that use it: it is slow to load and
# most commands never need it.


def read_raster_surface(path, site_crs=None, *, crs=None, band: int = 1,
                        z_to_m: float = 1.0) -> RasterSurface:
    """Open a north-up elevation raster as a surface in internal site metres.

    Parameters
    ----------
    path : str or path-like
        GeoTIFF (or other rasterio-readable) file.
    site_crs : (pyproj.CRS, float) or CRS-like, optional
        The site CRS; the raster is sampled through a pyproj transform when it is in
        another CRS. None: the raster's own CRS becomes the site CRS.
    crs : CRS-like, optional
        CRS to assume when the file states none (else the site CRS is assumed).
    band : int
        Band number (1-based).
    z_to_m : float
        Metres per elevation unit (0.3048 for feet).

    Returns
    -------
    RasterSurface

    Examples
    --------
    >>> import rasterio, tempfile, os, numpy as np
    >>> from affine import Affine
    >>> f = os.path.join(tempfile.mkdtemp(), "dem.tif")
    >>> with rasterio.open(f, "w", driver="GTiff", width=2, height=2, count=1,
    ...                    dtype="float32", crs="EPSG:32632", nodata=-9999.0,
    ...                    transform=Affine(10, 0, 500000, 0, -10, 6000020)) as ds:
    ...     ds.write(np.array([[12, 14], [10, -9999]], dtype="float32"), 1)
    >>> s = read_raster_surface(f)
    >>> float(s.sample(500005.0, 6000015.0)), bool(np.isnan(s.sample(500015.0, 6000005.0)))
    (12.0, True)
    """
    import rasterio
    factor = positive(z_to_m, "z_to_m")
    if not os.path.exists(path):
        raise InputError("file not found", file=path)
    try:
        with rasterio.open(path) as ds:
            if not 1 <= band <= ds.count:
                raise InputError(f"has {ds.count} band(s); band {band} does not exist",
                                 file=path)
            t = ds.transform
            file_crs = ds.crs.to_wkt() if ds.crs else None
            z = ds.read(band, masked=True).astype(float).filled(np.nan)
    except rasterio.errors.RasterioError as exc:
        raise InputError(f"cannot be read as a raster ({exc})", file=path) from None
    if t.b != 0 or t.d != 0 or t.a <= 0 or t.e >= 0:
        raise InputError(f"is not a north-up raster (transform {tuple(t)[:6]}); warp it "
                         "north-up first", file=path)
    if not np.isfinite(z).any():
        raise InputError("holds only nodata (no elevation anywhere)", file=path)
    rows, cols = z.shape
    corners = np.array([[t.c, t.f], [t.c + cols * t.a, t.f + rows * t.e]])
    crsmod.check_degrees(corners, file_crs or crs, file=path)
    layer, site = crsmod.layer_and_site(file_crs or crs, site_crs, file=path)
    surface = _surface(z * factor, t, layer, site, str(path))
    surface.moved_m = crsmod.near_miss_shift(corners.mean(axis=0), layer, site)
    return surface


def _surface(z, t, layer, site, source) -> RasterSurface:
    site_crs, f = site
    twin = crsmod.metric_twin(site_crs)
    if layer.equals(site_crs):
        return RasterSurface(z, t.c * f, t.f * f, t.a * f, -t.e * f, crs=twin, source=source)
    to_layer = pyproj.Transformer.from_crs(site_crs, layer, always_xy=True)
    to_site = pyproj.Transformer.from_crs(layer, site_crs, always_xy=True)
    rows, cols = z.shape
    xmin, ymin, xmax, ymax = to_site.transform_bounds(t.c, t.f + rows * t.e,
                                                      t.c + cols * t.a, t.f, densify_pts=21)

    def to_raster(x, y):
        return to_layer.transform(np.asarray(x) / f, np.asarray(y) / f)

    return RasterSurface(z, t.c, t.f, t.a, -t.e, crs=twin, to_raster=to_raster,
                         source=source, bounds=(xmin * f, ymin * f, xmax * f, ymax * f))
