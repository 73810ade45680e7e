"""fillstress: vertical stress increase and settlement below fills on an elastic half-space.

The public API is the names in ``__all__`` (documented in docs/api.md, generated from it).
Only the errors and the version load with the package; every other name loads on first
use (PEP 562 module ``__getattr__``), so ``import fillstress`` and ``fillstress --version``
or ``--help`` start without numba, xarray or the solvers.
"""
from __future__ import annotations

from ._lazy import lazy_getattr
from ._version import __version__
from .errors import CapacityError, FillstressError, InputError

# Public name → the module that defines it (loaded on first access).
_LAZY = {
    "LoadGrid": "grid", "GridSpec": "grid",
    "vertical_stress": "solve", "stress_slices": "solve",
    "stress_at_points": "solve.auto",
    **dict.fromkeys(["connect", "distributed_points", "distributed_slices", "map_variants"],
                    "solve.distributed"),
    "load_site": "site.build", "Site": "site.build",
    "compute": "run.compute", "run_site_file": "run.compute", "RunResults": "run.compute",
    "check_site_file": "run.compute", "point_stresses": "run.point",
    "PointStresses": "run.point", "run_batch": "run.batch",
    "SoilLayer": "soil", "SoilProfile": "soil",
    **dict.fromkeys(["sublayers", "consolidation_settlement", "settlement_by_layer",
                     "converged_settlement", "degree_of_consolidation", "time_factor",
                     "time_to_degree", "settlement_time_curve", "influence_depth"], "settlement"),
    "building_settlement": "structures", "pipe_settlement": "structures",
    **dict.fromkeys(["building_points", "pipe_points", "borehole_points", "plan_grid",
                     "read_receptor_layer"],
                    "site.receptors"),
    "footprint_thickness": "shapes.footprints",
    "sloping_footprint_thickness": "shapes.footprints", "read_footprints": "io.footprints",
    "pile_thickness": "shapes.stockpile", "embankment_thickness": "shapes.embankment",
    "fill_from_surfaces": "shapes.surfaces", "read_surface": "io.surfaces",
    "Body": "shapes.bodies", "write_report": "report",
}

__all__ = [*_LAZY, "FillstressError", "InputError", "CapacityError", "__version__"]


__getattr__ = lazy_getattr(__name__, _LAZY, globals())


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
