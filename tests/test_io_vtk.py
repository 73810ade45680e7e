"""VTK writers round-trip through pyvista.read."""
from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import pyvista as pv
import xarray as xr
from shapely.geometry import LineString, Polygon, box

from fillstress import InputError
from fillstress.grid import GridSpec
from fillstress.io.netcdf import SLICE_DIMS
from fillstress.io.vtk import (write_boreholes, write_buildings, write_fill_surface,
                               write_pipes, write_stress_grid)
from fillstress.site.receptors import borehole_points, pipe_points
from fillstress.units import US

GRID = GridSpec(50.0, 80.0, 2.0, 4.0, nx=4, ny=3)
THICK = 0.5 * np.arange(3)[:, None] + 0.1 * np.arange(4)[None, :]  # asymmetric, row 0 south


def test_fill_surface_is_thickness_above_existing_ground(tmp_path):
    """One vertical frame for every VTK file: z = 0 is the existing ground, so the fill
    surface (z = thickness) overlays slices and receptors (z = -depth); the ground
    elevation travels as point data."""
    ground = 20.0 + 0.01 * np.arange(12).reshape(3, 4)
    mesh = pv.read(write_fill_surface(tmp_path / "fill_surface.vtp", THICK, GRID,
                                      ground=ground))
    assert mesh.n_points == 12 and mesh.n_cells == 6
    for j, y in enumerate(GRID.y_centres):
        for i, x in enumerate(GRID.x_centres):
            k = mesh.find_closest_point((x, y, THICK[j, i]))
            assert mesh.points[k] == pytest.approx([x, y, THICK[j, i]])
            assert mesh.point_data["thickness_m"][k] == pytest.approx(THICK[j, i])
            assert mesh.point_data["ground_elevation_m"][k] == pytest.approx(ground[j, i])
    normals = mesh.compute_normals(cell_normals=True, point_normals=False)
    assert np.all(normals.cell_data["Normals"][:, 2] > 0)  # quads face up


def test_fill_surface_without_ground_and_in_feet(tmp_path):
    mesh = pv.read(write_fill_surface(tmp_path / "f.vtp", THICK * 0.3048, GRID, units=US))
    assert mesh.points[:, 2].max() == pytest.approx(THICK.max())
    assert mesh.points[:, 0].min() == pytest.approx(51.0 / 0.3048)
    assert list(mesh.field_data["units"]) == ["length=ft", "pressure=psf", "settlement=in"]


def test_stress_grid_node_values(tmp_path):
    x, y, d = [0.0, 5.0, 12.0], [100.0, 104.0], [1.0, 3.0, 8.0]
    values = np.arange(18.0).reshape(3, 2, 3)  # (depth, y, x), all distinct
    da = xr.DataArray(values, dims=SLICE_DIMS, coords={"depth": d, "y": y, "x": x})
    mesh = pv.read(write_stress_grid(tmp_path / "stress_plan.vtr", da))
    assert isinstance(mesh, pv.RectilinearGrid)
    assert mesh.z.tolist() == [-8.0, -3.0, -1.0]
    for k, dk in enumerate(d):
        for j, yj in enumerate(y):
            for i, xi in enumerate(x):
                p = mesh.find_closest_point((xi, yj, -dk))
                assert mesh.points[p] == pytest.approx([xi, yj, -dk])
                assert mesh.point_data["dsz_kPa"][p] == values[k, j, i]


def test_buildings_are_closed_prisms_with_the_right_volume(tmp_path):
    ell = Polygon([(0, 0), (10, 0), (10, 4), (4, 4), (4, 9), (0, 9)])  # area 40 + 20 = 60
    court = Polygon(box(20, 0, 32, 12).exterior.coords, [box(24, 4, 28, 8).exterior.coords])
    frame = gpd.GeoDataFrame({"receptor_id": ["Ell", "Court"], "foundation_depth": [2.5, 1.0]},
                             geometry=[ell, court])
    mesh = pv.read(write_buildings(tmp_path / "buildings.vtp", frame))
    assert set(mesh.cell_data["receptor_id"]) == {"Ell", "Court"}
    for rid, area, depth in (("Ell", 60.0, 2.5), ("Court", 144.0 - 16.0, 1.0)):
        part = mesh.extract_cells(np.flatnonzero(mesh.cell_data["receptor_id"] == rid))
        surf = part.extract_surface(algorithm=None).triangulate()
        assert surf.n_open_edges == 0  # closed
        assert surf.volume == pytest.approx(area * depth)
        assert surf.bounds[4:6] == pytest.approx((-depth, 0.0))


