"""The browser scene: one self-contained HTML page drawn with the browser's own WebGL.

The parts of :func:`fillstress.viewer.scene_parts` (the same the desktop window draws)
are embedded as base64 typed arrays beside a small inline script: no library, no font,
no icon is fetched, so the page works offline and from an e-mail attachment. Slices and
fill are sent as lattices (z and a colour index per node; the plan positions of a
lattice are separable, x by column and y by row), other surfaces as triangles, so the
sample sites stay well under 5 MB. Heights are sent unexaggerated; the page multiplies
them by its exaggeration control.
"""
from __future__ import annotations

import base64
import html
import json
from pathlib import Path

import numpy as np

from .io.atomic import write_atomic
from .io.results import ResultsFolder
from .cautions import CORE_CAUTION
from .viewer import CAUTION, LAYERS, _fmt, colour_table, scene_parts
from .viewer import _writable as writable

# matplotlib is imported inside the functions that use it: it is slow to load.

#: Colour-map entries; index 255 of a lattice node marks "no value" (hidden).
N_COLOURS = 255
HOLE = 255
#: Nodes of one lattice drawn in the browser at most; a larger slice or fill is drawn at
#: every k-th node (k as small as fits), which keeps a large site's page a few MB.
MAX_LATTICE_NODES = 250_000


def _b64(array: np.ndarray) -> str:
    return base64.b64encode(np.ascontiguousarray(array).tobytes()).decode("ascii")


def _rgb(name: str) -> list[int]:
    from matplotlib.colors import to_rgb
    return [round(255 * c) for c in to_rgb(name)]


def colour_index(values, clim) -> np.ndarray:
    """Colour-table index (0 to 254) of each value over `clim`; NaN → :data:`HOLE`.

    >>> colour_index(np.array([0.0, 5.0, 10.0, 20.0, np.nan]), (0.0, 10.0)).tolist()
    [0, 127, 254, 254, 255]
    """
    lo, hi = clim
    v = np.asarray(values, float)
    t = np.clip((np.nan_to_num(v, nan=lo) - lo) / (hi - lo), 0.0, 1.0)
    index = np.floor(t * (N_COLOURS - 1) + 0.5).astype(np.uint8)
    index[~np.isfinite(v)] = HOLE
    return index


def _unexaggerated(points: np.ndarray, exaggeration: float) -> np.ndarray:
    p = np.asarray(points, np.float64).copy()
    p[:, 2] /= exaggeration
    return p.astype(np.float32)


def lattice_step(nodes: int) -> int:
    """Node step that brings a lattice of `nodes` within :data:`MAX_LATTICE_NODES`.

    >>> lattice_step(35_000), lattice_step(2_000_000)
    (1, 3)
    """
    return max(1, int(np.ceil(np.sqrt(nodes / MAX_LATTICE_NODES))))


def _lattice(part, scene) -> dict | None:
    """A StructuredGrid as separable plan axes, node heights and colour indices."""
    mesh = part.mesh
    n0, n1, _ = mesh.dimensions
    step = lattice_step(n0 * n1)
    pts, values = np.asarray(mesh.points), np.asarray(part.values)
    if step > 1:                      # thinned before the copy below, not after
        keep = np.arange(n0 * n1).reshape(n1, n0)[::step, ::step]
        n1, n0 = keep.shape
        pts, values = pts[keep.ravel()], values[keep.ravel()]
    pts = _unexaggerated(pts, scene.exaggeration)
    first, second = pts[:n0, :2], pts[::n0, :2][:n1]
    rebuilt = (first[:, None, :] + second[None, :, :] - first[0]).transpose(1, 0, 2).reshape(-1, 2)
    if not np.allclose(rebuilt, pts[:, :2], atol=1e-3 * max(scene.span, 1.0)):
        return None                   # not separable: the caller sends triangles
    if part.layer == "fill":
        index = np.where(np.isfinite(values), 0, HOLE).astype(np.uint8)
    else:
        index = colour_index(values, scene.clim)
    return {"n0": int(n0), "n1": int(n1), "a": _b64(first.astype(np.float32)),
            "b": _b64(second.astype(np.float32)), "z": _b64(pts[:, 2]), "c": _b64(index)}


