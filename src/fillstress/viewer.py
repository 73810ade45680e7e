"""3D scene of one results folder: fill, receptors and horizontal slices of Δσz.

The scene is built only from the documented results-folder files (see
docs/results-folder.md) through :class:`fillstress.report.folder.ResultsFolder`.
Scene axes: x east and y north relative to a local origin (the analysis grid's
south-west corner, so large projected coordinates keep full precision in VTK's
float32 rendering), z up; a point at depth d below the existing ground sits at
z = ground − d, and z is multiplied by the vertical exaggeration.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from ._validate import positive
from .errors import InputError
from .report.folder import QUANTITIES, PlanField, ResultsFolder

#: Perceptually uniform colour maps (matplotlib's viridis family), one per quantity.
COLOUR_MAPS = {"dsz": "viridis", "stress_ratio": "plasma", "settlement": "magma",
               "sigma_v0": "viridis", "fill_thickness": "cividis"}
LAYERS = ("fill", "slices", "points", "buildings", "pipes", "boreholes")
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
        """(N, 3) scene points for site x, y at `height` above the existing ground."""
        x, y, height = np.broadcast_arrays(*(np.asarray(a, float) for a in (x, y, height)))
        z = (self.ground(x, y) + height) * self.exaggeration
        return np.column_stack([x.ravel() - self.x0, y.ravel() - self.y0, z.ravel()])

    def surface(self, f: PlanField, height: np.ndarray):
        """A pyvista StructuredGrid over the centres of `f` at `height` above ground."""
        import pyvista as pv
        xx, yy = np.meshgrid(f.x, f.y)
        pts = self.points(xx, yy, height)
        return pv.StructuredGrid(*(pts[:, k].reshape(xx.shape) for k in range(3)))


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
        xs = folder.column(df, "x", "length", name=f"{kind}_points")
        ys = folder.column(df, "y", "length", name=f"{kind}_points")
        ds = folder.column(df, "depth", "length", name=f"{kind}_points")
        rows.append(df[[xs, ys, ds, col]].to_numpy(float))
    data = np.concatenate(rows) if rows else np.zeros((0, 4))
    return data[np.all(np.isfinite(data), axis=1)]


class _SceneBuilder:
    """Adds each layer of one results folder to a pyvista Plotter."""

    def __init__(self, folder: ResultsFolder, plotter, frame: _Frame, quantity: str,
                 fill_bar: bool = True):
        self.folder, self.plotter, self.frame, self.quantity = folder, plotter, frame, quantity
        self.fill_bar = fill_bar  # vtk.js draws one scalar bar only: the HTML scene drops this one
        self.slice_actors: list[tuple[float, object]] = []
        fill = folder.fill_thickness()
        self.fill = fill
        # Plan size of the site, to size the schematic parts (building height, borehole).
        span = (np.ptp(fill.x) + np.ptp(fill.y)) / 2 if fill is not None else 0.0
        self.span = span if span > 0 else 10.0
        self.slices = folder.plan_slices(quantity) if quantity in ("dsz", "stress_ratio",
                                                                   "settlement") else []
        self.point_data = _point_values(folder, quantity)
        if not self.slices and self.point_data.size == 0:
            raise InputError(f"the results folder has no {quantity!r} on slices or points",
                             argument="quantity")
        self.clim = _quantity_range(self.slices, self.point_data[:, 3])
        unit = folder.units.label(QUANTITIES[quantity])
        self.bar_title = f"{QUANTITY_TITLES[quantity]} ({unit})" if unit else QUANTITY_TITLES[quantity]

    def _mesh_kwargs(self):
        return dict(cmap=COLOUR_MAPS[self.quantity], clim=self.clim, scalar_bar_args={
            "title": self.bar_title, "vertical": True, "fmt": "%.3g", "n_labels": 5,
            "position_x": 0.84},
            lighting=False)  # unlit, so the colours read exactly against the scalar bar

    def add_fill(self):
        if self.fill is None:
            return
        t = np.where(np.isfinite(self.fill.values), self.fill.values, 0.0)
        surf = self.frame.surface(self.fill, t)
        label = f"fill thickness ({self.folder.units.length})"
        surf.point_data[label] = t.ravel(order="F")
        loaded = surf.threshold(1e-9, scalars=label, method="upper") if np.any(t > 0) else None
        if loaded is not None and loaded.n_points:
            self.plotter.add_mesh(loaded, scalars=label, cmap=COLOUR_MAPS["fill_thickness"],
                                  opacity=0.75, show_scalar_bar=self.fill_bar, scalar_bar_args={
                                      "title": label, "vertical": True, "position_x": 0.05,
                                      "fmt": "%.3g", "n_labels": 4})
        self.plotter.add_mesh(surf.outline(), color="dimgray", line_width=1)

    def add_slices(self, depth):
        shown = 0
        for f in self.slices:
            surf = self.frame.surface(f, np.full(f.values.shape, -f.depth))
            surf.point_data[self.bar_title] = f.values.ravel(order="F")
            actor = self.plotter.add_mesh(surf, scalars=self.bar_title, nan_opacity=0.0,
                                          show_scalar_bar=shown == 0, **self._mesh_kwargs())
            actor.SetVisibility(bool(depth is None or np.isclose(f.depth, depth)))
            self.slice_actors.append((f.depth, actor))
            shown += 1
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


def build_scene(results_dir, *, exaggeration: float = 1.0, quantity: str = "dsz",
                depth: float | None = None, layers=LAYERS, interactive: bool = False,
                off_screen: bool = True, window_size=(1200, 900), fill_bar: bool = True):
    """Build the 3D scene of a results folder as a pyvista Plotter.

    Parameters
    ----------
    results_dir : str or path-like
        A results folder (docs/results-folder.md).
    exaggeration : float
        Vertical exaggeration, > 0; scene z is multiplied by it.
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
    fill_bar : bool
        Draw the scalar bar of fill thickness besides the one of `quantity`.

    Returns
    -------
    pyvista.Plotter
        The plotter. Attributes ``fillstress_clim`` (colour range of `quantity`),
        ``fillstress_slice_depths`` and ``fillstress_slice_actors`` ((depth, actor) pairs).

    Examples
    --------
    >>> build_scene("/no/such/folder")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument results_dir: is not a results folder (no such directory)
    """
    folder = ResultsFolder(results_dir)
    exaggeration = positive(exaggeration, "exaggeration")
    if quantity not in QUANTITIES:
        raise InputError(f"unknown quantity {quantity!r}; choose one of {', '.join(QUANTITIES)}",
                         argument="quantity")
    layers = _validated_layers(layers)
    plotter = _new_plotter(off_screen, window_size)
    builder = _SceneBuilder(folder, plotter, _Frame(folder, exaggeration), quantity, fill_bar)
    for name in layers:
        if name == "slices":
            builder.add_slices(depth)
        else:
            getattr(builder, f"add_{name}")()
    import pyvista as pv
    pv.set_new_attribute(plotter, "fillstress_clim", builder.clim)
    pv.set_new_attribute(plotter, "fillstress_slice_depths", builder.slice_depths())
    pv.set_new_attribute(plotter, "fillstress_slice_actors", list(builder.slice_actors))
    plotter.add_text(_caption(folder, builder, exaggeration), position="upper_left",
                     font_size=9, color="black")
    plotter.view_isometric()
    if interactive:
        _add_sliders(plotter, builder, exaggeration)
    return plotter


def _caption(folder: ResultsFolder, builder: _SceneBuilder, exaggeration: float) -> str:
    u = folder.units.length
    return (f"origin E {builder.frame.x0:.2f} {u}, N {builder.frame.y0:.2f} {u}; "
            f"vertical exaggeration {exaggeration:g}")


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
    plotter.add_slider_widget(stretch, [1.0, 10.0], value=exaggeration, title="exaggeration",
                              pointa=(0.55, 0.92), pointb=(0.9, 0.92), fmt="%.1f", color="black")


def show(results_dir, *, exaggeration: float = 1.0, quantity: str = "dsz") -> None:
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
               exaggeration: float = 1.0, quantity: str = "dsz", depth: float | None = None,
               layers=LAYERS) -> Path:
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
                          depth=depth, layers=layers, off_screen=True, window_size=window_size)
    try:
        if camera == "iso":
            plotter.view_isometric()
        else:
            plotter.camera_position = camera
        plotter.reset_camera()
        path = Path(path)
        tmp = path.with_name(f".{path.name}.partial.png")
        plotter.screenshot(str(tmp))
        tmp.replace(path)
    finally:
        plotter.close()
    return path


def export_scene_html(results_dir, path=None, *, exaggeration: float = 1.0,
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
                          off_screen=True, fill_bar=False)
    path = Path(results_dir) / "scene.html" if path is None else Path(path)
    tmp = path.with_name(f".{path.name}.partial.html")
    try:
        plotter.trame.export_html(str(tmp))
    except ImportError as exc:  # the optional scene packages are missing
        raise InputError(f"needs the 'scene' extra (trame, trame-vtk, trame-pyvista, "
                         f"nest_asyncio2): {exc}", argument="path") from None
    finally:
        plotter.close()
    tmp.replace(path)
    return path
