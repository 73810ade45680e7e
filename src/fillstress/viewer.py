"""3D scene of one results folder: fill, receptors and horizontal slices of Δσz.

The scene is built only from the documented results-folder files (see
docs/results-folder.md) through :class:`fillstress.io.results.ResultsFolder`.
Scene axes: x east and y north relative to a local origin (the analysis grid's
south-west corner, so large projected coordinates keep full precision in VTK's
float32 rendering), z up; a point at depth d below the existing ground sits at
z = ground − d, and z is multiplied by the vertical exaggeration. All three scene axes
are in the site length unit: plan coordinates in another CRS unit (an SI site in a
US-survey-foot CRS) are scaled to it, so the scene is not stretched.
"""
from __future__ import annotations

import os
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy.interpolate import RegularGridInterpolator

from ._lazy import require_extra
from ._validate import finite, positive
from .cautions import CORE_CAUTION
from .errors import InputError
from .io.atomic import write_atomic
from .io.results import QUANTITIES, PlanField, ResultsFolder, quantity_unit_key
from .units import unit_text

# pyvista (VTK) and matplotlib are imported inside the functions that use them: they are
# slow to load and most commands never need them.

#: Colour maps (matplotlib's perceptually uniform family), one per quantity, each with the
#: share of its dark end left out so the lowest values still read against white and black
#: text (magma's first tenth is near black).
COLOUR_MAPS = {"dsz": ("viridis", 0.0), "stress_ratio": ("plasma", 0.0),
               "settlement": ("magma", 0.2), "sigma_v0": ("cividis", 0.0),
               "fill_thickness": ("cividis", 0.0)}
LAYERS = ("fill", "slices", "points", "buildings", "pipes", "boreholes")
#: Receptor kinds: their geometry layer and the table prefix of their sample points.
RECEPTOR_KINDS = ("buildings", "pipes", "boreholes")
#: Round vertical exaggerations the automatic choice picks from.
NICE_EXAGGERATIONS = (1.0, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0, 10.0, 15.0, 20.0, 30.0, 50.0)
#: The automatic exaggeration makes the scene's height about this share of its plan size.
HEIGHT_SHARE = 0.35
#: Share of the finite slice values (or of the point values when there are no slices)
#: below the top of the automatic colour range: one spike cell or one borehole top does
#: not wash out every other colour.
ROBUST_PERCENTILE = 99.5
FILL_COLOUR = "burlywood"    # earth; kept out of the colour maps so fill never reads as stress
#: Titles with the Greek letters (drawn with matplotlib's DejaVu Sans, which has them),
#: and plain-Latin ones for when that font file is missing (VTK's own fonts lack them).
QUANTITY_TITLES = {"dsz": "Δσz", "stress_ratio": "Δσz / σ′v0", "settlement": "settlement",
                   "sigma_v0": "σ′v0"}
LATIN_TITLES = {"dsz": "stress increase dsz", "stress_ratio": "dsz / s'v0",
                "settlement": "settlement", "sigma_v0": "s'v0 (initial effective)"}
QUANTITY_WORDS = {"dsz": "vertical stress increase", "stress_ratio": "stress ratio",
                  "settlement": "settlement", "sigma_v0": "initial effective vertical stress"}
CAUTION = CORE_CAUTION + " Homogeneous elastic half-space, flexible load, superposition."
KEYS_HELP = ("h  show or hide this list\n"
             "left drag  rotate    shift + left drag  pan    wheel  zoom\n"
             "r  re-frame    v  isometric view    w / s  wireframe / surface\n"
             "q  close the window")


def colour_table(quantity: str, n: int = 256) -> np.ndarray:
    """(n, 3) RGB bytes of the colour map of `quantity` (:data:`COLOUR_MAPS`).

    >>> colour_table("settlement")[0].tolist() != [0, 0, 4]      # not magma's near black
    True
    """
    from matplotlib import colormaps
    name, cut = COLOUR_MAPS[quantity]
    rgb = colormaps[name](np.linspace(cut, 1.0, n))[:, :3]
    return np.round(rgb * 255).astype(np.uint8)


def _colour_map(quantity: str):
    from matplotlib.colors import ListedColormap
    name, cut = COLOUR_MAPS[quantity]
    return name if cut == 0 else ListedColormap(colour_table(quantity) / 255.0)


def font_file() -> str | None:
    """A TrueType font with the Greek letters (matplotlib's DejaVu Sans), or None."""
    import matplotlib
    path = Path(matplotlib.get_data_path()) / "fonts" / "ttf" / "DejaVuSans.ttf"
    return str(path) if path.is_file() else None


def quantity_title(quantity: str) -> str:
    """Short title of a quantity: Greek where the font has it, plain Latin otherwise."""
    return (QUANTITY_TITLES if font_file() else LATIN_TITLES)[quantity]