def _triangles(mesh, scene) -> dict:
    surf = mesh.extract_surface(algorithm="dataset_surface").triangulate()
    faces = np.asarray(surf.faces).reshape(-1, 4)[:, 1:].astype(np.uint32)
    return {"p": _b64(_unexaggerated(surf.points, scene.exaggeration)), "t": _b64(faces)}


def _segments(mesh, scene) -> dict:
    lines = np.asarray(mesh.lines)
    pairs, k = [], 0
    while k < len(lines):
        n = int(lines[k])
        ids = lines[k + 1:k + 1 + n]
        pairs.extend(zip(ids[:-1], ids[1:]))
        k += n + 1
    return {"p": _b64(_unexaggerated(mesh.points, scene.exaggeration)),
            "t": _b64(np.asarray(pairs, np.uint32).reshape(-1, 2))}


def _part_json(part, scene) -> dict:
    out = {"layer": part.layer, "kind": part.kind, "group": part.group, "depth": part.depth,
           "colour": _rgb(part.color), "opacity": part.opacity}
    if part.kind == "grid":
        lattice = _lattice(part, scene)
        if lattice is None:
            raise ValueError("a slice or fill lattice is not separable in plan")
        out.update(lattice)
    elif part.kind == "mesh":
        out.update(_triangles(part.mesh, scene))
    elif part.kind == "lines":
        out.update(_segments(part.mesh, scene))
    else:
        out["p"] = _b64(_unexaggerated(part.mesh.points, scene.exaggeration))
        out["texts"] = list(part.texts)
        if part.kind == "points":
            out["c"] = _b64(colour_index(part.values, scene.clim))
    return out


def _legend(scene) -> dict:
    lo, hi = scene.clim
    ticks = np.linspace(lo, hi, 5)
    note = ""
    if scene.robust and scene.data_max > hi:
        note = f"top colour: {_fmt(hi)} and above (max {_fmt(scene.data_max)})"
    return {"title": scene.bar_title, "ticks": [[float(t), _fmt(float(t))] for t in ticks],
            "lo": lo, "hi": hi, "note": note,
            "table": _b64(colour_table(scene.quantity, N_COLOURS))}


def scene_data(scene) -> dict:
    """The JSON-ready description of `scene` that the page draws."""
    x0, x1, y0, y1, z0, z1 = _bounds(scene)
    return {"parts": [_part_json(p, scene) for p in scene.parts],
            "legend": _legend(scene), "exaggeration": scene.exaggeration,
            "surface": scene.quantity == "settlement",
            "depths": scene.slice_depths, "length": scene.folder.units.length,
            "bounds": [x0, x1, y0, y1, z0, z1]}


def _bounds(scene):
    """(x0, x1, y0, y1, z0, z1) of every part's points, z unexaggerated: the least and
    greatest of each part's own, not of one copy of all the points (hundreds of MB on
    a corridor's full-resolution slices)."""
    pts = [np.asarray(p.mesh.points) for p in scene.parts]
    lo = np.min([_per_axis(np.min, p) for p in pts if len(p)], axis=0)
    hi = np.max([_per_axis(np.max, p) for p in pts if len(p)], axis=0)
    return (float(lo[0]), float(hi[0]), float(lo[1]), float(hi[1]),
            float(lo[2] / scene.exaggeration), float(hi[2] / scene.exaggeration))


def _per_axis(reduce, points: np.ndarray) -> list[float]:
    """`reduce` (np.min, np.max) of each column of (N, 3) `points`, one column at a time:
    the same numbers as ``reduce(points, axis=0)``, which is many times slower on a
    C-ordered (N, 3) array.

    >>> _per_axis(np.max, np.array([[0.0, 5.0, -1.0], [2.0, 1.0, -3.0]]))
    [2.0, 5.0, -1.0]
    """
    return [float(reduce(points[:, k])) for k in range(points.shape[1])]


