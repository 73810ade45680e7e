"""GeoTIFF writing of one 2-D array on the analysis lattice.

In memory row 0 is the southern row (see :class:`~fillstress.grid.GridSpec`); a GeoTIFF is
north-up, so rows are flipped on the way out. Values are float32 in the output unit;
NaN marks "no value" and is declared as the nodata value. The band unit is GDAL's own
unit field (QGIS and ``gdalinfo`` show it; rasterio ``ds.units``).

Files are Cloud-Optimized GeoTIFFs (GDAL's COG driver): 256 × 256 tiles, overviews for
rasters larger than a tile, DEFLATE with the floating-point predictor, IFDs before the
data; :func:`cog_problems` checks that structure.
"""
from __future__ import annotations

import os

import numpy as np
from affine import Affine

from ..crs import as_crs
from ..errors import InputError
from ..grid import GridSpec
from ..units import SI, UnitSystem
from .atomic import write_atomic
from .tables import plan_unit, to_output_units, unit_label

# rasterio (GDAL) is imported inside the functions that use it: it is slow to load and
# most commands never need it.


# Deflate at level 1: a third of the default level's (6) time for files some 6 % larger,
# on the floating-point predictor's bytes; every deflate reader reads every level.
COG_OPTIONS = dict(compress="deflate", level=1, predictor=3, blocksize=256, overviews="auto")


def rasterio_crs(crs):
    """A rasterio CRS from anything pyproj understands (None stays None)."""
    if crs is None:
        return None
    from rasterio.crs import CRS as RioCRS

    return RioCRS.from_wkt(as_crs(crs, "crs").to_wkt())


def north_up(array: np.ndarray) -> np.ndarray:
    """Rows reordered from south-first (memory) to north-first (raster file).

    Examples
    --------
    >>> north_up(np.array([[1, 2], [3, 4]])).tolist()
    [[3, 4], [1, 2]]
    """
    return np.ascontiguousarray(array[::-1, :])


def crs_transform(grid: GridSpec, crs=None):
    """North-up affine transform of `grid` (internal metres) in the units of `crs`.

    Examples
    --------
    >>> t = crs_transform(GridSpec(3048.0, 0.0, 3.048, 3.048, 2, 1), "EPSG:2263")
    >>> t.a, t.c, t.f
    (9.99998, 9999.98, 9.99998)
    """

    f = plan_unit(crs)[1] if crs is not None else 1.0
    top = grid.y0 + grid.ny * grid.dy
    # Rounded to 1e-7 CRS units: the lattice is round in CRS units (GridSpec.covering), and
    # rasters cut from it must carry the same numbers, not the metre round trip's 1e-9.
    a, c, e, f_ = (round(v / f, 7) for v in (grid.dx, grid.x0, grid.dy, top))
    return Affine(a, 0.0, c, 0.0, -e, f_)


def write_geotiff(path, array, grid: GridSpec, *, quantity: str | None,
                  units: UnitSystem = SI, description: str = "", crs=None) -> os.PathLike:
    """Write `array` (SI, shape ``grid.shape``, row 0 south) as a single-band GeoTIFF.

    Parameters
    ----------
    path : str or path-like
        Output ``.tif``; written atomically.
    array : array_like, shape (ny, nx)
        Values in SI; NaN for "no value", infinities refused.
    grid : GridSpec
        Lattice in internal metres; the file's transform is in the CRS's unit.
    quantity : {"length", "pressure", "settlement", ...} or None
        Converts values to `units`; None for dimensionless values.
    units : UnitSystem
        Output unit system; its label is stored in the band's ``units`` tag.
    description : str
        Band description (e.g. ``"fill thickness"``).
    crs : optional
        Overrides ``grid.crs``.

    Examples
    --------
    >>> import tempfile, os, rasterio
    >>> g = GridSpec(0.0, 0.0, 1.0, 1.0, nx=2, ny=2, crs="EPSG:32633")
    >>> f = os.path.join(tempfile.mkdtemp(), "t.tif")
    >>> _ = write_geotiff(f, [[1.0, 2.0], [3.0, 4.0]], g, quantity="length")
    >>> with rasterio.open(f) as src:
    ...     src.read(1).tolist(), src.units, tuple(map(float, src.xy(0, 0)))
    ([[3.0, 4.0], [1.0, 2.0]], ('m',), (0.5, 1.5))
    >>> cog_problems(f)
    []
    """
    import rasterio

    if not isinstance(grid, GridSpec):
        raise InputError(f"must be a GridSpec, got {type(grid).__name__}", argument="grid")
    try:
        values = np.asarray(array, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise InputError(f"must be numeric ({exc})", argument="array") from None
    if values.shape != grid.shape:
        raise InputError(f"must have the grid shape {grid.shape}, got {values.shape}",
                         argument="array")
    if np.any(np.isinf(values)):
        raise InputError("holds infinite values", argument="array")
    site = crs if crs is not None else grid.crs
    label = "" if quantity is None else unit_label(units, quantity)
    data = north_up(to_output_units(values, units, quantity)).astype(np.float32)
    profile = dict(driver="COG", width=grid.nx, height=grid.ny, count=1,
                   dtype="float32", crs=rasterio_crs(site), transform=crs_transform(grid, site),
                   nodata=np.nan, **COG_OPTIONS)

    def write(tmp):
        with rasterio.open(tmp, "w", **profile) as dst:
            dst.write(data, 1)
            dst.set_band_description(1, description)
            dst.units = (label,)
            dst.update_tags(1, units=label)

    return write_atomic(path, write)


def cog_problems(path) -> list[str]:
    """What keeps the GeoTIFF at `path` from being a Cloud-Optimized GeoTIFF (empty = none).

    Checks the layout GDAL records in the file (the structural-metadata header of its COG
    driver: IFDs before the data, ``KNOWN_INCOMPATIBLE_EDITION=NO``), that the first IFD
    precedes the first tile, internal tiling, and overviews on rasters larger than a tile.
    """
    import rasterio

    with open(path, "rb") as fh:
        head = fh.read(512)
    problems = []
    if head[:4] != b"II*\x00":
        return ["not a little-endian classic TIFF"]
    ghost = head[8:].split(b"\x00", 1)[0].decode("ascii", "replace")
    if "LAYOUT=IFDS_BEFORE_DATA" not in ghost:
        problems.append("no GDAL COG header (LAYOUT=IFDS_BEFORE_DATA)")
    if "KNOWN_INCOMPATIBLE_EDITION=NO" not in ghost:
        problems.append("edited after writing (KNOWN_INCOMPATIBLE_EDITION)")
    first_ifd = int.from_bytes(head[4:8], "little")
    with rasterio.open(path) as src:
        if src.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") != "COG":
            problems.append("GDAL does not report LAYOUT=COG")
        tiled = bool(src.profile.get("tiled"))
        tile = src.block_shapes[0][1] if tiled else 256
        if not tiled:
            problems.append("not tiled")
        if max(src.width, src.height) > tile and not src.overviews(1):
            problems.append("no overviews")
        offset = src.get_tag_item("BLOCK_OFFSET_0_0", "TIFF", bidx=1)
        if offset is not None and int(offset) < first_ifd:
            problems.append("image data before the first IFD")
    return problems
