"""Where the existing ground is used, check that it is there and that it makes sense.

The ground surface is needed only where something reads it: depths of receptors given by
elevation, and the fill of ``surfaces`` bodies whose existing ground is the ``[ground]``
surface. A survey that covers those but not the whole rectangle around a curved
alignment is enough; one that misses them is refused while the site is built (so by
``fillstress check``), naming the file and the place. Elsewhere (3-D view, the ground
raster) the gaps are only drawn, never computed with. A layer in a near twin of the site
CRS (another foot, another datum realisation) is warned about: the files beside it that
state no CRS may be off by the same shift.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import InputError
from . import receptors as rc

#: An elevation this many metres or less (0.1 … 10 m) that puts the point deeper than
#: PLAUSIBLE_DEPTH_M below a ground at least twice as high looks like a depth typed in an
#: elevation key (this project's rule of thumb: pipes and foundations beside a fill are
#: rarely deeper than 10 m; common practice).
DEPTH_LIKE_M = 10.0
PLAUSIBLE_DEPTH_M = 10.0
#: Share of a surfaces body's design area that may lack existing ground before the body
#: is refused (its fill there would silently be zero).
MISSING_SHARE = 0.01


def _place(x_m, y_m, factor) -> str:
    return f"x = {x_m / factor:,.1f}, y = {y_m / factor:,.1f}"


def depths_from_elevations(ctx, xy, elevation, key: str, what: str,
                           above: float = 0.0) -> np.ndarray:
    """Depths (m) below the ground of points `above` metres over the given `elevation`
    (m; a pipe crown over its invert): refused where the ground has no data (naming its
    file and the point), warned where the elevation looks like a depth."""
    xy = np.atleast_2d(np.asarray(xy, float))
    g = np.asarray(ctx.ground(xy[:, 0], xy[:, 1]), float).reshape(-1)
    missing = np.flatnonzero(~np.isfinite(g))
    if missing.size:
        k = missing[0]
        raise InputError(f"the existing ground ({ctx.ground_source}) has no data at the "
                         f"{what} ({_place(*xy[k], ctx.factor)}, site CRS units): extend "
                         "the survey there or give a depth instead of an elevation",
                         file=ctx.cfg.path, key=key)
    elev = np.broadcast_to(np.asarray(elevation, float), g.shape)
    depth = rc.depth_from_elevation(xy[:, 0], xy[:, 1], elev + above, lambda x, y: g,
                                    name=key)
    u = ctx.cfg.units
    looks_like_depth = (elev > 0.1) & (elev <= DEPTH_LIKE_M) & (g > 2 * elev)
    deep = np.flatnonzero((depth > PLAUSIBLE_DEPTH_M) & looks_like_depth)
    if deep.size:
        k = deep[0]
        ctx.warnings.append(
            f"{key} = {u.length_out(elev[k]):g} {u.length} puts the {what} "
            f"{u.length_out(depth[k]):.1f} {u.length} below the ground "
            f"({u.length_out(g[k]):.1f} {u.length} there); if it is a depth, give it as a "
            "depth key instead")
    return depth


def check_body_ground(ctx, name: str, report) -> None:
    """Refuse a surfaces body whose design has no existing ground under more than
    MISSING_SHARE of it (where the fill would silently be zero)."""
    design_area = report.area_compared + report.area_design_only
    if design_area <= 0 or report.area_design_only <= MISSING_SHARE * design_area:
        return
    u = ctx.cfg.units
    x, y = report.missing_at
    raise InputError(
        f"the existing ground ({ctx.ground_source}) does not cover "
        f"{100 * report.area_design_only / design_area:.0f} % of the design surface "
        f"({u.length_out(u.length_out(report.area_design_only)):,.0f} {u.length}²), e.g. at "
        f"{_place(x, y, ctx.factor)} (site CRS units): extend the survey or give this "
        "body its own existing surface", file=ctx.cfg.path, key=f"bodies.{name}")


def warn_near_miss(ctx, path, moved_m: float) -> None:
    """Warn when a layer moved a little on its way into the site CRS (a near twin: US
    survey against international feet moves about 20 ft at state-plane magnitudes)."""
    if not moved_m:
        return
    u = ctx.cfg.units
    ctx.warnings.append(
        f"{Path(path).name} states a CRS close to the site's but not the same: converting "
        f"it moved it {u.length_out(moved_m):.1f} {u.length}. Files that state no CRS are "
        "taken to be in the site CRS; if they share this file's CRS they are off by as "
        "much (US survey against international feet, or another datum realisation?)")