def _script_json(data) -> str:
    """JSON safe inside a <script> element (no "</script>" from input text)."""
    return json.dumps(data, separators=(",", ":")).replace("<", "\\u003c").replace(
        "\u2028", "\\u2028").replace("\u2029", "\\u2029")


def _text(value) -> str:
    """A manifest note as one line: a string, or a list of strings joined."""
    if isinstance(value, (list, tuple)):
        return " ".join(str(v) for v in value)
    return str(value or "")


def page_html(scene) -> str:
    """The whole page for `scene` (a :class:`fillstress.viewer.Scene`)."""
    esc = html.escape
    notes = [_text(scene.folder.manifest.get(k)) for k in ("cautions", "assumptions")]
    # the bold caution leads; the folder's own cautions follow without saying it twice
    notes[0] = notes[0].replace(CORE_CAUTION, "").strip()
    heading = f"{scene.site_name} — {scene.quantity_heading}"
    fields = {
        "TITLE": esc(f"{scene.site_name} — 3D scene — {scene.date}"),
        "HEADING": esc(heading),
        "SUBTITLE": esc(f"{scene.stage_text}; results of {scene.date}; "
                        f"fillstress {scene.folder.manifest.get('version', '')}".strip()),
        "CAPTION": esc(scene.caption()).replace("\n", "<br>"),
        "CAUTION": esc(CAUTION),
        "NOTES": esc(" ".join(t for t in notes if t)),
        "DATA": _script_json(scene_data(scene)),
    }
    page = PAGE
    for key, value in fields.items():
        page = page.replace(f"@@{key}@@", value)
    return page


