"""What every run's folder, report and page say about the method: assumptions and cautions
(one place, imported without the numerical stack)."""
from __future__ import annotations

from ..cautions import CORE_CAUTION

ASSUMPTIONS = (
    "Vertical stress increase from linear elasticity: a homogeneous, isotropic, linear-elastic "
    "half-space (Boussinesq) or a half-space reinforced by thin rigid horizontal layers "
    "(Westergaard); the fill is a flexible surface load; each plan cell is a uniformly loaded "
    "rectangle and the cells add by superposition; fill stiffness and embedment are ignored. "
    "Settlement by one-dimensional consolidation (Terzaghi) of horizontal layers under the "
    "computed Δσz along the load history (e–log σ' path: virgin loading on Cc, unloading and "
    "reloading on Cr), with time by Terzaghi's 1-D theory, stages ramped over their build "
    "time (Olson 1977), radial drainage to vertical drains (Hansbo 1981, combined by "
    "Carrillo 1942) and secondary compression after the end of primary consolidation.")
CAUTIONS = CORE_CAUTION + (
    " The elastic solutions do not represent stiff crusts over soft layers, rigid "
    "foundations, large strains, bearing failure or dynamic loads; check stability separately.")