def test_buildings_in_feet(tmp_path):
    frame = gpd.GeoDataFrame({"receptor_id": ["B"], "foundation_depth": [0.3048]},
                             geometry=[box(0, 0, 3.048, 3.048)])
    mesh = pv.read(write_buildings(tmp_path / "b.vtp", frame, US))
    assert mesh.triangulate().volume == pytest.approx(100.0)  # 10 ft x 10 ft x 1 ft


def test_bad_buildings(tmp_path):
    frame = gpd.GeoDataFrame({"receptor_id": ["B"], "foundation_depth": [-1.0]},
                             geometry=[box(0, 0, 1, 1)])
    with pytest.raises(InputError, match="foundation_depth"):
        write_buildings(tmp_path / "b.vtp", frame)
    with pytest.raises(InputError, match="missing column"):
        write_buildings(tmp_path / "b.vtp", frame.drop(columns="foundation_depth"))


def test_pipes_and_boreholes_as_lines(tmp_path):
    pipe = pipe_points("Main-4", LineString([(0, 0), (20, 0), (20, 10)]), [2.0, 3.0, 1.0],
                       spacing=6.0)
    pipe["dsz"] = np.arange(len(pipe), dtype=float)
    shuffled = pipe.sample(frac=1.0, random_state=3)  # order must come from chainage
    mesh = pv.read(write_pipes(tmp_path / "pipes.vtp", shuffled))
    assert mesh.n_lines == 1 and list(mesh.cell_data["receptor_id"]) == ["Main-4"]
    np.testing.assert_allclose(mesh.points[:, 2], -pipe["depth"].to_numpy())
    np.testing.assert_allclose(mesh.point_data["chainage_m"], pipe["chainage"].to_numpy())
    np.testing.assert_allclose(mesh.point_data["dsz_kPa"], pipe["dsz"].to_numpy())
    line = mesh.lines
    assert line[0] == len(pipe) and list(line[1:]) == list(range(len(pipe)))

    holes = [borehole_points("H1", 5, 5, 0, 4, 2), borehole_points("H2", 9, 9, 1, 2, 1)]
    mesh = pv.read(write_boreholes(tmp_path / "boreholes.vtp", pd.concat(holes)))
    assert mesh.n_lines == 2
    assert mesh.points[:, 2].tolist() == [-0.0, -2.0, -4.0, -1.0, -2.0]
    assert "chainage_m" not in mesh.point_data


def _same_mesh(a, b):
    """Two meshes read back hold the same points, cells and arrays, bit for bit."""
    assert type(a) is type(b)
    np.testing.assert_array_equal(a.points, b.points)
    if isinstance(a, pv.PolyData):
        for cells in ("faces", "lines"):
            np.testing.assert_array_equal(getattr(a, cells), getattr(b, cells))
    else:
        for axis in "xyz":
            np.testing.assert_array_equal(getattr(a, axis), getattr(b, axis))
    for kind in ("point_data", "cell_data", "field_data"):
        da, db = getattr(a, kind), getattr(b, kind)
        assert sorted(da.keys()) == sorted(db.keys())
        for key in da:
            assert np.asarray(da[key]).dtype == np.asarray(db[key]).dtype, key
            np.testing.assert_array_equal(np.asarray(da[key]), np.asarray(db[key]))