PAGE = r"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta http-equiv="Content-Security-Policy" content="default-src 'none'; script-src 'unsafe-inline'; style-src 'unsafe-inline'; img-src data:">
<title>@@TITLE@@</title>
<style>
  html, body { margin: 0; height: 100%; font: 14px/1.35 "DejaVu Sans", "Segoe UI", Arial, sans-serif; color: #111; }
  body { display: flex; flex-direction: column; }
  header { padding: 6px 12px; border-bottom: 1px solid #ccc; }
  header h1 { font-size: 18px; margin: 0; }
  header p { margin: 2px 0 0; color: #444; }
  main { flex: 1; display: flex; min-height: 0; }
  #view { flex: 1; position: relative; min-width: 0; background: #fff; }
  #view canvas { position: absolute; left: 0; top: 0; width: 100%; height: 100%; }
  #panel { width: 270px; padding: 8px 12px; border-left: 1px solid #ccc; overflow-y: auto; }
  #panel h2 { font-size: 14px; margin: 10px 0 4px; }
  #panel label { display: block; }
  #depth { width: 100%; }
  #depthText { font-weight: bold; }
  #tip { position: fixed; z-index: 5; display: none; max-width: 320px; padding: 4px 6px; background: #fffbe6;
         border: 1px solid #886; font-size: 12px; pointer-events: none; }
  #nogl { position: absolute; top: 40%; width: 100%; text-align: center; display: none; }
  footer { padding: 4px 12px; border-top: 1px solid #ccc; font-size: 12px; }
  footer b { color: #7a1f00; }
  .small { font-size: 12px; color: #333; }
</style>
</head>
<body>
<header><h1 id="heading">@@HEADING@@</h1><p>@@SUBTITLE@@</p></header>
<main>
  <div id="view"><canvas id="gl"></canvas><canvas id="overlay"></canvas>
    <div id="nogl">This page needs WebGL, which this browser has turned off.</div></div>
  <div id="panel">
    <h2>Slice depth</h2>
    <input type="range" id="depth" min="0" max="0" step="1" value="0" aria-label="slice depth">
    <div>shown: <span id="depthText"></span></div>
    <h2>Show</h2>
    <div id="toggles"></div>
    <h2>Vertical exaggeration</h2>
    <input type="range" id="exaggeration" min="1" max="20" step="0.5" aria-label="vertical exaggeration">
    <div>× <span id="exaggerationText"></span></div>
    <h2 id="legendTitle"></h2>
    <canvas id="legend" width="240" height="70"></canvas>
    <div class="small" id="legendNote"></div>
    <h2>Reading the view</h2>
    <div class="small">@@CAPTION@@</div>
    <div class="small">Drag to rotate, shift-drag or right-drag to pan, wheel to zoom.
      Point at a sample point (or click it) for its values.</div>
  </div>
</main>
<div id="tip"></div>
<footer><b>@@CAUTION@@</b> <span class="small">@@NOTES@@</span></footer>
<script>
"use strict";
const DATA = @@DATA@@;
(function () {
  const view = document.getElementById("view");
  const glCanvas = document.getElementById("gl"), overlay = document.getElementById("overlay");
  const ctx2d = overlay.getContext("2d"), tip = document.getElementById("tip");
  const KIND_WORDS = {fill: "fill", slices: "slices", buildings: "buildings", pipes: "pipes",
                      boreholes: "boreholes"};
  function bytes(b64) { const s = atob(b64), a = new Uint8Array(s.length);
    for (let i = 0; i < s.length; i++) a[i] = s.charCodeAt(i); return a; }
  const f32 = b => new Float32Array(bytes(b).buffer), u32 = b => new Uint32Array(bytes(b).buffer);
  const table = bytes(DATA.legend.table);
  const state = {depth: 0, exaggeration: DATA.exaggeration, shown: {}, az: -0.6, el: 0.6,
                 zoom: 1, pan: [0, 0], pinned: null};

  // --- controls ---------------------------------------------------------------------
  const kinds = ["fill", "slices"];
  for (const p of DATA.parts) {
    const k = p.kind === "points" ? p.group : p.layer;
    if (k !== "frame" && !kinds.includes(k)) kinds.push(k);
  }
  const toggles = document.getElementById("toggles");
  for (const k of kinds) {
    if (!DATA.parts.some(p => p.layer === k || p.group === k)) continue;
    state.shown[k] = true;
    const label = document.createElement("label"), box = document.createElement("input");
    box.type = "checkbox"; box.checked = true; box.id = "show-" + k; box.dataset.layer = k;
    box.addEventListener("change", () => { state.shown[k] = box.checked; draw(); });
    label.appendChild(box); label.appendChild(document.createTextNode(" " + (KIND_WORDS[k] || k)));
    toggles.appendChild(label);
  }
  const depthInput = document.getElementById("depth"), depthText = document.getElementById("depthText");
  depthInput.max = Math.max(DATA.depths.length - 1, 0);
  depthInput.disabled = DATA.depths.length < 2;
  function showDepth() {
    depthText.textContent = !DATA.depths.length ? "no slices" : DATA.surface ?
      "ground surface" : DATA.depths[state.depth] + " " + DATA.length + " below existing ground";
  }
  depthInput.addEventListener("input", () => { state.depth = +depthInput.value; showDepth(); draw(); });
  const exInput = document.getElementById("exaggeration"), exText = document.getElementById("exaggerationText");
  exInput.max = Math.max(20, 2 * DATA.exaggeration); exInput.value = DATA.exaggeration;
  exText.textContent = DATA.exaggeration;
  exInput.addEventListener("input", () => { state.exaggeration = +exInput.value;
    exText.textContent = exInput.value; draw(); });
  showDepth();

  // --- legend -----------------------------------------------------------------------
  (function legend() {
    const L = DATA.legend, c = document.getElementById("legend"), g = c.getContext("2d");
    document.getElementById("legendTitle").textContent = L.title;
    document.getElementById("legendNote").textContent = L.note;
    const x0 = 10, w = c.width - 20;
    for (let i = 0; i < w; i++) {
      const k = Math.min(254, Math.floor(i / w * 255));
      g.fillStyle = "rgb(" + table[3 * k] + "," + table[3 * k + 1] + "," + table[3 * k + 2] + ")";
      g.fillRect(x0 + i, 4, 1, 26);
    }
    g.strokeRect(x0, 4, w, 26);
    g.fillStyle = "#000"; g.font = "12px sans-serif"; g.textAlign = "center";
    for (const [v, text] of L.ticks) {
      const x = x0 + (v - L.lo) / (L.hi - L.lo) * w;
      g.fillRect(x, 30, 1, 5); g.fillText(text, Math.min(Math.max(x, 14), c.width - 14), 50);
    }
  })();

  // --- WebGL ------------------------------------------------------------------------
  const gl = glCanvas.getContext("webgl", {preserveDrawingBuffer: true, antialias: true, alpha: false});
  if (!gl) { document.getElementById("nogl").style.display = "block"; return; }
  const derivatives = gl.getExtension("OES_standard_derivatives");
  gl.getExtension("OES_element_index_uint");
  const VS = "attribute vec3 pos; attribute vec3 col; uniform mat4 mvp; uniform float ex;" +
    "uniform float psize; varying vec3 vcol; varying vec3 vpos;" +
    "void main() { vec3 p = vec3(pos.xy, pos.z * ex); vpos = p; vcol = col;" +
    " gl_Position = mvp * vec4(p, 1.0); gl_PointSize = psize; }";
  const FS = (derivatives ? "#extension GL_OES_standard_derivatives : enable\n" : "") +
    "precision mediump float; varying vec3 vcol; varying vec3 vpos; uniform float alpha;" +
    "uniform float lit; uniform float round_; uniform vec3 light;" +
    "void main() { vec3 c = vcol;" +
    " if (round_ > 0.5) { vec2 d = gl_PointCoord - 0.5; if (dot(d, d) > 0.25) discard;" +
    "   if (dot(d, d) > 0.16) c = vec3(0.1); }" +
    (derivatives ? " if (lit > 0.5) { vec3 n = normalize(cross(dFdx(vpos), dFdy(vpos)));" +
                   "  c *= 0.45 + 0.55 * abs(dot(n, light)); }" : "") +
    " gl_FragColor = vec4(c, alpha); }";
  function shader(type, src) { const s = gl.createShader(type); gl.shaderSource(s, src);
    gl.compileShader(s); if (!gl.getShaderParameter(s, gl.COMPILE_STATUS)) throw gl.getShaderInfoLog(s); return s; }
  const prog = gl.createProgram();
  gl.attachShader(prog, shader(gl.VERTEX_SHADER, VS)); gl.attachShader(prog, shader(gl.FRAGMENT_SHADER, FS));
  gl.linkProgram(prog); gl.useProgram(prog);
  const loc = n => gl.getUniformLocation(prog, n);
  const aPos = gl.getAttribLocation(prog, "pos"), aCol = gl.getAttribLocation(prog, "col");
  function buffer(data, target) { const b = gl.createBuffer(); gl.bindBuffer(target || gl.ARRAY_BUFFER, b);
    gl.bufferData(target || gl.ARRAY_BUFFER, data, gl.STATIC_DRAW); return b; }

  function lattice(p) {
    const a = f32(p.a), b = f32(p.b), z = f32(p.z), c = bytes(p.c), n0 = p.n0, n1 = p.n1;
    const pos = new Float32Array(3 * n0 * n1), col = new Uint8Array(3 * n0 * n1), idx = [];
    for (let j = 0; j < n1; j++) for (let i = 0; i < n0; i++) {
      const k = i + n0 * j;
      pos[3 * k] = a[2 * i] + b[2 * j] - a[0]; pos[3 * k + 1] = a[2 * i + 1] + b[2 * j + 1] - a[1];
      pos[3 * k + 2] = z[k];
      const t = p.layer === "fill" ? null : c[k] === 255 ? 0 : c[k];
      for (let m = 0; m < 3; m++) col[3 * k + m] = t === null ? p.colour[m] : table[3 * t + m];
    }
    for (let j = 0; j + 1 < n1; j++) for (let i = 0; i + 1 < n0; i++) {
      const k = i + n0 * j, q = [k, k + 1, k + 1 + n0, k + n0];
      if (q.some(v => c[v] === 255)) continue;
      idx.push(q[0], q[1], q[2], q[0], q[2], q[3]);
    }
    return {pos, col, idx: new Uint32Array(idx), mode: gl.TRIANGLES};
  }
  function plain(p, mode) {
    const pos = f32(p.p), n = pos.length / 3, col = new Uint8Array(3 * n);
    if (p.kind === "points") { const c = bytes(p.c);
      for (let k = 0; k < n; k++) for (let m = 0; m < 3; m++) col[3 * k + m] = table[3 * Math.min(c[k], 254) + m];
    } else for (let k = 0; k < n; k++) col.set(p.colour, 3 * k);
    return {pos, col, idx: p.t ? u32(p.t) : null, mode};
  }
  const drawables = [];
  for (const p of DATA.parts) {
    if (p.kind === "labels") { p.pos = f32(p.p); continue; }
    const g = p.kind === "grid" ? lattice(p) : plain(p, {mesh: gl.TRIANGLES, lines: gl.LINES,
                                                         points: gl.POINTS}[p.kind]);
    if (p.kind === "points") p.pos = g.pos;
    drawables.push({part: p, pos: buffer(g.pos), col: buffer(g.col), mode: g.mode,
      count: g.idx ? g.idx.length : g.pos.length / 3,
      idx: g.idx ? buffer(g.idx, gl.ELEMENT_ARRAY_BUFFER) : null,
      translucent: p.opacity < 1, lit: p.kind === "mesh" || p.layer === "fill"});
  }

  function visible(p) {
    if (p.layer === "frame") return true;
    if (p.layer === "slices") return state.shown.slices && DATA.depths.length > 0 &&
                                      p.depth === DATA.depths[state.depth];
    if (p.kind === "points") return state.shown[p.group] !== false;
    return state.shown[p.layer] !== false;
  }

  // --- camera: orthographic, turning about the middle of the scene ----------------------
  const B = DATA.bounds;
  function camera() {
    const w = glCanvas.clientWidth || 1, h = glCanvas.clientHeight || 1;
    const ex = state.exaggeration;
    const c = [(B[0] + B[1]) / 2, (B[2] + B[3]) / 2, (B[4] + B[5]) / 2 * ex];
    const R = 0.5 * Math.hypot(B[1] - B[0], B[3] - B[2], (B[5] - B[4]) * ex) || 1;
    const ce = Math.cos(state.el), d = [ce * Math.sin(state.az), -ce * Math.cos(state.az), Math.sin(state.el)];
    let r = [Math.cos(state.az), Math.sin(state.az), 0];
    const u = [d[1] * r[2] - d[2] * r[1], d[2] * r[0] - d[0] * r[2], d[0] * r[1] - d[1] * r[0]];
    const s = state.zoom / R * 0.95, sx = s * Math.min(1, h / w), sy = s * Math.min(1, w / h);
    const row = (v, k) => [v[0] * k, v[1] * k, v[2] * k];
    const X = row(r, sx), Y = row(u, sy), Z = row(d, -1 / (2 * R));
    const dot = (a, b) => a[0] * b[0] + a[1] * b[1] + a[2] * b[2];
    // column-major 4x4: clip = M * (p, 1)
    const m = new Float32Array([X[0], Y[0], Z[0], 0, X[1], Y[1], Z[1], 0, X[2], Y[2], Z[2], 0,
      -dot(X, c) + state.pan[0], -dot(Y, c) + state.pan[1], -dot(Z, c), 1]);
    return {m, light: d, w, h};
  }
  function project(cam, x, y, z) {
    const m = cam.m, p = [x, y, z * state.exaggeration];
    const cx = m[0] * p[0] + m[4] * p[1] + m[8] * p[2] + m[12];
    const cy = m[1] * p[0] + m[5] * p[1] + m[9] * p[2] + m[13];
    return [(cx + 1) / 2 * cam.w, (1 - cy) / 2 * cam.h];
  }

  function render() {
    const dpr = window.devicePixelRatio || 1, w = view.clientWidth, h = view.clientHeight;
    for (const c of [glCanvas, overlay]) { if (c.width !== Math.round(w * dpr)) c.width = Math.round(w * dpr);
      if (c.height !== Math.round(h * dpr)) c.height = Math.round(h * dpr); }
    gl.viewport(0, 0, glCanvas.width, glCanvas.height);
    gl.depthMask(true); gl.clearColor(1, 1, 1, 1); gl.clear(gl.COLOR_BUFFER_BIT | gl.DEPTH_BUFFER_BIT);
    gl.enable(gl.DEPTH_TEST);
    const cam = camera();
    gl.uniformMatrix4fv(loc("mvp"), false, cam.m); gl.uniform1f(loc("ex"), state.exaggeration);
    gl.uniform3fv(loc("light"), cam.light); gl.uniform1f(loc("psize"), 9 * dpr);
    for (const pass of [false, true]) {
      gl.depthMask(!pass);
      if (pass) { gl.enable(gl.BLEND); gl.blendFunc(gl.SRC_ALPHA, gl.ONE_MINUS_SRC_ALPHA); }
      else gl.disable(gl.BLEND);
      for (const d of drawables) {
        if (d.translucent !== pass || !visible(d.part)) continue;
        gl.uniform1f(loc("alpha"), d.part.opacity); gl.uniform1f(loc("lit"), d.lit ? 1 : 0);
        gl.uniform1f(loc("round_"), d.mode === gl.POINTS ? 1 : 0);
        gl.bindBuffer(gl.ARRAY_BUFFER, d.pos); gl.enableVertexAttribArray(aPos);
        gl.vertexAttribPointer(aPos, 3, gl.FLOAT, false, 0, 0);
        gl.bindBuffer(gl.ARRAY_BUFFER, d.col); gl.enableVertexAttribArray(aCol);
        gl.vertexAttribPointer(aCol, 3, gl.UNSIGNED_BYTE, true, 0, 0);
        if (d.idx) { gl.bindBuffer(gl.ELEMENT_ARRAY_BUFFER, d.idx); gl.drawElements(d.mode, d.count, gl.UNSIGNED_INT, 0); }
        else gl.drawArrays(d.mode, 0, d.count);
      }
    }
    ctx2d.setTransform(dpr, 0, 0, dpr, 0, 0); ctx2d.clearRect(0, 0, w, h);
    ctx2d.font = "12px sans-serif"; ctx2d.textAlign = "center"; ctx2d.textBaseline = "middle";
    for (const p of DATA.parts) {
      if (p.kind !== "labels" || !visible(p)) continue;
      for (let k = 0; k < p.texts.length; k++) {
        const [x, y] = project(cam, p.pos[3 * k], p.pos[3 * k + 1], p.pos[3 * k + 2]);
        ctx2d.fillStyle = "rgba(255,255,255,0.7)";
        const tw = ctx2d.measureText(p.texts[k]).width;
        ctx2d.fillRect(x - tw / 2 - 2, y - 8, tw + 4, 16);
        ctx2d.fillStyle = "#000"; ctx2d.fillText(p.texts[k], x, y);
      }
    }
    state.cam = cam;
  }
  let queued = false;
  function draw() { if (!queued) { queued = true; requestAnimationFrame(() => { queued = false; render(); }); } }
  window.addEventListener("resize", draw);

  // --- mouse: rotate, pan, zoom; hover or click a sample point for its values ---------
  let drag = null;
  glCanvas.style.cursor = "grab";
  overlay.addEventListener("contextmenu", e => e.preventDefault());
  overlay.addEventListener("mousedown", e => { drag = {x: e.clientX, y: e.clientY, pan: e.shiftKey || e.button === 2}; });
  window.addEventListener("mouseup", () => { drag = null; });
  window.addEventListener("mousemove", e => {
    if (drag) {
      const dx = e.clientX - drag.x, dy = e.clientY - drag.y; drag.x = e.clientX; drag.y = e.clientY;
      if (drag.pan) { state.pan[0] += 2 * dx / view.clientWidth; state.pan[1] -= 2 * dy / view.clientHeight; }
      else { state.az -= dx * 0.01; state.el = Math.max(-1.5, Math.min(1.5, state.el + dy * 0.01)); }
      draw(); return;
    }
    hover(e);
  });
  overlay.addEventListener("wheel", e => { e.preventDefault(); state.zoom *= Math.exp(-e.deltaY * 0.001); draw(); },
                           {passive: false});
  function nearest(e) {
    if (!state.cam) return null;
    const r = overlay.getBoundingClientRect(), mx = e.clientX - r.left, my = e.clientY - r.top;
    let best = null, bestD = 64;
    for (const p of DATA.parts) {
      if (p.kind !== "points" || !visible(p)) continue;
      for (let k = 0; k < p.texts.length; k++) {
        const [x, y] = project(state.cam, p.pos[3 * k], p.pos[3 * k + 1], p.pos[3 * k + 2]);
        const dd = (x - mx) * (x - mx) + (y - my) * (y - my);
        if (dd < bestD) { bestD = dd; best = {text: p.texts[k], x: e.clientX, y: e.clientY}; }
      }
    }
    return best;
  }
  function showTip(hit) {
    if (!hit) { tip.style.display = "none"; return; }
    tip.textContent = hit.text; tip.style.display = "block";
    tip.style.left = Math.min(hit.x + 14, window.innerWidth - 330) + "px"; tip.style.top = (hit.y + 14) + "px";
  }
  function hover(e) { if (!state.pinned && e.target === overlay) showTip(nearest(e)); }
  overlay.addEventListener("click", e => { state.pinned = nearest(e); showTip(state.pinned); });

  // For tests and scripts: the same actions as the controls.
  window.fillstressScene = {
    depths: DATA.depths, kinds: Object.keys(state.shown),
    setDepth(k) { depthInput.value = k; depthInput.dispatchEvent(new Event("input")); render(); },
    show(kind, on) { const b = document.getElementById("show-" + kind); b.checked = on;
      b.dispatchEvent(new Event("change")); render(); },
    render, pointAt(k) { const p = DATA.parts.find(q => q.kind === "points" && visible(q));
      return p ? project(state.cam, p.pos[3 * k], p.pos[3 * k + 1], p.pos[3 * k + 2]) : null; },
  };
  render();
  document.body.dataset.ready = "yes";
})();
</script>
</body>
</html>
"""


def export_scene_html(results_dir, path=None, *, exaggeration: float | None = None,
                      quantity: str = "dsz", layers=LAYERS, colour_range=None) -> Path:
    """Write the scene as one self-contained HTML page .

    The page draws with the browser's WebGL, its script and data inline: it loads
    nothing from the network. It has a depth control showing one slice at a time,
    toggles for the fill, the slices and each receptor kind, a legend with units, a north
    arrow, a scale, the site's name and date and the cautions; hovering a sample point
    shows its values. Default path: ``<results_dir>/scene.html``.

    Examples
    --------
    >>> export_scene_html("/no/such/folder")
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument results_dir: is not a results folder (no such directory)
    """
    folder = ResultsFolder.of(results_dir)
    path = writable(folder.path / "scene.html" if path is None else path)
    html = page_html(scene_parts(folder, exaggeration=exaggeration, quantity=quantity,
                                 layers=layers, colour_range=colour_range))
    return write_atomic(path, lambda tmp: Path(tmp).write_text(html, encoding="utf-8"))