class _Frame:
    """Maps site coordinates and depths to scene coordinates (local origin, z up)."""

    def __init__(self, folder: ResultsFolder, exaggeration: float):
        grid = folder.manifest.get("grid") or {}
        fill = folder.fill_thickness()
        x0, y0 = grid.get("x0"), grid.get("y0")
        if x0 is None or y0 is None:
            x0, y0 = (fill.x[0], fill.y[0]) if fill is not None else (0.0, 0.0)
        self.x0, self.y0 = float(x0), float(y0)
        self.plan_to_length = folder.plan_to_length
        self.exaggeration = exaggeration
        self._ground = folder.ground_elevation()
        self.z_ref = float(np.nanmin(self._ground.values)) if self._has_ground() else 0.0

    def _has_ground(self) -> bool:
        return self._ground is not None and np.isfinite(self._ground.values).any()

    def _interpolator(self) -> RegularGridInterpolator:
        """Bilinear interpolation of the ground (no-data cells at the lowest ground),
        made once: every part of the scene asks for it."""
        if not hasattr(self, "_interp"):
            g = self._ground
            values = np.where(np.isfinite(g.values), g.values, self.z_ref)
            self._interp = RegularGridInterpolator((g.y, g.x), values, bounds_error=False,
                                                   fill_value=None)
        return self._interp

    def ground(self, x, y) -> np.ndarray:
        """Existing ground elevation (relative to the lowest ground) at site x, y."""
        x, y = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float))
        if not self._has_ground():
            return np.zeros(x.shape)
        g = self._ground
        yc = np.clip(y, g.y[0], g.y[-1])
        xc = np.clip(x, g.x[0], g.x[-1])
        return (self._interpolator()(np.stack([yc.ravel(), xc.ravel()], axis=1))
                .reshape(x.shape) - self.z_ref)

    def _ground_on(self, fx, fy) -> np.ndarray:
        """:meth:`ground` at the nodes fx × fy; on the ground raster's own nodes (slices
        and fill on the analysis lattice) its values, which is what interpolating there
        gives, without interpolating millions of points."""
        g = self._ground
        if self._has_ground() and np.array_equal(fx, g.x) and np.array_equal(fy, g.y):
            return np.asarray(self._interpolator().values, float) - self.z_ref
        return self.ground(*np.meshgrid(fx, fy))

    def points(self, x, y, height, ground=None) -> np.ndarray:
        """(N, 3) scene points for site x, y (plan unit) at `height` (length unit) above
        the existing ground (`ground` at x, y when known), all three in the length unit."""
        x, y, height = np.broadcast_arrays(*(np.asarray(a, float) for a in (x, y, height)))
        ground = self.ground(x, y) if ground is None else ground
        z = (ground + height) * self.exaggeration
        k = self.plan_to_length
        return np.column_stack([(x.ravel() - self.x0) * k, (y.ravel() - self.y0) * k, z.ravel()])

    def surface(self, f: PlanField, height: np.ndarray):
        """A pyvista StructuredGrid over the centres of `f` at `height` above ground."""
        import pyvista as pv
        xx, yy = np.meshgrid(f.x, f.y)
        # The points of pyvista's StructuredGrid(x, y, z) of these (ny, nx) arrays, in its
        # order (y fastest: the transposes raveled), made once and handed to VTK uncopied;
        # StructuredGrid(x, y, z) copies them twice more (millions of nodes on a corridor).
        pts = self.points(xx.T, yy.T, np.asarray(height).T,
                          ground=self._ground_on(f.x, f.y).T)
        grid = pv.StructuredGrid()
        grid.SetDimensions(*xx.shape, 1)
        grid.points = pts
        return grid


@dataclass(eq=False)
class Part:
    """One drawable piece of the scene, kept apart from any renderer: the desktop window,
    the PNGs and the browser page (:mod:`fillstress.scene_page`) draw the same parts.

    ``kind`` is "mesh" (a surface in one colour), "grid" (a StructuredGrid coloured by
    ``values``), "lines", "points" (sample points coloured by ``values``, with a hover
    text each) or "labels" (``texts`` at the mesh points). ``layer`` is a :data:`LAYERS`
    name or "frame" (outline, E/N ticks, north arrow, scale bar: always drawn).
    """

    layer: str
    kind: str
    mesh: object
    color: str = "black"
    opacity: float = 1.0
    values: np.ndarray | None = None
    depth: float | None = None
    texts: tuple = ()
    group: str = ""
    line_width: float = 1.0


@dataclass(eq=False)
class Scene:
    """Everything drawn for one results folder and quantity, in scene coordinates."""

    folder: ResultsFolder
    frame: _Frame
    quantity: str
    clim: tuple
    exaggeration: float
    parts: list
    span: float
    robust: bool              # clim is the automatic robust range (not user-set)
    data_max: float

    @property
    def slice_depths(self) -> list[float]:
        return sorted({p.depth for p in self.parts if p.depth is not None})

    @property
    def unit(self) -> str:
        return self.folder.units.label(QUANTITIES[self.quantity])

    @property
    def bar_title(self) -> str:
        title = quantity_title(self.quantity)
        return f"{title} ({self.unit})" if self.unit else title

    @property
    def site_name(self) -> str:
        site = self.folder.summary.get("site") or {}
        return str(site.get("name") or self.folder.path.name)

    @property
    def stage_text(self) -> str:
        stages = (self.folder.manifest.get("settings") or {}).get("stages") or []
        return f"after stage {stages[-1]} (final)" if len(stages) > 1 else "final fill"

    @property
    def date(self) -> str:
        return str(self.folder.manifest.get("created") or "")[:10]

    def title(self) -> str:
        """"<site> — <quantity> (<unit>) — <stage>"."""
        return f"{self.site_name} — {self.quantity_heading} — {self.stage_text}"

    @property
    def quantity_heading(self) -> str:
        """Words and symbol with unit, e.g. "vertical stress increase Δσz (kPa)"."""
        words = QUANTITY_WORDS[self.quantity]
        return self.bar_title if self.bar_title.startswith(words) else f"{words} {self.bar_title}"

    def caption(self, exaggeration: float | None = None, depth: float | None = None) -> str:
        """Origin, units, exaggeration, the slice shown and how the colours are scaled."""
        u, plan = self.folder.units.length, unit_text(self.folder.units.plan)
        exaggeration = self.exaggeration if exaggeration is None else exaggeration
        lines = [f"E, N in {plan} (grid north of the site CRS); depths in {u} below existing ground; "
                 f"vertical exaggeration {exaggeration:g}"]
        if depth is not None:
            lines.append("settlement at the ground surface" if self.quantity == "settlement"
                         else f"slice shown: {depth:g} {u} deep")
        lo, hi = self.clim
        scale = (f"colours {_fmt(lo)} to {_fmt(hi)} {self.unit}".rstrip())
        if self.robust and self.data_max > hi:
            scale += f" (top colour from {_fmt(hi)} up; max {_fmt(self.data_max)})"
        lines.append(scale)
        return "\n".join(lines)


