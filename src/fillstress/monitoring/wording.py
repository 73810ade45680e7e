"""What the monitoring folder and its report both say: assumptions, cautions, and the
instrument ids as file-name parts (one place, so neither imports the other)."""
from __future__ import annotations

import re

from ..cautions import CORE_CAUTION

ASSUMPTIONS = (
    "Readings are compared with the project's own prediction: Δσz from linear elasticity "
    "(homogeneous elastic half-space, flexible fill, superposition), 1-D primary "
    "consolidation (Terzaghi) of horizontal layers, each placement of fill instant on its "
    "day. Back-analysis: Asaoka (1978) and the hyperbolic method of Tan (1971) on readings "
    "after the last placement; the model fit scales compressibility and cv of every "
    "consolidating layer by one factor each (least squares, 95 % intervals from the "
    "Jacobian).")
CAUTIONS = CORE_CAUTION + (
    " A forecast is only as good as the readings and the construction "
    "record it is fitted to.")


def slug(text: str) -> str:
    """An instrument id as a safe file-name part.

    Examples
    --------
    >>> slug("EX-01/A1"), slug("../")
    ('EX-01_A1', 'instrument')
    """
    return re.sub(r"[^A-Za-z0-9_-]+", "_", str(text)).strip("_") or "instrument"
