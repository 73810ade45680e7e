"""What the design page sees and asks: the layout in site units as JSON, and its requests
(move, set keys, add from a template, delete, undo, depth, limits, save) turned into
layout edits. Every number crosses here in the site file's units."""
from __future__ import annotations

import base64
import math
import time
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..run.wording import ASSUMPTIONS, CAUTIONS
from .engine import (EDITABLE_KEYS, movable_geometry, open_layout, rotated, stress_limits,
                     template)
from .save import save_as

EDIT_OPS = ("move", "rotate", "set", "add", "delete", "undo", "depth", "limits", "stage")


class DesignSession:
    """One site file open on the page."""

    def __init__(self, path, depth: float | None = None, ratio_limit: float | None = None,
                 stress_limit: float | None = None):
        """`depth` and `stress_limit` in site units; `ratio_limit` is Δσz/σ'v0."""
        t0 = time.perf_counter()
        self.layout = lay = open_layout(path)
        u = lay.site.units
        if depth is not None:
            lay.set_depth(u.length_si(_depth(depth, "--depth", u)))
        # no default limit: what a receptor may take is the project's to state
        self.ratio_limit = _optional(ratio_limit, "--ratio-limit")
        self.stress_limit = None if stress_limit is None else \
            u.pressure_si(_optional(stress_limit, "--stress-limit"))      # kPa
        self.stage = None                         # the bodies of every stage
        self.open_s = time.perf_counter() - t0

    @property
    def units(self):
        return self.layout.site.units

    # --- requests ----------------------------------------------------------------------
    def edit(self, request: dict) -> dict:
        lay, u = self.layout, self.units
        op = request.get("op")
        if op not in EDIT_OPS:
            raise InputError(f"must be one of {', '.join(EDIT_OPS)}, got {op!r}", argument="op")
        name = request.get("body")
        if op in ("move", "rotate", "set", "delete") and name not in lay.doc["bodies"]:
            raise InputError(f"no body named {name!r}", argument="body")
        if op == "move":
            lay.move(name, _number(request.get("dx"), "dx"), _number(request.get("dy"), "dy"))
        elif op == "rotate":
            lay.apply(rotated(lay, name, _number(request.get("degrees"), "degrees")))
        elif op == "set":
            bodies = lay.bodies_raw()
            for key, value in (request.get("values") or {}).items():
                if key not in EDITABLE_KEYS:
                    raise InputError(f"cannot be edited here; edit {', '.join(EDITABLE_KEYS)}",
                                     argument=str(key))
                if value is None or value == "":
                    bodies[name].pop(key, None)
                else:
                    whole = isinstance(value, float) and value.is_integer() and key == "stage"
                    bodies[name][key] = int(value) if whole else value
            lay.apply(bodies)
        elif op == "add":
            lay.apply(template(lay, request.get("template"), _number(request.get("x"), "x"),
                               _number(request.get("y"), "y")))
        elif op == "delete":
            bodies = lay.bodies_raw()
            del bodies[name]
            if not bodies:
                raise InputError("a site needs at least one body", argument="body")
            lay.apply(bodies)
        elif op == "undo":
            if lay.undo() is None:
                raise InputError("nothing to undo", argument="undo")
        elif op == "depth":
            lay.set_depth(u.length_si(_depth(request.get("depth"), "depth", u)))
        elif op == "stage":
            stage = request.get("stage")
            if stage is not None and stage not in lay.site.stages:
                raise InputError(f"no construction stage {stage!r}; stages are "
                                 f"{lay.site.stages}", argument="stage")
            self.stage = stage
        elif op == "limits":
            self.ratio_limit = _optional(request.get("ratio"), "ratio")
            s = _optional(request.get("stress"), "stress")
            self.stress_limit = None if s is None else u.pressure_si(s)
        return self.state()

    def save(self, request: dict) -> Path:
        return save_as(self.layout.doc, self.layout.path, request.get("name"),
                       replace_original=request.get("replace_original") is True)

    # --- the page's view -------------------------------------------------------------------
    def state(self) -> dict:
        lay, u = self.layout, self.units
        f = lay.site.metres_per_unit
        s = lay.spec
        stage = self.stage if self.stage in lay.site.stages else None
        total = lay.slice_total(stage)
        rows, check = lay.receptor_table(stress_limits(self.ratio_limit, self.stress_limit),
                                         stage)
        for row in rows:
            row.update(x=row["x"] / f, y=row["y"] / f, depth=u.length_out(row["depth"]),
                       dsz=u.pressure_out(row["dsz"]),
                       utilisation={r.limit.label: r.utilisation for r in check.rows
                                    if r.receptor_id == row["receptor_id"]},
                       governing=check.governing is not None
                       and check.governing.receptor_id == row["receptor_id"])
        t = lay.timing
        return _plain({
            "site": {"name": lay.site.name, "file": lay.path.name, "method": lay.site.method,
                     "units": {"length": u.length, "pressure": u.pressure,
                               "unit_weight": u.unit_weight}},
            "depth": u.length_out(lay.depth),
            "slice": {"x0": s.x0 / f, "y0": s.y0 / f, "dx": s.dx / f, "dy": s.dy / f,
                      "nx": s.nx, "ny": s.ny,
                      "max": float(u.pressure_out(total.max())),
                      "min": float(u.pressure_out(total.min())),
                      "values": base64.b64encode(
                          u.pressure_out(total).astype("<f4").tobytes()).decode()},
            "bodies": [self._body(n) for n in lay.parts],
            "receptors": [{"id": r.id, "kind": type(r).__name__.lower(),
                           "rings": _rings(r.geometry, f)} for r in lay.site.receptors],
            "table": rows,
            "limits": [{"label": lim.label, "quantity": lim.quantity, "value": lim.value}
                       for lim in stress_limits(self.ratio_limit, self.stress_limit)],
            "limit_inputs": {"ratio": self.ratio_limit,
                             "stress": None if self.stress_limit is None
                             else u.pressure_out(self.stress_limit)},
            "timing": {"raster_s": t.raster_s, "slice_s": t.slice_s, "points_s": t.points_s,
                       "total_s": t.total_s, "full_rebuild": t.full_rebuild,
                       "shifted": t.shifted, "cell": s.dx / f,
                       "open_s": self.open_s},
            "can_undo": bool(lay.history),
            "stages": lay.site.stages, "stage": stage,
            "assumptions": ASSUMPTIONS, "cautions": CAUTIONS,
        })

    def _body(self, name: str) -> dict:
        lay = self.layout
        raw = lay.doc["bodies"][name]
        body = lay.parts[name].body
        keys = {k: raw.get(k) for k in EDITABLE_KEYS
                if k in ("unit_weight", "stage") or k in _KIND_KEYS.get(raw["kind"], ())}
        keys["stage"] = raw.get("stage", 1)
        return {"name": name, "kind": raw["kind"], "keys": keys,
                "excavation": bool(raw.get("excavation")),
                "movable": movable_geometry(lay, name) is not None,
                "from_file": raw.get("file") is not None or raw["kind"] == "surfaces",
                "max_height": self.units.length_out(body.max_height),
                "rings": _rings(lay.site.context.outlines[name], lay.site.metres_per_unit)}


