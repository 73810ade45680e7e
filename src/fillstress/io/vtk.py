"""VTK files for a 3-D view: fill surface, stress grids, buildings, pipes and boreholes,
and a bundle that opens them together.

All coordinates are in the output length unit, in one vertical frame: ``z`` is height
above the existing ground (``z = 0``), so below-ground objects sit at ``z = -depth`` and
the fill surface at ``z = thickness``; they overlay in any viewer. The ground elevation,
when the site has one, is point data of the fill surface. Array names carry their unit
(``dsz_kPa``, ``thickness_m``, ``depth_ft``, ``settlement_mm``; no ``/``), and the field
array ``units`` lists the units too. pyvista is imported only when a writer runs.
"""
from __future__ import annotations

import os

import numpy as np
import pandas as pd
import shapely
from shapely.geometry import Polygon

from ..errors import InputError
from ..grid import GridSpec
from ..units import SI, UnitSystem
from .atomic import write_atomic
from .netcdf import SLICE_DIMS
from .tables import column_suffix, to_output_units, unit_label

# pyvista (VTK) is imported inside the functions that use it: it is slow to load and
# most commands never need it.


def _units_note(units: UnitSystem) -> np.ndarray:
    return np.array([f"{q}={unit_label(units, q)}" for q in ("length", "pressure", "settlement")])


def _save(path, mesh, compressor: str = "zlib") -> os.PathLike:
    """Write `mesh` as VTK XML (``.vtp``, ``.vtr``, by the extension), atomically.

    The arrays go raw into the appended block (no base64 text: a quarter smaller, and
    nothing to encode), compressed by `compressor`: ``"zlib"`` at level 1 for meshes whose
    regular coordinates and connectivity shrink several-fold, ``"lz4"`` for fields of
    double-precision stresses that hardly compress (zlib spent twenty times as long to
    save a few per cent). Every VTK reader since 8.1 (pyvista, ParaView) decompresses both.
    """
    from vtkmodules.vtkIOXML import vtkXMLPolyDataWriter, vtkXMLRectilinearGridWriter

    writer_class = {".vtp": vtkXMLPolyDataWriter, ".vtr": vtkXMLRectilinearGridWriter}

    def write(tmp):
        writer = writer_class[tmp.suffix]()
        writer.SetFileName(str(tmp))
        writer.SetInputData(mesh)
        writer.SetDataModeToAppended()
        writer.EncodeAppendedDataOff()
        if compressor == "lz4":
            writer.SetCompressorTypeToLZ4()
        else:
            writer.SetCompressorTypeToZLib()
            writer.SetCompressionLevel(1)
        if not writer.Write():
            raise OSError(f"VTK could not write {tmp.name}")

    return write_atomic(path, write)


def _length(values, units):
    return to_output_units(np.asarray(values, dtype=float), units, "length")


def array_name(base: str, units: UnitSystem, quantity: str | None) -> str:
    """Name of a VTK array with its unit, as the CSV columns are named.

    >>> from fillstress.units import US
    >>> array_name("dsz", US, "pressure"), array_name("stress_ratio", US, None)
    ('dsz_psf', 'stress_ratio')
    """
    if quantity is None:
        return base
    return f"{base}_{column_suffix(unit_label(units, quantity))}"