def test_raw_compressed_files_read_back_as_pyvista_default_save(tmp_path):
    """The fast writing (raw appended arrays, LZ4 or zlib level 1) holds what pyvista's
    own save (base64, zlib), the earlier way, held: NaN included."""
    from fillstress.io import vtk as fv
    rng = np.random.default_rng(7)
    grid = GridSpec(50.0, 80.0, 2.0, 4.0, nx=40, ny=30)
    thick = rng.random(grid.shape)
    values = rng.random((3, 30, 40)) * 100
    values[:, :5] = np.nan
    da = xr.DataArray(values, dims=SLICE_DIMS, coords={
        "depth": [1.0, 3.0, 8.0], "y": grid.y_centres, "x": grid.x_centres})
    pipe = pipe_points("Main-4", LineString([(0, 0), (20, 0), (20, 10)]), [2.0, 3.0, 1.0],
                       spacing=6.0).assign(dsz=1.5)
    b = gpd.GeoDataFrame({"receptor_id": ["B1", "Bohrloch-Ü"], "foundation_depth": [2.0, 0.0]},
                         geometry=[box(0, 0, 4, 3), box(10, 0, 14, 3)])
    meshes = {"f.vtp": fv.fill_surface_mesh(thick, grid, ground=20.0 + thick, units=US),
              "s.vtr": fv.stress_grid_mesh(da, US),
              "t.vtr": fv.settlement_grid_mesh(da.isel(depth=0), US),
              "p.vtp": fv.polylines_mesh(pipe, "chainage"),
              "b.vtp": fv.buildings_mesh(b)}
    for name, mesh in meshes.items():
        for compressor in ("zlib", "lz4"):
            fast = fv._save(tmp_path / f"{compressor}-{name}", mesh, compressor)
            mesh.save(tmp_path / f"old-{name}")
            assert b'format="appended"' in fast.read_bytes()[:4000]
            _same_mesh(pv.read(fast), pv.read(tmp_path / f"old-{name}"))


def _fill_surface_slowly(thickness, grid, ground, units):
    """The slow reference of io.vtk.fill_surface_mesh: quad by quad, those with a loaded
    corner (every one when nothing is loaded), parsed by pyvista from a padded legacy
    face list, the nodes they use numbered row by row."""
    from fillstress.io.vtk import _length, _units_note, array_name
    t = np.asarray(thickness, float)
    ny, nx = t.shape
    quads = [(j * nx + i, j * nx + i + 1, (j + 1) * nx + i + 1, (j + 1) * nx + i)
             for j in range(ny - 1) for i in range(nx - 1)]
    kept = [q for q in quads if any(t.flat[n] != 0 for n in q)] or quads
    used = sorted({n for q in kept for n in q}) if kept else list(range(t.size))
    number = {n: k for k, n in enumerate(used)}
    x, y = np.meshgrid(grid.x_centres, grid.y_centres)
    xyz = np.column_stack([x.ravel(), y.ravel(), t.ravel()])[used]
    faces = [v for q in kept for v in (4, *(number[n] for n in q))]
    surface = pv.PolyData(_length(xyz, units), faces=np.array(faces) if faces else None)
    surface.point_data[array_name("thickness", units, "length")] = \
        _length(t, units).ravel()[used]
    surface.point_data[array_name("ground_elevation", units, "length")] = \
        _length(np.broadcast_to(ground, t.shape), units).ravel()[used]
    surface.field_data["units"] = _units_note(units)
    return surface


@pytest.mark.parametrize("shape, loaded", [((23, 31), 0.6), ((23, 31), 0.03),
                                            ((23, 31), 0.0), ((1, 9), 0.6), ((6, 1), 0.6)])
def test_fill_surface_file_is_the_one_the_face_list_gave(tmp_path, shape, loaded):
    """Quads handed to VTK as offsets and connectivity, only those over the fill: the
    .vtp file byte for byte the one a padded face list of those quads writes (a single
    row or column: its vertices; no fill: every quad)."""
    from fillstress.io import vtk
    rng = np.random.default_rng(7)
    grid = GridSpec(100.0, 200.0, 2.5, 2.5, nx=shape[1], ny=shape[0])
    t = np.where(rng.random(shape) < loaded, 3.0 * rng.random(shape), 0.0)
    ground = 40.0 + rng.random(shape)
    now = write_fill_surface(tmp_path / "now.vtp", t, grid, ground=ground, units=US)
    slow = vtk._save(tmp_path / "slow.vtp", _fill_surface_slowly(t, grid, ground, US))
    assert now.read_bytes() == slow.read_bytes()
    cells = pv.read(now).n_cells
    full = (shape[0] - 1) * (shape[1] - 1) or shape[0] * shape[1]
    if loaded in (0.0, 0.6):                   # no fill, or fill at nearly every quad
        assert cells >= 0.9 * full
    else:                                      # a little fill: its quads alone
        assert 0 < cells < 0.3 * full