def _fmt(v: float) -> str:
    return f"{v:.0f}" if abs(v) >= 100 else f"{v:.3g}"


def _nice_step(extent: float, ticks: int = 5) -> float:
    """A 1, 2 or 5 × 10ⁿ step giving about `ticks` steps over `extent`.

    >>> _nice_step(211.0), _nice_step(0.9), _nice_step(4300.0)
    (50.0, 0.2, 1000.0)
    """
    raw = max(float(extent), 1e-9) / ticks
    power = 10.0 ** float(np.floor(np.log10(raw)))
    for m in (1.0, 2.0, 5.0, 10.0):
        if raw <= m * power * 1.5:
            return m * power
    return 10.0 * power


def _colour_range(slices, point_values, colour_range) -> tuple[tuple, bool, float]:
    """(colour range, whether automatic, data maximum) of one quantity.

    Automatic: from 0 (or the minimum when negative) to the :data:`ROBUST_PERCENTILE`
    of the slice values, or to the 95th percentile of the point values when there are no
    slices (points cluster where the load is, a slice covers the plan evenly).
    """
    values = (np.concatenate([f.values[np.isfinite(f.values)].ravel() for f in slices])
              if slices else point_values[np.isfinite(point_values)])
    top = float(values.max()) if values.size else 1.0
    if colour_range is not None:
        try:
            lo, hi = (finite(v, "colour_range") for v in colour_range)
        except (TypeError, ValueError):
            raise InputError("needs two numbers, low and high", argument="colour_range") from None
        if not hi > lo:
            raise InputError(f"needs low < high, got {lo:g}, {hi:g}", argument="colour_range")
        return (lo, hi), False, top
    if values.size == 0:
        return (0.0, 1.0), True, top
    lo = min(float(values.min()), 0.0)
    # `values` is a copy made here: partitioned in place, not copied once more
    hi = float(np.percentile(values, ROBUST_PERCENTILE if slices else 95.0,
                             overwrite_input=True))
    if not hi > lo:
        hi = top if top > lo else lo + 1.0
    return (lo, hi), True, top


def _point_rows(folder: ResultsFolder, quantity: str) -> list[tuple[str, np.ndarray, list]]:
    """(kind, (n, 4) x y depth value, hover texts) for every points table with `quantity`."""
    out = []
    u = folder.units
    shown = [(q, folder.units.label(QUANTITIES[q])) for q in ("dsz", "sigma_v0", "stress_ratio",
                                                              "settlement")]
    for kind, df in folder.point_tables().items():
        col = folder.optional_column(df, quantity, QUANTITIES[quantity]) if df is not None else None
        if col is None or df.empty:
            continue
        xs = folder.column(df, "x", "plan_suffix", name=f"{kind}_points")
        ys = folder.column(df, "y", "plan_suffix", name=f"{kind}_points")
        ds = folder.column(df, "depth", "length", name=f"{kind}_points")
        data = df[[xs, ys, ds, col]].to_numpy(float)
        keep = np.all(np.isfinite(data), axis=1)
        texts = []
        for _, row in df[keep].iterrows():
            parts = [f"{row.get('receptor_kind', kind)} {row.get('receptor_id', '')}, "
                     f"point {row.get('point_id', '')}, {row[ds]:g} {u.length} deep"]
            for q, unit in shown:
                c = folder.optional_column(df, q, QUANTITIES[q])
                if c is not None and np.isfinite(row[c]):
                    parts.append(f"{QUANTITY_TITLES[q]} {_fmt(float(row[c]))} {unit_text(unit)}".rstrip())
            texts.append("; ".join(parts))
        out.append((kind, data[keep], texts))
    return out


