"""Writers for the results folder (one format a module) and the atomic-write helpers.

Each writer takes SI values and a :class:`~fillstress.units.UnitSystem`, converts on the
way out and writes through :func:`write_atomic`; :class:`ResultsWriter` assembles a run's
folder and renames it into place when complete (see ``docs/results-folder.md``).
Heavy libraries (pyvista, rasterio, xarray, geopandas) load only when a writer runs.
"""
from __future__ import annotations

from .atomic import ResultsWriter, write_atomic
from .geotiff import write_geotiff
from .manifest import build_manifest, sha256_file, write_manifest
from .netcdf import stress_dataset, write_stress_cube
from .tables import (crs_unit_label, labelled_table, plan_unit, unit_label, write_geojson,
                     write_points_geojson, write_table_csv)
from .vtk import (write_boreholes, write_buildings, write_fill_surface, write_pipes,
                  write_stress_grid)

__all__ = [
    "ResultsWriter", "write_atomic", "write_geotiff", "build_manifest", "sha256_file",
    "write_manifest", "stress_dataset", "write_stress_cube", "labelled_table", "unit_label",
    "plan_unit", "crs_unit_label", "write_geojson", "write_points_geojson", "write_table_csv",
    "write_boreholes", "write_buildings", "write_fill_surface", "write_pipes",
    "write_stress_grid",
]