_KIND_KEYS = {"pile": ("repose_angle", "crest_height"), "footprint": ("height",),
              "embankment": ("crest_width", "side_slope", "end_slope")}


def _rings(geom, factor: float) -> list:
    """Plan geometry as lists of [x, y] rings/lines in site-CRS units (for drawing)."""
    out = []
    for part in getattr(geom, "geoms", [geom]):
        lines = [part.exterior, *part.interiors] if part.geom_type == "Polygon" else [part]
        for line in lines:
            xy = np.asarray(line.coords)[:, :2] / factor
            out.append(np.round(xy, 4).tolist())
    return out


def _number(v, name: str) -> float:
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
        raise InputError(f"must be a number, got {v!r}", argument=name)
    return float(v)


def _depth(v, name: str, units) -> float:
    """A depth in the site's length unit, checked in that unit (the message shows it)."""
    v = _number(v, name)
    if v < 0:
        raise InputError(f"must be >= 0 {units.length} below the ground, got {v:g}",
                         argument=name)
    return v


def _optional(v, name: str) -> float | None:
    if v is None or v == "":
        return None
    v = _number(v, name)
    if v <= 0:
        raise InputError(f"must be > 0, got {v:g}", argument=name)
    return v


def _plain(v):
    """JSON-ready: numpy scalars to Python, NaN to None."""
    if isinstance(v, dict):
        return {k: _plain(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_plain(x) for x in v]
    v = v.item() if isinstance(v, np.generic) else v
    return None if isinstance(v, float) and not math.isfinite(v) else v
