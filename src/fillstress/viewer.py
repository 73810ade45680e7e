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

import contextlib
import os

from pathlib import Path

import numpy as np

from ._validate import finite, positive
from .errors import InputError
from .io.atomic import write_atomic
from .io.results import QUANTITIES, PlanField, ResultsFolder, quantity_unit_key

#: Perceptually uniform colour maps (matplotlib's viridis family), one per quantity.
COLOUR_MAPS = {"dsz": "viridis", "stress_ratio": "plasma", "settlement": "magma",
               "sigma_v0": "viridis", "fill_thickness": "cividis"}
LAYERS = ("fill", "slices", "points", "buildings", "pipes", "boreholes")
#: Round vertical exaggerations the automatic choice picks from.
NICE_EXAGGERATIONS = (1.0, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0, 10.0, 15.0, 20.0, 30.0, 50.0)
#: The automatic exaggeration makes the scene's height about this share of its plan size.
HEIGHT_SHARE = 0.35
FILL_COLOUR = "burlywood"    # earth; kept out of the colour maps so fill never reads as stress
# Plain-Latin titles: VTK's built-in fonts lack the Greek letters.
QUANTITY_TITLES = {"dsz": "stress increase", "stress_ratio": "dsz / s'v0",
                   "settlement": "settlement", "sigma_v0": "s'v0"}


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

    def ground(self, x, y) -> np.ndarray:
        """Existing ground elevation (relative to the lowest ground) at site x, y."""
        x, y = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float))
        if not self._has_ground():
            return np.zeros(x.shape)
        from scipy.interpolate import RegularGridInterpolator
        g = self._ground
        values = np.where(np.isfinite(g.values), g.values, self.z_ref)
        interp = RegularGridInterpolator((g.y, g.x), values, bounds_error=False, fill_value=None)
        yc = np.clip(y, g.y[0], g.y[-1])
        xc = np.clip(x, g.x[0], g.x[-1])
        return interp(np.stack([yc.ravel(), xc.ravel()], axis=1)).reshape(x.shape) - self.z_ref

    def points(self, x, y, height) -> np.ndarray:
        """(N, 3) scene points for site x, y (plan unit) at `height` (length unit) above
        the existing ground, all three in the length unit."""
        x, y, height = np.broadcast_arrays(*(np.asarray(a, float) for a in (x, y, height)))
        z = (self.ground(x, y) + height) * self.exaggeration
        k = self.plan_to_length
        return np.column_stack([(x.ravel() - self.x0) * k, (y.ravel() - self.y0) * k, z.ravel()])

    def surface(self, f: PlanField, height: np.ndarray):
        """A pyvista StructuredGrid over the centres of `f` at `height` above ground."""
        import pyvista as pv
        xx, yy = np.meshgrid(f.x, f.y)
        pts = self.points(xx, yy, height)
        return pv.StructuredGrid(*(pts[:, k].reshape(xx.shape) for k in range(3)))


class _ActorGroup:
    """The actors of one slice (surface, frame, depth label), shown and hidden together."""

    def __init__(self, actors):
        self.actors = actors

    def SetVisibility(self, visible: bool) -> None:  # noqa: N802 (VTK's spelling)
        for actor in self.actors:
            actor.SetVisibility(bool(visible))

    def GetVisibility(self) -> bool:  # noqa: N802
        return bool(self.actors[0].GetVisibility())


def _quantity_range(slices, point_values) -> tuple[float, float]:
    """Common colour range of slices and point values of one quantity."""
    lows, highs = [], []
    for f in slices:
        lo, hi = f.value_range()
        lows.append(lo)
        highs.append(hi)
    if point_values.size:
        lows.append(float(point_values.min()))
        highs.append(float(point_values.max()))
    if not lows:
        return (0.0, 1.0)
    lo, hi = min(lows), max(highs)
    return (lo, hi) if hi > lo else (lo, lo + 1.0)


def _point_values(folder: ResultsFolder, quantity: str):
    """x, y, depth and value of every sample point that carries `quantity`."""
    rows = []
    for kind, df in folder.point_tables().items():
        col = folder.optional_column(df, quantity, QUANTITIES[quantity])
        if df is None or col is None or df.empty:
            continue
        xs = folder.column(df, "x", "plan_suffix", name=f"{kind}_points")
        ys = folder.column(df, "y", "plan_suffix", name=f"{kind}_points")
        ds = folder.column(df, "depth", "length", name=f"{kind}_points")
        rows.append(df[[xs, ys, ds, col]].to_numpy(float))
    data = np.concatenate(rows) if rows else np.zeros((0, 4))
    return data[np.all(np.isfinite(data), axis=1)]


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