class _PartsBuilder:
    """The parts of one results folder, quantity and exaggeration."""

    def __init__(self, folder: ResultsFolder, frame: _Frame, quantity: str):
        self.folder, self.frame, self.quantity = folder, frame, quantity
        self.parts: list[Part] = []
        self.fill = folder.fill_thickness()
        self.slices = folder.plan_slices(quantity)
        self.point_rows = _point_rows(folder, quantity)
        if not self.slices and not self.point_rows:
            raise InputError(f"the results folder has no {quantity!r} on slices or points",
                             argument="quantity")
        # Plan box of everything drawn (scene coordinates): the map furniture goes round it.
        xs = [a for f in [self.fill, *self.slices] if f is not None for a in (f.x[0], f.x[-1])]
        ys = [a for f in [self.fill, *self.slices] if f is not None for a in (f.y[0], f.y[-1])]
        points = self.point_values()
        xs += list(points[:, 0])
        ys += list(points[:, 1])
        k = folder.plan_to_length
        self.box = ((min(xs) - frame.x0) * k, (max(xs) - frame.x0) * k,
                    (min(ys) - frame.y0) * k, (max(ys) - frame.y0) * k)
        span = (self.box[1] - self.box[0] + self.box[3] - self.box[2]) / 2
        self.span = span if span > 0 else 10.0

    def point_values(self) -> np.ndarray:
        return np.concatenate([d for _, d, _ in self.point_rows]) if self.point_rows \
            else np.zeros((0, 4))

    def height(self) -> float:
        """Fill height plus the deepest slice or sample point (length unit)."""
        top = float(np.nanmax(self.fill.values)) if self.fill is not None else 0.0
        depths = [f.depth for f in self.slices] + list(self.point_values()[:, 2])
        return max(top, 0.0) + max(depths, default=0.0)

    def add(self, layer, kind, mesh, **style) -> None:
        self.parts.append(Part(layer, kind, mesh, **style))

    def add_fill(self):
        """The fill surface in one earth colour, lit so its shape shows; ground outline."""
        if self.fill is None:
            return
        t = np.where(np.isfinite(self.fill.values), self.fill.values, 0.0)
        surf = self.frame.surface(self.fill, t)
        if np.any(t > 0):
            self.add("fill", "grid", surf, color=FILL_COLOUR, opacity=0.4,
                     values=np.where(t > 1e-9, 1.0, np.nan).ravel(order="F"))
        self.add("frame", "lines", surf.outline(), color="dimgray")

    def add_slices(self):
        """Each slice with its outline and its depth written at a corner."""
        import pyvista as pv
        u = self.folder.units.length
        for k, f in enumerate(self.slices):
            surf = self.frame.surface(f, np.full(f.values.shape, -f.depth))
            self.add("slices", "grid", surf, values=f.values.ravel(order="F"), depth=f.depth)
            self.add("slices", "lines", surf.outline(), color="gray", depth=f.depth)
            # Labels on the four corners in turn, so closely spaced depths do not overlap.
            cx, cy = ((f.x[-1], f.y[0]), (f.x[0], f.y[0]), (f.x[-1], f.y[-1]), (f.x[0], f.y[-1]))[k % 4]
            label = "surface" if self.quantity == "settlement" else f"{f.depth:g} {u}"
            self.add("slices", "labels", pv.PolyData(self.frame.points(cx, cy, -f.depth)),
                     texts=(label,), depth=f.depth)

    def add_points(self):
        import pyvista as pv
        for kind, data, texts in self.point_rows:
            x, y, d, v = data.T
            self.add("points", "points", pv.PolyData(self.frame.points(x, y, -d)), values=v,
                     texts=tuple(texts), group=kind)

    def add_buildings(self):
        import pyvista as pv
        depth_col = self.folder.units.suffixed("foundation_depth", "length")
        height_col = self.folder.units.suffixed("height", "length")
        for feat in self.folder.features("buildings"):
            depth = float(feat.properties.get(depth_col) or 0.0)
            # Building height is not in the results contract: drawn schematically.
            height = float(feat.properties.get(height_col) or 0.04 * self.span)
            for poly in getattr(feat.geometry, "geoms", [feat.geometry]):
                if poly.geom_type != "Polygon":
                    continue
                ring = np.asarray(poly.exterior.coords)[:-1]
                base = self.frame.points(ring[:, 0], ring[:, 1], -depth)
                face = pv.PolyData(base, faces=np.r_[len(base), np.arange(len(base))])
                top = (depth + height) * self.frame.exaggeration
                block = face.extrude((0.0, 0.0, top), capping=True)
                self.add("buildings", "mesh", block, color="lightgray", opacity=0.6)
                self.add("buildings", "lines", block.extract_feature_edges(), color="black")

    def add_pipes(self):
        import pyvista as pv
        depth_col = self.folder.units.suffixed("depth", "length")
        dia_col = self.folder.units.suffixed("diameter", "length")
        for feat in self.folder.features("pipes"):
            radius = float(feat.properties.get(dia_col) or 0.02 * self.span) / 2.0
            crown = float(feat.properties.get(depth_col) or 0.0)
            for line in getattr(feat.geometry, "geoms", [feat.geometry]):
                xy = np.asarray(line.coords)[:, :2]
                if len(xy) < 2:
                    continue
                pts = self.frame.points(xy[:, 0], xy[:, 1], -(crown + radius))
                tube = pv.lines_from_points(pts).tube(radius=radius * self.frame.exaggeration ** 0.5)
                self.add("pipes", "mesh", tube, color="darkorange")

    def add_boreholes(self):
        import pyvista as pv
        top_col = self.folder.units.suffixed("top_depth", "length")
        bottom_col = self.folder.units.suffixed("bottom_depth", "length")
        for feat in self.folder.features("boreholes"):
            x, y = feat.geometry.centroid.x, feat.geometry.centroid.y
            top = float(feat.properties.get(top_col) or 0.0)
            bottom = float(feat.properties.get(bottom_col) or 0.0)
            if bottom <= top:
                continue
            a, b = self.frame.points([x, x], [y, y], [-top, -bottom])
            # a line a few pixels wide: a tube sized on the plan span was ~200 ft wide on a
            # 3-mile corridor and stood like a black column under the depth exaggeration
            self.add("boreholes", "lines", pv.Line(a, b), color="black", line_width=3.0)

    def add_map_furniture(self):
        """E and N ticks with site coordinates, a scale bar and a north arrow, on the lowest
        ground level around the plan box."""
        import pyvista as pv
        x0, x1, y0, y1 = self.box
        s, k = self.span, self.folder.plan_to_length
        plan, length = unit_text(self.folder.units.plan), self.folder.units.length
        segments, anchors, texts = [], [], []

        def ticks(lo, hi, origin):
            step = _nice_step((hi - lo) / k)
            first = np.ceil((origin + lo / k) / step) * step
            return [(v, (v - origin) * k) for v in np.arange(first, origin + hi / k + 1e-9, step)]
        for east, sx in ticks(x0, x1, self.frame.x0):
            segments.append(((sx, y0, 0), (sx, y0 - 0.02 * s, 0)))
            anchors.append((sx, y0 - 0.045 * s, 0))
            texts.append(f"{east:.0f}")
        for north, sy in ticks(y0, y1, self.frame.y0):
            segments.append(((x0, sy, 0), (x0 - 0.02 * s, sy, 0)))
            anchors.append((x0 - 0.1 * s, sy, 0))
            texts.append(f"{north:.0f}")
        anchors += [(x1 + 0.06 * s, y0 - 0.045 * s, 0), (x0 - 0.1 * s, y1 + 0.05 * s, 0)]
        texts += [f"E ({plan})", f"N ({plan})"]
        # Scale bar: a round length of about a quarter of the plan width.
        bar = _nice_step((x1 - x0) * 0.25, 1)
        yb = y0 - 0.1 * s
        segments += [((x0, yb, 0), (x0 + bar, yb, 0)), ((x0, yb - 0.01 * s, 0), (x0, yb + 0.01 * s, 0)),
                     ((x0 + bar, yb - 0.01 * s, 0), (x0 + bar, yb + 0.01 * s, 0))]
        anchors.append((x0 + bar / 2, yb - 0.03 * s, 0))
        texts.append(f"{bar:g} {length}")
        lines = pv.PolyData(np.array([p for seg in segments for p in seg], float),
                            lines=np.hstack([[2, 2 * i, 2 * i + 1] for i in range(len(segments))]))
        self.add("frame", "lines", lines, line_width=2.0)
        # North arrow (grid north, the CRS's y axis) beyond the north-east corner.
        ax, ay, n = x1 + 0.08 * s, y1 - 0.12 * s, 0.1 * s
        arrow = pv.PolyData(np.array([(ax - 0.03 * s, ay, 0), (ax, ay + n, 0), (ax + 0.03 * s, ay, 0),
                                      (ax, ay + 0.3 * n, 0)], float), faces=[4, 0, 3, 2, 1])
        self.add("frame", "mesh", arrow.triangulate(), color="black")
        anchors.append((ax, ay + n + 0.04 * s, 0))
        texts.append("N")
        self.add("frame", "labels", pv.PolyData(np.array(anchors, float)), texts=tuple(texts))