# --- fill surface ----------------------------------------------------------------------
def fill_surface_mesh(thickness, grid: GridSpec, *, ground=None, units: UnitSystem = SI):
    """Top of fill as a quad surface through the cell centres at ``z = thickness`` above
    the existing ground (point data ``thickness_<len>``, and ``ground_elevation_<len>``
    when `ground` is given), over the fill: the quads with a corner of non-zero thickness
    (every quad where there is none). A long corridor's lattice is mostly bare ground,
    which the stress grids show; its quads would be most of the file.

    Points are the cell centres the quads use, row by row (row 0 south); quads face upward.

    Examples
    --------
    >>> g = GridSpec(0.0, 0.0, 2.0, 2.0, nx=3, ny=2)
    >>> m = fill_surface_mesh([[0, 1, 2], [0, 1, 3]], g, ground=10.0)
    >>> m.n_points, m.n_cells, m.points[5].tolist(), float(m.point_data["thickness_m"][5])
    (6, 2, [5.0, 3.0, 3.0], 3.0)
    >>> float(m.point_data["ground_elevation_m"][5])
    10.0
    """
    import pyvista as pv

    t = np.asarray(thickness, dtype=float)
    if t.shape != grid.shape or not np.all(np.isfinite(t)):
        raise InputError(f"must be finite with the grid shape {grid.shape}, got {t.shape}",
                         argument="thickness")
    try:
        z0 = np.zeros_like(t) if ground is None else np.broadcast_to(
            np.asarray(ground, dtype=float), t.shape)
    except ValueError:
        raise InputError(f"must be a number or have the grid shape {grid.shape}",
                         argument="ground") from None
    if not np.all(np.isfinite(z0)):
        raise InputError("ground elevation must be finite everywhere", argument="ground")
    x, y = np.meshgrid(grid.x_centres, grid.y_centres)
    xyz = np.column_stack([x.ravel(), y.ravel(), t.ravel()])
    if min(t.shape) > 1:
        corner, used = _fill_quads(t)
        surface = pv.PolyData()
        surface.points = _length(xyz[used], units)
        surface.SetPolys(_lattice_quads(corner, t.shape[1], np.cumsum(used) - 1))
    else:                     # one row or column of nodes: pyvista's vertices, no quads
        used = np.ones(t.size, bool)
        surface = pv.PolyData(_length(xyz, units))
    surface.point_data[array_name("thickness", units, "length")] = \
        _length(t, units).ravel()[used]
    if ground is not None:
        surface.point_data[array_name("ground_elevation", units, "length")] = \
            _length(z0, units).ravel()[used]
    surface.field_data["units"] = _units_note(units)
    return surface