class _SceneBuilder:
    """Adds each layer of one results folder to a pyvista Plotter."""

    def __init__(self, folder: ResultsFolder, plotter, frame: _Frame, quantity: str,
                 slice_floor: float = 0.0):
        self.folder, self.plotter, self.frame, self.quantity = folder, plotter, frame, quantity
        self.slice_floor = slice_floor
        self.slice_actors: list[tuple[float, object]] = []
        fill = folder.fill_thickness()
        self.fill = fill
        # Plan size of the site (length unit), to size the schematic parts (building
        # height, borehole) and to choose the exaggeration.
        span = (np.ptp(fill.x) + np.ptp(fill.y)) / 2 * folder.plan_to_length \
            if fill is not None else 0.0
        self.span = span if span > 0 else 10.0
        self.slices = folder.plan_slices(quantity)
        self.point_data = _point_values(folder, quantity)
        if not self.slices and self.point_data.size == 0:
            raise InputError(f"the results folder has no {quantity!r} on slices or points",
                             argument="quantity")
        self.clim = _quantity_range(self.slices, self.point_data[:, 3])
        if self.clim[0] >= 0.0:
            self.clim = (0.0, self.clim[1])        # a bar from zero reads as "none to most"
        unit = folder.units.label(QUANTITIES[quantity])
        self.bar_title = f"{QUANTITY_TITLES[quantity]} ({unit})" if unit else QUANTITY_TITLES[quantity]

    def height(self) -> float:
        """Fill height plus the deepest slice or sample point (length unit)."""
        top = float(np.nanmax(self.fill.values)) if self.fill is not None else 0.0
        depths = [f.depth for f in self.slices] + list(self.point_data[:, 2])
        return max(top, 0.0) + max(depths, default=0.0)

    def _mesh_kwargs(self):
        fmt = "%.0f" if self.clim[1] - self.clim[0] >= 50 else "%.3g"
        return dict(cmap=COLOUR_MAPS[self.quantity], clim=self.clim, scalar_bar_args={
            "title": self.bar_title, "vertical": True, "fmt": fmt, "n_labels": 5,
            "position_x": 0.86, "position_y": 0.1, "height": 0.6},
            lighting=False)  # unlit, so the colours read exactly against the scalar bar

    def add_fill(self):
        """The fill surface in one earth colour, lit so its shape shows; ground outline."""
        if self.fill is None:
            return
        t = np.where(np.isfinite(self.fill.values), self.fill.values, 0.0)
        surf = self.frame.surface(self.fill, t)
        surf.point_data["thickness"] = t.ravel(order="F")
        loaded = surf.threshold(1e-9, scalars="thickness", method="upper") if np.any(t > 0) else None
        if loaded is not None and loaded.n_points:
            self.plotter.add_mesh(loaded.extract_surface(algorithm="dataset_surface"),
                                  color=FILL_COLOUR, opacity=0.4, smooth_shading=True)
        self.plotter.add_mesh(surf.outline(), color="dimgray", line_width=1)

    def add_slices(self, depth):
        """Each slice, cut below `slice_floor` × the colour maximum, framed and labelled."""
        import pyvista as pv
        floor = self.clim[0] + self.slice_floor * (self.clim[1] - self.clim[0])
        u = self.folder.units.length
        shown = 0
        for k, f in enumerate(self.slices):
            surf = self.frame.surface(f, np.full(f.values.shape, -f.depth))
            surf.point_data[self.bar_title] = f.values.ravel(order="F")
            visible = bool(depth is None or np.isclose(f.depth, depth))
            # all_scalars: a cell is kept only when all its corners reach the floor
            part = surf.threshold(floor, scalars=self.bar_title, method="upper",
                                  all_scalars=True) if self.slice_floor > 0 else surf
            actors = [self.plotter.add_mesh(surf.outline(), color="gray", line_width=1)]
            if part.n_points:
                actors.append(self.plotter.add_mesh(
                    part, scalars=self.bar_title,
                    **({"nan_opacity": 0.0} if self.slice_floor == 0 else {}),
                    show_scalar_bar=shown == 0, **self._mesh_kwargs()))
                shown += 1
            # Labels on the four corners in turn, so closely spaced depths do not overlap.
            cx, cy = ((f.x[-1], f.y[0]), (f.x[0], f.y[0]), (f.x[-1], f.y[-1]), (f.x[0], f.y[-1]))[k % 4]
            corner = self.frame.points(cx, cy, -f.depth)
            actors.append(self.plotter.add_point_labels(
                pv.PolyData(corner), [f"{f.depth:g} {u}"], font_size=11, show_points=False,
                shape_opacity=0.6, always_visible=True))
            group = _ActorGroup(actors)
            group.SetVisibility(visible)
            self.slice_actors.append((f.depth, group))
        if depth is not None and not any(np.isclose(d, depth) for d, _ in self.slice_actors):
            have = ", ".join(f"{d:g}" for d in self.slice_depths())
            raise InputError(f"no slice at depth {depth:g}; the folder has {have}", argument="depth")

    def slice_depths(self) -> list[float]:
        return sorted({d for d, _ in self.slice_actors})

    def add_points(self):
        import pyvista as pv
        if self.point_data.size == 0:
            return
        x, y, d, v = self.point_data.T
        cloud = pv.PolyData(self.frame.points(x, y, -d))
        cloud.point_data[self.bar_title] = v
        self.plotter.add_mesh(cloud, scalars=self.bar_title, render_points_as_spheres=True,
                              point_size=9, show_scalar_bar=not self.slices, **self._mesh_kwargs())

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
                self.plotter.add_mesh(block, color="lightgray", opacity=0.6, show_edges=True,
                                      edge_color="black")

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
                self.plotter.add_mesh(tube, color="darkorange")

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
            self.plotter.add_mesh(pv.Line(a, b).tube(radius=0.006 * self.span), color="black")