def scene_parts(results_dir, *, exaggeration: float | None = None, quantity: str = "dsz",
                layers=LAYERS, colour_range=None) -> Scene:
    """The parts of the scene of a results folder or of a :class:`ResultsFolder` view of
    it (see :func:`build_scene`)."""
    folder = ResultsFolder.of(results_dir)
    require_extra("view", argument="view")
    if exaggeration is not None:
        exaggeration = positive(exaggeration, "exaggeration")
    quantity_unit_key(quantity)
    layers = _validated_layers(layers)
    frame = _Frame(folder, 1.0)
    builder = _PartsBuilder(folder, frame, quantity)
    if exaggeration is None:
        exaggeration = auto_exaggeration(builder.span, builder.height())
    frame.exaggeration = exaggeration
    crange, robust, top = _colour_range(builder.slices, builder.point_values()[:, 3], colour_range)
    for name in layers:
        getattr(builder, f"add_{name}")()
    builder.add_map_furniture()
    return Scene(folder, frame, quantity, crange, exaggeration, builder.parts, builder.span,
                 robust, top)


def auto_exaggeration(plan_size: float, height: float) -> float:
    """Vertical exaggeration for a scene `plan_size` across and `height` tall (fill + depth).

    The largest round value (:data:`NICE_EXAGGERATIONS`) that keeps the exaggerated
    height within :data:`HEIGHT_SHARE` of the plan size; never below 1 (depths are never
    compressed).

    Examples
    --------
    >>> auto_exaggeration(300.0, 20.0), auto_exaggeration(50.0, 40.0), auto_exaggeration(1e4, 1.0)
    (5.0, 1.0, 50.0)
    """
    plan_size, height = float(plan_size), float(height)
    if not (plan_size > 0 and height > 0 and np.isfinite(plan_size) and np.isfinite(height)):
        return 1.0
    wanted = HEIGHT_SHARE * plan_size / height
    fitting = [e for e in NICE_EXAGGERATIONS if e <= wanted]
    return fitting[-1] if fitting else 1.0


