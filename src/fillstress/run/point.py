"""Δσz at points of a site given on the command line (`fillstress point`)."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..site.build import Site, load_site
from .compute import stress


@dataclass
class PointStresses:
    """Δσz (kPa) at points given as x, y, depth in site units, for one stage."""

    site: Site
    xyz: np.ndarray          # (N, 3) as given: plan in site-CRS units, depth in site units
    dsz: np.ndarray          # kPa
    stage: int


def point_stresses(path, xyz, stage=None) -> PointStresses:
    """Δσz at x, y, depth triples given in site units, under the fill of `stage` (default:
    the last).

    Examples
    --------
    >>> from fillstress.examples import example_site
    >>> res = point_stresses(example_site("preload_surcharge"), [452100.0, 218300.0, 2.0])
    >>> res.stage, round(float(res.dsz[0]), 1)      # BH-01, 2 m below the pad centre (kPa)
    (2, 104.3)
    """
    site = load_site(path)
    arr = np.asarray(xyz, float).reshape(-1, 3)
    pts = np.column_stack([arr[:, :2] * site.metres_per_unit, site.units.length_si(arr[:, 2])])
    if np.any(pts[:, 2] < 0):
        raise InputError("depth must be >= 0 below the existing ground", argument="xyz")
    grid = site.load_grid(stage)
    return PointStresses(site, arr, stress(site, grid, pts), stage or site.stages[-1])
