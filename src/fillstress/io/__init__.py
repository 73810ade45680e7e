"""Writers for the results folder (one format a module) and the atomic-write helpers.

Each writer takes SI values and a :class:`~fillstress.units.UnitSystem`, converts on the
way out and writes through :func:`write_atomic`; :class:`ResultsWriter` assembles a run's
folder and renames it into place when complete (see ``docs/results-folder.md``).
Heavy libraries (pyvista, rasterio, xarray, geopandas) load only when a writer runs, and
each writer's module on first use of its name, so importing one module of the package
(``io.atomic`` for a results folder) does not load pandas and xarray with the others.
"""
from __future__ import annotations

from .._lazy import lazy_getattr

# Public name → the module of the package that defines it (loaded on first access).
_NAMES = {
    **dict.fromkeys(["ResultsWriter", "write_atomic"], "atomic"),
    "write_geotiff": "geotiff",
    **dict.fromkeys(["build_manifest", "sha256_file", "write_manifest"], "manifest"),
    **dict.fromkeys(["stress_dataset", "write_stress_cube"], "netcdf"),
    **dict.fromkeys(["labelled_table", "unit_label", "plan_unit", "crs_unit_label",
                     "write_geojson", "write_points_geojson", "write_table_csv"], "tables"),
    **dict.fromkeys(["write_boreholes", "write_buildings", "write_fill_surface", "write_pipes",
                     "write_stress_grid"], "vtk"),
}

__all__ = list(_NAMES)


__getattr__ = lazy_getattr(__name__, _NAMES, globals())