class _ActorGroup:
    """The actors of one slice (surface, frame, depth label), shown and hidden together."""

    def __init__(self, actors):
        self.actors = actors

    def SetVisibility(self, visible: bool) -> None:  # noqa: N802 (VTK's spelling)
        for actor in self.actors:
            actor.SetVisibility(bool(visible))

    def GetVisibility(self) -> bool:  # noqa: N802
        return bool(self.actors[0].GetVisibility())


def headless() -> bool:
    """True on a Linux or BSD machine with no X or Wayland display to open a window on."""
    return sys.platform.startswith(("linux", "freebsd")) and not (
        os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY"))


def _new_plotter(off_screen: bool, window_size, title: str):
    import pyvista as pv
    if off_screen and headless():
        # VTK tries X first and warns "bad X server connection" before rendering through
        # EGL; the render is right, the warning is noise (-q must be quiet).
        import vtk
        vtk.vtkLogger.SetStderrVerbosity(vtk.vtkLogger.VERBOSITY_ERROR)
    plotter = pv.Plotter(off_screen=off_screen, window_size=list(window_size), title=title)
    plotter.ren_win.SetWindowName(title)      # not the library's default name
    plotter.set_background("white")
    plotter.add_axes(color="black", xlabel="E", ylabel="N", zlabel="up",
                     viewport=(0.0, 0.22, 0.1, 0.36))   # above the sliders
    return plotter


def _validated_layers(layers) -> tuple[str, ...]:
    layers = (layers,) if isinstance(layers, str) else tuple(layers)
    unknown = [name for name in layers if name not in LAYERS]
    if unknown:
        raise InputError(f"unknown layer(s) {unknown}; choose from {', '.join(LAYERS)}",
                         argument="layers")
    return layers


class _Drawer:
    """Adds the parts of a :class:`Scene` to a pyvista Plotter."""

    def __init__(self, scene: Scene, plotter, slice_floor: float):
        self.scene, self.plotter, self.slice_floor = scene, plotter, slice_floor
        self.slice_actors: dict[float, list] = {}
        self.bar_shown = False
        self.font = font_file()

    def _mesh_kwargs(self):
        lo, hi = self.scene.clim
        fmt = "%.0f" if hi - lo >= 50 else "%.3g"
        bar = {"title": self.scene.bar_title, "vertical": True, "fmt": fmt, "n_labels": 5,
               "position_x": 0.86, "position_y": 0.22, "height": 0.55, "color": "black",
               "title_font_size": 16, "label_font_size": 13}
        return dict(cmap=_colour_map(self.scene.quantity), clim=self.scene.clim,
                    scalar_bar_args=bar, show_scalar_bar=not self.bar_shown,
                    lighting=False)  # unlit, so the colours read exactly against the scalar bar

    def draw(self, part: Part):
        method = getattr(self, f"_{part.kind}")
        actor = method(part)
        if part.depth is not None and actor is not None:
            self.slice_actors.setdefault(part.depth, []).append(actor)

    def _mesh(self, p: Part):
        return self.plotter.add_mesh(p.mesh, color=p.color, opacity=p.opacity,
                                     smooth_shading=True)

    def _lines(self, p: Part):
        return self.plotter.add_mesh(p.mesh, color=p.color, line_width=p.line_width)

    def _grid(self, p: Part):
        mesh = p.mesh.copy()
        if p.layer == "fill":
            mesh.point_data["loaded"] = p.values
            part = mesh.threshold(0.5, scalars="loaded", method="upper")
            return self.plotter.add_mesh(part.extract_surface(algorithm="dataset_surface"),
                                         color=p.color, opacity=p.opacity, smooth_shading=True)
        title = self.scene.bar_title
        mesh.point_data[title] = p.values
        lo, hi = self.scene.clim
        if self.slice_floor > 0:
            # all_scalars: a cell is kept only when all its corners reach the floor
            mesh = mesh.threshold(lo + self.slice_floor * (hi - lo), scalars=title,
                                  method="upper", all_scalars=True)
        if not mesh.n_points:
            return None
        actor = self.plotter.add_mesh(mesh, scalars=title, nan_opacity=0.0,
                                      **self._mesh_kwargs())
        self._bar_drawn()
        return actor

    def _points(self, p: Part):
        title = self.scene.bar_title
        mesh = p.mesh.copy()
        mesh.point_data[title] = p.values
        actor = self.plotter.add_mesh(mesh, scalars=title, render_points_as_spheres=True,
                                      point_size=9, **self._mesh_kwargs())
        self._bar_drawn()
        return actor

    def _bar_drawn(self):
        if self.bar_shown or not self.font:
            self.bar_shown = True
            return
        import vtk
        self.bar_shown = True
        for bar in self.plotter.scalar_bars.values():
            prop = bar.GetTitleTextProperty()
            prop.SetFontFamily(vtk.VTK_FONT_FILE)
            prop.SetFontFile(self.font)

    def _labels(self, p: Part):
        return self.plotter.add_point_labels(p.mesh, list(p.texts), font_size=11,
                                             show_points=False, shape_opacity=0.0,
                                             bold=False, always_visible=True,
                                             text_color="black")

    def text(self, text: str, x: float, y: float, size: float, name: str, top: bool = True):
        """`text` at viewport fraction x, y (its top-left corner when `top`), `size` in
        points for a 900-pixel-high window, scaled to the window."""
        height = self.plotter.window_size[1]
        actor = self.plotter.add_text(text, position=(x, y), viewport=True, color="black",
                                      font_size=max(6, round(size * height / 900)), name=name,
                                      font_file=self.font)
        if top:
            actor.GetTextProperty().SetVerticalJustificationToTop()
        return actor

    def texts(self, caption: str):
        self.text(self.scene.title(), 0.01, 0.99, 11, "title")
        self.caption(caption)
        self.text(CAUTION.replace("govern. ", "govern.\n"), 0.01, 0.01, 7.5, "caution", top=False)

    def caption(self, caption: str):
        self.text(caption, 0.01, 0.95, 7.5, "caption")


def build_scene(results_dir, *, exaggeration: float | None = None, quantity: str = "dsz",
                depth: float | None = None, layers=LAYERS, interactive: bool = False,
                off_screen: bool = True, window_size=(1200, 900), slice_floor: float = 0.02,
                colour_range=None):
    """Build the 3D scene of a results folder as a pyvista Plotter.

    Parameters
    ----------
    results_dir : str or path-like
        A results folder (docs/results-folder.md).
    exaggeration : float, optional
        Vertical exaggeration, > 0; scene z is multiplied by it. None (default) picks a
        round value from the site's size (:func:`auto_exaggeration`).
    quantity : {"dsz", "stress_ratio", "settlement", "sigma_v0"}
        Quantity coloured on the slices and at the sample points.
    depth : float, optional
        Show only the slices at this depth (length unit); all slices when None.
    layers : iterable of str
        Parts to draw, a subset of :data:`LAYERS`.
    interactive : bool
        Add a depth slider, an exaggeration slider and the key list on ``h`` (desktop use).
    off_screen : bool
        Create the plotter off screen (for screenshots).
    window_size : (int, int)
        Render window size in pixels.
    slice_floor : float
        Slices leave out values below this share (0 to 1) of the colour range, so the
        slices beneath show through around the loaded area; 0 draws whole slices.
        Slices stay opaque (VTK's offscreen translucency sorting is unreliable), so
        their pixels are exactly colour-map colours.
    colour_range : (float, float), optional
        Colour range (quantity unit); default from zero to a robust top
        (:data:`ROBUST_PERCENTILE`), values above it drawn in the top colour.

    Returns
    -------
    pyvista.Plotter
        The plotter. Attributes ``fillstress_clim`` (colour range of `quantity`),
        ``fillstress_exaggeration``, ``fillstress_slice_depths``,
        ``fillstress_slice_actors`` ((depth, actor group) pairs) and ``fillstress_scene``.

    Examples
    --------
    >>> build_scene("/no/such/folder")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument results_dir: is not a results folder (no such directory)
    """
    require_extra("view", argument="view")
    slice_floor = _share(slice_floor, "slice_floor")
    if depth is not None:
        depth = finite(depth, "depth")
    scene = scene_parts(results_dir, exaggeration=exaggeration, quantity=quantity,
                        layers=layers, colour_range=colour_range)
    depths = scene.slice_depths
    if depth is not None and "slices" in _validated_layers(layers) \
            and not any(np.isclose(d, depth) for d in depths):
        have = ", ".join(f"{d:g}" for d in depths) or "no slices"
        raise InputError(f"no slice at depth {depth:g}; the folder has {have}", argument="depth")
    plotter = _new_plotter(off_screen, window_size, f"fillstress — {scene.site_name}")
    drawer = _Drawer(scene, plotter, slice_floor)
    for part in scene.parts:
        drawer.draw(part)
    groups = [(d, _ActorGroup(a)) for d, a in sorted(drawer.slice_actors.items())]
    for d, group in groups:
        group.SetVisibility(depth is None or np.isclose(d, depth))
    import pyvista as pv
    for name, value in (("clim", scene.clim), ("exaggeration", scene.exaggeration),
                        ("slice_depths", depths), ("slice_actors", groups), ("scene", scene)):
        pv.set_new_attribute(plotter, f"fillstress_{name}", value)
    shown = depth if depth is not None else (depths[0] if interactive and depths else None)
    drawer.texts(scene.caption(depth=shown))
    _set_camera(plotter, "iso")
    if interactive:
        _Controls(plotter, scene, drawer, groups).add()
    return plotter


def _share(value, name: str) -> float:
    """A number from 0 to 1, or InputError naming the argument."""
    v = finite(value, name)
    if not 0.0 <= v <= 1.0:
        raise InputError(f"must be from 0 to 1, got {v:g}", argument=name)
    return v


class _Controls:
    """Desktop controls: depth slider in depth units, exaggeration slider, key list."""

    def __init__(self, plotter, scene: Scene, drawer: _Drawer, groups):
        self.plotter, self.scene, self.drawer, self.groups = plotter, scene, drawer, groups
        self.depths = [d for d, _ in groups]
        self.depth = self.depths[0] if self.depths else None
        self.exaggeration = scene.exaggeration
        self.help_shown = False

    def add(self):
        u = self.scene.folder.units.length
        bottom = {"color": "black", "title_height": 0.02, "style": "modern"}
        if len(self.depths) > 1:
            self.choose_depth(self.depth)
            self.plotter.add_slider_widget(
                self.choose_depth, [self.depths[0], self.depths[-1]], value=self.depth,
                title=f"slice depth ({u})", pointa=(0.04, 0.17), pointb=(0.38, 0.17),
                fmt="%.2f", **bottom)
        self.plotter.add_slider_widget(
            self.stretch, [1.0, max(10.0, 2.0 * self.exaggeration)], value=self.exaggeration,
            title="vertical exaggeration", pointa=(0.45, 0.17), pointb=(0.8, 0.17), fmt="%.1f",
            **bottom)
        self.plotter.add_key_event("h", self.toggle_help)
        self.drawer.text("h: keys", 0.93, 0.86, 7.5, "keys_hint")

    def nearest(self, value: float) -> float:
        return min(self.depths, key=lambda d: abs(d - value))

    def choose_depth(self, value):
        """Show the slice nearest `value` (the slider snaps to the slice depths)."""
        self.depth = self.nearest(float(value))
        for d, group in self.groups:
            group.SetVisibility(bool(np.isclose(d, self.depth)))
        for widget in self.plotter.widgets.slider_widgets[:1]:
            rep = widget.GetRepresentation()
            if len(self.depths) > 1 and not np.isclose(rep.GetValue(), self.depth):
                rep.SetValue(self.depth)
        self._recaption()

    def stretch(self, value):
        """Scale z to exaggeration `value`, re-frame the camera, update the caption."""
        self.exaggeration = float(value)
        self.plotter.set_scale(zscale=self.exaggeration / self.scene.exaggeration)
        self.plotter.reset_camera()
        self._recaption()

    def _recaption(self):
        self.drawer.caption(self.scene.caption(self.exaggeration, self.depth))

    def toggle_help(self):
        self.help_shown = not self.help_shown
        self.drawer.text(KEYS_HELP if self.help_shown else "", 0.45, 0.9, 8, "keys")


def show(results_dir, *, exaggeration: float | None = None, quantity: str = "dsz",
         depth: float | None = None, layers=LAYERS, colour_range=None) -> None:
    """Open the interactive scene in a desktop window (depth and exaggeration sliders,
    ``h`` lists the keys).

    Examples
    --------
    >>> show("/no/such/folder")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument results_dir: is not a results folder (no such directory)
    """
    folder = ResultsFolder(results_dir)
    if headless():
        raise InputError("no display to open a window on; render with --png FILE or "
                         "--html FILE instead", argument="view")
    plotter = build_scene(folder.path, exaggeration=exaggeration, quantity=quantity,
                          depth=depth, layers=layers, colour_range=colour_range, interactive=True,
                          off_screen=False)
    plotter.show(title=f"fillstress — {plotter.fillstress_scene.site_name}")


CAMERAS = ("iso", "xy", "xz", "yz")


def _camera(camera):
    """A named view (:data:`CAMERAS`) or a pyvista camera position, checked."""
    if isinstance(camera, str):
        if camera not in CAMERAS:
            raise InputError(f"unknown camera {camera!r}; choose from {', '.join(CAMERAS)} "
                             "or give [position, focal point, view up]", argument="camera")
        return camera
    try:
        position = np.asarray(camera, float)
    except (TypeError, ValueError):
        position = np.zeros(0)
    if position.shape != (3, 3) or not np.all(np.isfinite(position)):
        raise InputError("must be a view name or three (x, y, z) points: position, focal "
                         "point, view up", argument="camera")
    return [tuple(row) for row in position]


def _writable(path) -> Path:
    """`path` when its folder exists: checked before the work, not after."""
    path = Path(path)
    if not path.parent.is_dir():
        raise InputError("folder does not exist", file=path.parent)
    return path


def _set_camera(plotter, camera) -> None:
    """"iso" looks from the south-west and above, so east runs to the right as on a map."""
    if camera == "iso":
        plotter.view_vector((-1.0, -1.6, 1.3), viewup=(0.0, 0.0, 1.0))
    else:
        plotter.camera_position = camera
    plotter.reset_camera()


def render_png(results_dir, path, *, camera="iso", window_size=(1200, 900),
               exaggeration: float | None = None, quantity: str = "dsz",
               depth: float | None = None, layers=LAYERS, slice_floor: float = 0.02,
               colour_range=None) -> Path:
    """Render the scene off screen to a PNG file and return its path.

    Parameters
    ----------
    camera : str or list
        A view: "iso", "xy" (plan from above), "xz" (looking north), "yz" (looking
        west), or ``[(position), (focal point), (view up)]`` in scene coordinates.
    Other parameters are those of :func:`build_scene`.

    Examples
    --------
    >>> render_png("/no/such/folder", "x.png")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument results_dir: is not a results folder (no such directory)
    """
    ResultsFolder(results_dir)
    path = _writable(path)
    camera = _camera(camera)
    plotter = build_scene(results_dir, exaggeration=exaggeration, quantity=quantity,
                          depth=depth, layers=layers, off_screen=True, window_size=window_size,
                          slice_floor=slice_floor, colour_range=colour_range)
    try:
        _set_camera(plotter, camera)
        return write_atomic(path, lambda tmp: plotter.screenshot(str(tmp)))
    finally:
        plotter.close()