def _fill_quads(t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The lower-left node (``j * nx + i``) of each quad with a corner of non-zero
    thickness (every quad when there is none) and which nodes those quads use."""
    ny, nx = t.shape
    loaded = t != 0
    touch = loaded[:-1, :-1] | loaded[:-1, 1:] | loaded[1:, :-1] | loaded[1:, 1:]
    if not touch.any():
        touch[:] = True
    j, i = np.nonzero(touch)
    used = np.zeros((ny, nx), bool)
    for dj, di in ((0, 0), (0, 1), (1, 0), (1, 1)):
        used[j + dj, i + di] = True
    return j * nx + i, used.ravel()


def _lattice_quads(corner: np.ndarray, nx: int, index: np.ndarray):
    """The quads whose lower-left nodes are `corner` on a lattice nx nodes wide,
    counter-clockwise seen from above, their nodes renumbered by `index`, as a
    vtkCellArray given its offsets and connectivity: the cells pyvista's ``faces=`` makes,
    without the padded list it parses them from (seconds on millions of nodes)."""
    from vtkmodules.util.numpy_support import vtk_to_numpy
    from vtkmodules.vtkCommonCore import vtkTypeInt64Array
    from vtkmodules.vtkCommonDataModel import vtkCellArray

    def int64(values):
        array = vtkTypeInt64Array()
        array.SetNumberOfTuples(values.size)
        vtk_to_numpy(array)[:] = values
        return array
    nodes = index[np.column_stack([corner, corner + 1, corner + 1 + nx, corner + nx]).ravel()]
    cells = vtkCellArray()
    cells.SetData(int64(np.arange(0, nodes.size + 1, 4)), int64(nodes))
    return cells


def write_fill_surface(path, thickness, grid: GridSpec, *, ground=None,
                       units: UnitSystem = SI) -> os.PathLike:
    """Write :func:`fill_surface_mesh` to ``.vtp`` (atomic)."""
    return _save(path, fill_surface_mesh(thickness, grid, ground=ground, units=units))


# --- stress grids ----------------------------------------------------------------------
def stress_grid_mesh(dsz, units: UnitSystem = SI):
    """Δσz slices (DataArray, dims depth, y, x) as a RectilinearGrid with ``z = -depth``.

    Examples
    --------
    >>> import xarray as xr
    >>> da = xr.DataArray(np.arange(8.0).reshape(2, 2, 2), dims=SLICE_DIMS,
    ...                   coords={"depth": [1.0, 4.0], "y": [0.0, 1.0], "x": [0.0, 2.0]})
    >>> m = stress_grid_mesh(da)
    >>> m.z.tolist(), float(m.point_data["dsz_kPa"][m.find_closest_point((2, 1, -1))])
    ([-4.0, -1.0], 3.0)
    """
    import pyvista as pv

    if tuple(getattr(dsz, "dims", ())) != SLICE_DIMS:
        raise InputError(f"must be a DataArray with dims {SLICE_DIMS}", argument="dsz")
    depth = np.asarray(dsz["depth"].values, dtype=float)
    order = np.argsort(-depth)  # VTK wants ascending z = -depth
    values = np.asarray(dsz.values, dtype=float)[order]
    mesh = pv.RectilinearGrid(_length(dsz["x"].values, units), _length(dsz["y"].values, units),
                              _length(-depth[order], units))
    mesh.point_data[array_name("dsz", units, "pressure")] = to_output_units(
        values, units, "pressure").ravel()
    return _noted(mesh, units)


def _noted(mesh, units: UnitSystem):
    """`mesh` with the field array ``units`` and named coordinate arrays (unnamed ones are
    written under their memory address)."""
    mesh.field_data["units"] = _units_note(units)
    for axis, coords in zip("xyz", (mesh.GetXCoordinates(), mesh.GetYCoordinates(),
                                    mesh.GetZCoordinates())):
        coords.SetName(axis)
    return mesh


def write_stress_grid(path, dsz, units: UnitSystem = SI) -> os.PathLike:
    """Write :func:`stress_grid_mesh` to ``.vtr`` (atomic)."""
    return _save(path, stress_grid_mesh(dsz, units), "lz4")


def settlement_grid_mesh(settlement, units: UnitSystem = SI):
    """Surface settlement on a plan grid (DataArray in m, dims y, x) as a one-layer
    RectilinearGrid at the existing ground (``z = 0``), point data ``settlement_<s>``
    (NaN where the plan grid's settlement is not determined).

    Examples
    --------
    >>> import xarray as xr
    >>> da = xr.DataArray([[0.01, 0.02], [0.03, 0.04]], dims=("y", "x"),
    ...                   coords={"y": [0.0, 1.0], "x": [0.0, 2.0]})
    >>> m = settlement_grid_mesh(da)
    >>> m.z.tolist(), float(m.point_data["settlement_mm"][m.find_closest_point((2, 1, 0))])
    ([0.0], 40.0)
    """
    import pyvista as pv

    if tuple(getattr(settlement, "dims", ())) != ("y", "x"):
        raise InputError("must be a DataArray with dims ('y', 'x')", argument="settlement")
    mesh = pv.RectilinearGrid(_length(settlement["x"].values, units),
                              _length(settlement["y"].values, units), np.zeros(1))
    values = np.asarray(settlement.values, dtype=float)
    mesh.point_data[array_name("settlement", units, "settlement")] = to_output_units(
        values, units, "settlement").ravel()
    return _noted(mesh, units)


def write_settlement_grid(path, settlement, units: UnitSystem = SI) -> os.PathLike:
    """Write :func:`settlement_grid_mesh` to ``.vtr`` (atomic)."""
    return _save(path, settlement_grid_mesh(settlement, units), "lz4")


# --- buildings -------------------------------------------------------------------------
def _prism(poly: Polygon, z_bottom: float, z_top: float):
    """Points and faces (VTK flat list) of a closed prism with outward-facing faces."""
    poly = shapely.orient_polygons(poly)  # exterior counter-clockwise, holes clockwise
    points, faces = [], []

    def add(xyz):
        points.append(xyz)
        return len(points) - 1

    for tri in shapely.get_parts(shapely.constrained_delaunay_triangles(poly)):
        xy = np.asarray(tri.exterior.coords)[:3, :2]
        if not shapely.is_ccw(tri.exterior):
            xy = xy[::-1]
        top = [add((x, y, z_top)) for x, y in xy]
        bottom = [add((x, y, z_bottom)) for x, y in xy[::-1]]
        faces += [3, *top, 3, *bottom]
    for ring in [poly.exterior, *poly.interiors]:
        xy = np.asarray(ring.coords)[:, :2]
        for (xa, ya), (xb, yb) in zip(xy[:-1], xy[1:]):
            quad = [add((xa, ya, z_bottom)), add((xb, yb, z_bottom)),
                    add((xb, yb, z_top)), add((xa, ya, z_top))]
            faces += [4, *quad]
    return np.array(points, dtype=float), faces


def buildings_mesh(buildings, units: UnitSystem = SI):
    """Footprints extruded from foundation level (``z = -foundation_depth``) to the ground.

    `buildings` is a GeoDataFrame with ``receptor_id``, ``foundation_depth`` (m) and Polygon
    geometry. A zero foundation depth gives a thin slab 1 mm deep so it stays visible.
    Cell data: ``receptor_id``, ``foundation_depth_<len>`` and any result columns of
    `buildings` named in :data:`RESULT_ARRAYS` (``dsz_max``, ``settlement_max``, ...).

    Examples
    --------
    >>> import geopandas as gpd
    >>> from shapely.geometry import box
    >>> b = gpd.GeoDataFrame({"receptor_id": ["B1"], "foundation_depth": [2.0]},
    ...                      geometry=[box(0, 0, 4, 3)])
    >>> round(buildings_mesh(b).triangulate().volume, 9)
    24.0
    """
    import pyvista as pv

    _require_columns(buildings, ["receptor_id", "foundation_depth"], "buildings")
    all_points, all_faces, ids, depths, offset, cells_of = [], [], [], [], 0, []
    for rid, depth, poly in zip(buildings["receptor_id"], buildings["foundation_depth"],
                                buildings.geometry):
        if not isinstance(poly, Polygon) or not poly.is_valid or poly.area <= 0:
            raise InputError(f"building {rid}: footprint must be a valid Polygon",
                             argument="buildings")
        d = float(depth)
        if not np.isfinite(d) or d < 0:
            raise InputError(f"building {rid}: foundation_depth must be >= 0, got {depth!r}",
                             argument="buildings")
        pts, faces = _prism(poly, -max(d, 1e-3), 0.0)
        n_cells = _count_cells(faces)
        all_faces += _shift_faces(faces, offset)
        all_points.append(pts)
        offset += len(pts)
        ids += [str(rid)] * n_cells
        depths += [d] * n_cells
        cells_of.append(n_cells)
    if not all_points:
        raise InputError("has no buildings", argument="buildings")
    pts = np.vstack(all_points)
    mesh = pv.PolyData(np.column_stack([_length(pts[:, 0], units), _length(pts[:, 1], units),
                                        _length(pts[:, 2], units)]), faces=all_faces)
    mesh.cell_data["receptor_id"] = _ascii_ids(ids)
    mesh.cell_data[array_name("foundation_depth", units, "length")] = _length(depths, units)
    for col, quantity in RESULT_ARRAYS.items():
        if col in buildings:
            per_cell = np.repeat(buildings[col].to_numpy(float), cells_of)
            mesh.cell_data[array_name(col, units, quantity)] = (
                per_cell if quantity is None else to_output_units(per_cell, units, quantity))
    mesh = mesh.clean()  # merge the duplicated corner points of neighbouring faces
    mesh.field_data["units"] = _units_note(units)
    return mesh


# Result columns written as VTK arrays when a table has them (quantity for the unit).
RESULT_ARRAYS = {"dsz": "pressure", "dsz_max": "pressure", "sigma_v0": "pressure",
                 "stress_ratio": None, "settlement": "settlement",
                 "settlement_max": "settlement", "differential_settlement": "settlement",
                 "angular_distortion": None}


def _count_cells(faces) -> int:
    n, k = 0, 0
    while k < len(faces):
        k += faces[k] + 1
        n += 1
    return n


def _shift_faces(faces, offset: int) -> list:
    out, k = [], 0
    while k < len(faces):
        n = faces[k]
        out += [n, *(i + offset for i in faces[k + 1:k + 1 + n])]
        k += n + 1
    return out


def write_buildings(path, buildings, units: UnitSystem = SI) -> os.PathLike:
    """Write :func:`buildings_mesh` to ``.vtp`` (atomic)."""
    return _save(path, buildings_mesh(buildings, units))


# --- pipes and boreholes as polylines --------------------------------------------------
def _ascii_ids(ids) -> np.ndarray:
    """VTK string arrays hold ASCII only: other characters of an id are written as Python
    escapes (``Bohrloch-Ü`` → ``Bohrloch-\\xdc``); the CSV and GeoJSON files keep them.

    >>> print(*_ascii_ids(["B1", "Bohrloch-Ü"]))
    B1 Bohrloch-\\xdc
    """
    return np.array([str(i).encode("ascii", "backslashreplace").decode("ascii") for i in ids])


def _require_columns(table, columns, name):
    missing = [c for c in columns if c not in getattr(table, "columns", [])]
    if missing:
        raise InputError(f"missing column(s) {', '.join(missing)}", argument=name)


def polylines_mesh(points: pd.DataFrame, order_by: str, units: UnitSystem = SI):
    """One polyline per receptor through its sample points, ordered by `order_by`, at
    ``z = -depth``. Point data: ``depth_<len>``, ``chainage_<len>`` (when present) and the
    result columns of :data:`RESULT_ARRAYS` present (``dsz_<p>``, ``settlement_<s>``, ...);
    cell data ``receptor_id``.

    Examples
    --------
    >>> from fillstress.site.receptors import borehole_points
    >>> m = polylines_mesh(borehole_points("BH1", 3, 4, 0, 6, 2), "depth")
    >>> m.n_lines, m.points[:, 2].tolist()
    (1, [-0.0, -2.0, -4.0, -6.0])
    """
    import pyvista as pv

    _require_columns(points, ["receptor_id", "x", "y", "depth", order_by], "points")
    if len(points) == 0:
        raise InputError("has no points", argument="points")
    ordered = points.sort_values(["receptor_id", order_by], kind="stable")
    ordered = ordered.set_index("receptor_id", drop=False).loc[
        pd.unique(points["receptor_id"])].reset_index(drop=True)
    lines, ids, start = [], [], 0
    for rid, group in ordered.groupby("receptor_id", sort=False):
        n = len(group)  # a one-point line (borehole with top = bottom) is legal VTK
        lines += [n, *range(start, start + n)]
        ids.append(str(rid))
        start += n
    xyz = np.column_stack([_length(ordered["x"], units), _length(ordered["y"], units),
                           _length(-ordered["depth"].to_numpy(float), units)])
    mesh = pv.PolyData(xyz, lines=lines)
    mesh.point_data[array_name("depth", units, "length")] = _length(ordered["depth"], units)
    if "chainage" in ordered and ordered["chainage"].notna().all():
        mesh.point_data[array_name("chainage", units, "length")] = _length(
            ordered["chainage"], units)
    for col, quantity in RESULT_ARRAYS.items():
        if col in ordered:
            values = ordered[col].to_numpy(float)
            mesh.point_data[array_name(col, units, quantity)] = (
                values if quantity is None else to_output_units(values, units, quantity))
    mesh.cell_data["receptor_id"] = _ascii_ids(ids)
    mesh.field_data["units"] = _units_note(units)
    return mesh


def write_pipes(path, pipe_points: pd.DataFrame, units: UnitSystem = SI) -> os.PathLike:
    """Pipes as polylines along their crown, from :func:`fillstress.site.receptors.pipe_points`."""
    return _save(path, polylines_mesh(pipe_points, "chainage", units))


def write_boreholes(path, borehole_points: pd.DataFrame,
                    units: UnitSystem = SI) -> os.PathLike:
    """Boreholes as vertical polylines, from :func:`fillstress.site.receptors.borehole_points`."""
    return _save(path, polylines_mesh(borehole_points, "depth", units))


# --- the bundle --------------------------------------------------------------------------
def write_bundle(path, blocks, *, stages=None) -> os.PathLike:
    """A ParaView multiblock file (``.vtm``) naming VTK files beside it, or with `stages`
    a collection (``.pvd``) whose time steps are the stages, each a ``.vtm`` file.

    Parameters
    ----------
    path : str or path-like
        ``.vtm`` (blocks: name → file relative to it) or ``.pvd`` (blocks: stage → ``.vtm``
        file name; `stages` the stage numbers, used as the time values).
    blocks : mapping
        As above.
    stages : sequence of int, optional
        Makes a ``.pvd``.

    Returns
    -------
    path-like
        `path`.

    Examples
    --------
    >>> import tempfile, os, pyvista as pv
    >>> d = tempfile.mkdtemp()
    >>> pv.Sphere().save(os.path.join(d, "a.vtp"))
    >>> f = write_bundle(os.path.join(d, "run.vtm"), {"sphere": "a.vtp"})
    >>> pv.read(f).keys()
    ['sphere']
    """
    from xml.sax.saxutils import quoteattr
    if stages is None:
        rows = [f'    <DataSet index="{k}" name={quoteattr(name)} file={quoteattr(rel)}/>'
                for k, (name, rel) in enumerate(blocks.items())]
        kind, inner = "vtkMultiBlockDataSet", "vtkMultiBlockDataSet"
    else:
        rows = [f'    <DataSet timestep="{int(k)}" part="0" file={quoteattr(blocks[k])}/>'
                for k in stages]
        kind, inner = "Collection", "Collection"
    text = "\n".join(['<?xml version="1.0"?>',
                      f'<VTKFile type="{kind}" version="1.0" byte_order="LittleEndian">',
                      f"  <{inner}>", *rows, f"  </{inner}>", "</VTKFile>", ""])
    return write_atomic(path, lambda tmp: open(tmp, "w", encoding="utf-8").write(text))