def _new_plotter(off_screen: bool, window_size):
    import pyvista as pv
    plotter = pv.Plotter(off_screen=off_screen, window_size=list(window_size))
    plotter.set_background("white")
    plotter.add_axes(color="black")
    return plotter


def _validated_layers(layers) -> tuple[str, ...]:
    layers = tuple(layers)
    unknown = [name for name in layers if name not in LAYERS]
    if unknown:
        raise InputError(f"unknown layer(s) {unknown}; choose from {', '.join(LAYERS)}",
                         argument="layers")
    return layers


def build_scene(results_dir, *, exaggeration: float | None = None, quantity: str = "dsz",
                depth: float | None = None, layers=LAYERS, interactive: bool = False,
                off_screen: bool = True, window_size=(1200, 900), slice_floor: float = 0.02):
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
        Add a depth slider and an exaggeration slider (desktop use).
    off_screen : bool
        Create the plotter off screen (for screenshots and HTML export).
    window_size : (int, int)
        Render window size in pixels.
    slice_floor : float
        Slices leave out values below this share (0 to 1) of the colour range, so the
        slices beneath show through around the loaded area; 0 draws whole slices.
        Slices stay opaque (VTK's offscreen translucency sorting is unreliable), so
        their pixels are exactly colour-map colours.

    Returns
    -------
    pyvista.Plotter
        The plotter. Attributes ``fillstress_clim`` (colour range of `quantity`),
        ``fillstress_exaggeration``, ``fillstress_slice_depths`` and
        ``fillstress_slice_actors`` ((depth, actor group) pairs).

    Examples
    --------
    >>> build_scene("/no/such/folder")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument results_dir: is not a results folder (no such directory)
    """
    folder = ResultsFolder(results_dir)
    if exaggeration is not None:
        exaggeration = positive(exaggeration, "exaggeration")
    slice_floor = _share(slice_floor, "slice_floor")
    quantity_unit_key(quantity)
    if depth is not None:
        depth = finite(depth, "depth")
    layers = _validated_layers(layers)
    plotter = _new_plotter(off_screen, window_size)
    frame = _Frame(folder, 1.0)
    builder = _SceneBuilder(folder, plotter, frame, quantity, slice_floor)
    if exaggeration is None:
        exaggeration = auto_exaggeration(builder.span, builder.height())
    frame.exaggeration = exaggeration
    for name in layers:
        if name == "slices":
            builder.add_slices(depth)
        else:
            getattr(builder, f"add_{name}")()
    import pyvista as pv
    pv.set_new_attribute(plotter, "fillstress_clim", builder.clim)
    pv.set_new_attribute(plotter, "fillstress_exaggeration", exaggeration)
    pv.set_new_attribute(plotter, "fillstress_slice_depths", builder.slice_depths())
    pv.set_new_attribute(plotter, "fillstress_slice_actors", list(builder.slice_actors))
    plotter.add_text(_caption(folder, builder, exaggeration), position="upper_left",
                     font_size=9, color="black")
    plotter.view_isometric()
    if interactive:
        _add_sliders(plotter, builder, exaggeration)
    return plotter


def _share(value, name: str) -> float:
    """A number from 0 to 1, or InputError naming the argument."""
    v = finite(value, name)
    if not 0.0 <= v <= 1.0:
        raise InputError(f"must be from 0 to 1, got {v:g}", argument=name)
    return v


def _caption(folder: ResultsFolder, builder: _SceneBuilder, exaggeration: float) -> str:
    from .report.labels import unit_text
    u, plan = folder.units.length, unit_text(folder.units.plan)
    lines = [f"origin E {builder.frame.x0:.2f}, N {builder.frame.y0:.2f} {plan}; "
             f"depths in {u}; vertical exaggeration {exaggeration:g}"]
    if builder.slices and builder.slice_floor > 0:
        lines.append(f"slices show {QUANTITY_TITLES[builder.quantity]} from "
                     f"{builder.slice_floor:.0%} of the colour range up")
    return "\n".join(lines)


def _add_sliders(plotter, builder: _SceneBuilder, exaggeration: float):
    """Depth slider choosing the slice shown, and a vertical exaggeration slider."""
    depths = builder.slice_depths()
    u = builder.folder.units.length
    if len(depths) > 1:
        def choose(value):
            k = int(round(value))
            for d, actor in builder.slice_actors:
                actor.SetVisibility(bool(np.isclose(d, depths[k])))
            plotter.add_text(f"slice depth {depths[k]:g} {u}", position="lower_left",
                             font_size=10, color="black", name="depth_label")
        plotter.add_slider_widget(choose, [0, len(depths) - 1], value=0, title="slice",
                                  pointa=(0.55, 0.08), pointb=(0.9, 0.08), fmt="%.0f",
                                  color="black")

    def stretch(value):
        plotter.set_scale(zscale=value / exaggeration)
    plotter.add_slider_widget(stretch, [1.0, max(10.0, 2.0 * exaggeration)], value=exaggeration,
                              title="exaggeration", pointa=(0.55, 0.92), pointb=(0.9, 0.92),
                              fmt="%.1f", color="black")


def show(results_dir, *, exaggeration: float | None = None, quantity: str = "dsz") -> None:
    """Open the interactive scene in a desktop window (depth and exaggeration sliders).

    Examples
    --------
    >>> show("/no/such/folder")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument results_dir: is not a results folder (no such directory)
    """
    plotter = build_scene(results_dir, exaggeration=exaggeration, quantity=quantity,
                          interactive=True, off_screen=False)
    plotter.show()


def render_png(results_dir, path, *, camera="iso", window_size=(1200, 900),
               exaggeration: float | None = None, quantity: str = "dsz",
               depth: float | None = None, layers=LAYERS, slice_floor: float = 0.02) -> Path:
    """Render the scene off screen to a PNG file and return its path.

    Parameters
    ----------
    camera : str or list
        A pyvista camera position: "iso", "xy" (plan from above), "xz", "yz", or
        ``[(position), (focal point), (view up)]`` in scene coordinates.
    Other parameters are those of :func:`build_scene`.

    Examples
    --------
    >>> render_png("/no/such/folder", "x.png")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument results_dir: is not a results folder (no such directory)
    """
    plotter = build_scene(results_dir, exaggeration=exaggeration, quantity=quantity,
                          depth=depth, layers=layers, off_screen=True, window_size=window_size,
                          slice_floor=slice_floor)
    try:
        if camera == "iso":
            plotter.view_isometric()
        else:
            plotter.camera_position = camera
        plotter.reset_camera()
        return write_atomic(path, lambda tmp: plotter.screenshot(str(tmp)))
    finally:
        plotter.close()


@contextlib.contextmanager
def _offline_trame():
    """Keep the export offline and quiet. The standalone scene uses vtk.js only, but trame's
    WebAssembly view module, set up on first use, would try to download VTK's WebAssembly
    build unless pointed at a local folder (an empty one will do)."""
    import io
    import tempfile
    with tempfile.TemporaryDirectory() as empty:
        before = os.environ.get("VTK_WASM_DIR_OVERRIDE")
        os.environ["VTK_WASM_DIR_OVERRIDE"] = empty
        try:
            with contextlib.redirect_stdout(io.StringIO()):
                yield
        finally:
            if before is None:
                os.environ.pop("VTK_WASM_DIR_OVERRIDE", None)
            else:
                os.environ["VTK_WASM_DIR_OVERRIDE"] = before


def export_scene_html(results_dir, path=None, *, exaggeration: float | None = None,
                      quantity: str = "dsz") -> Path:
    """Write the scene (every slice shown) as one self-contained HTML file.

    The file embeds vtk.js and the meshes and loads nothing from the network.
    Default path: ``<results_dir>/scene.html``. Needs trame, trame-vtk,
    trame-pyvista and nest_asyncio2 (the ``scene`` extra).

    Examples
    --------
    >>> export_scene_html("/no/such/folder")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument results_dir: is not a results folder (no such directory)
    """
    plotter = build_scene(results_dir, exaggeration=exaggeration, quantity=quantity,
                          off_screen=True)
    path = Path(results_dir) / "scene.html" if path is None else Path(path)
    try:
        with _offline_trame():
            return write_atomic(path, lambda tmp: plotter.trame.export_html(str(tmp)))
    except ImportError as exc:  # the optional scene packages are missing
        raise InputError(f"needs the 'scene' extra (trame, trame-vtk, trame-pyvista, "
                         f"nest_asyncio2): {exc}", argument="path") from None
    finally:
        plotter.close()
