"""``manifest.json``: what produced a results folder, from what, and checksums of every file.

The manifest is written last, inside the folder being assembled, so its ``outputs``
table lists every other file with its SHA-256; anyone can later check that a results
folder is complete and unaltered, and which inputs (by SHA-256) it came from.
"""
from __future__ import annotations

import datetime as _dt
import hashlib
import json
import math
import os
from pathlib import Path
from typing import Iterable, Mapping

import numpy as np

from .._version import __version__
from ..crs import as_crs
from ..errors import InputError
from ..grid import GridSpec
from ..units import SI, UnitSystem
from .atomic import ResultsWriter, write_atomic
from .tables import crs_unit_label, plan_unit

MANIFEST_NAME = "manifest.json"


def sha256_file(path, chunk_size: int = 1 << 20) -> str:
    """Hex SHA-256 of a file's bytes, read in chunks.

    Examples
    --------
    >>> import tempfile, os
    >>> f = os.path.join(tempfile.mkdtemp(), "abc.txt")
    >>> _ = open(f, "wb").write(b"abc")
    >>> sha256_file(f)[:16]  # FIPS 180-2, appendix B.1 test vector for "abc"
    'ba7816bf8f01cfea'
    """
    path = Path(os.fspath(path))
    if not path.is_file():
        raise InputError("file not found, cannot checksum it", file=path)
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(chunk_size), b""):
            digest.update(block)
    return digest.hexdigest()


def _jsonable(value, key: str):
    """Plain JSON types for settings; anything else is refused with the key named."""
    if isinstance(value, Mapping):
        return {str(k): _jsonable(v, f"{key}.{k}" if key else str(k)) for k, v in value.items()}
    if isinstance(value, np.ndarray):
        value = value.tolist()
    if isinstance(value, (list, tuple)):
        return [_jsonable(v, f"{key}[{i}]") for i, v in enumerate(value)]
    if isinstance(value, (bool, np.bool_)) or value is None:
        return None if value is None else bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        if not math.isfinite(value):
            raise InputError(f"setting is {value!r}; JSON holds finite numbers only",
                             argument="settings", key=key)
        return float(value)
    if isinstance(value, (str, os.PathLike)):
        return os.fspath(value)
    raise InputError(f"setting of type {type(value).__name__} cannot be written to JSON",
                     argument="settings", key=key)


def _text(value, name: str):
    """A paragraph (str) or a list of statements (list of str), kept as given."""
    if isinstance(value, str):
        return value
    if isinstance(value, (list, tuple)) and all(isinstance(v, str) for v in value):
        return list(value)
    raise InputError("must be text or a list of texts", argument=name)


def _crs_wkt(crs):
    if crs is None:
        return None
    return as_crs(crs, "crs").to_wkt()


def _plan_label(crs, units: UnitSystem) -> str:
    """The exact unit of plan coordinates (``ftUS`` even where columns say ``ft``)."""
    return units.length if crs is None else crs_unit_label(crs)


def _grid_entry(grid, units: UnitSystem, crs):
    """The lattice in the CRS's plan unit, like the GeoTIFF transforms."""
    if grid is None:
        return None
    if not isinstance(grid, GridSpec):
        raise InputError(f"must be a GridSpec, got {type(grid).__name__}", argument="grid")
    factor = plan_unit(crs, units)[1]
    label = _plan_label(crs, units)
    return {"x0": grid.x0 / factor, "y0": grid.y0 / factor, "dx": grid.dx / factor,
            "dy": grid.dy / factor, "nx": int(grid.nx), "ny": int(grid.ny), "unit": label}


def output_checksums(folder, *, exclude=(MANIFEST_NAME,), known: dict | None = None
                     ) -> dict[str, str]:
    """Relative POSIX path → SHA-256 of every file under `folder` (hidden temporaries and
    `exclude` left out), sorted by path.

    `known` (a dict kept between calls) remembers each digest with the file's inode, size
    and modification time: a file still the same is not read again. Files of a results
    folder are only ever replaced by renaming a new file into place (a new inode).
    """
    root = Path(os.fspath(folder))
    files = sorted(p for p in root.rglob("*") if p.is_file())
    out = {}
    for p in files:
        rel = p.relative_to(root).as_posix()
        if rel in exclude or any(part.startswith(".") for part in Path(rel).parts):
            continue
        out[rel] = _checksum(p, known)
    return out


def _checksum(path: Path, known: dict | None) -> str:
    if known is None:
        return sha256_file(path)
    st = path.stat()
    key = (os.fspath(path), st.st_ino, st.st_size, st.st_mtime_ns)
    if key not in known:
        known[key] = sha256_file(path)
    return known[key]


def build_manifest(*, settings: Mapping, units: UnitSystem = SI, inputs: Iterable = (),
                   outputs: Mapping[str, str] | None = None, site_file=None, crs=None,
                   grid: GridSpec | None = None, assumptions: str | list = "",
                   cautions: str | list = "",
                   created: _dt.datetime | None = None) -> dict:
    """The manifest as a JSON-ready dict (see ``docs/results-folder.md``).

    Examples
    --------
    >>> import datetime as dt
    >>> m = build_manifest(settings={"cell_m": 1.0}, grid=GridSpec(0.0, 0.0, 1.0, 1.0, 2, 3),
    ...                    created=dt.datetime(2024, 5, 1, 12, 0, tzinfo=dt.timezone.utc))
    >>> m["created"], m["units"]["pressure"], m["grid"]["ny"]
    ('2024-05-01T12:00:00+00:00', 'kPa', 3)
    """
    crs = crs if crs is not None else getattr(grid, "crs", None)
    created = created or _dt.datetime.now(_dt.timezone.utc)
    if created.tzinfo is None:
        raise InputError("must carry a time zone (UTC)", argument="created")
    input_hashes = {os.fspath(p): sha256_file(p) for p in inputs}
    return {
        "program": "fillstress",
        "version": __version__,
        "created": created.astimezone(_dt.timezone.utc).isoformat(timespec="seconds"),
        "site_file": None if site_file is None else os.fspath(site_file),
        "settings": _jsonable(dict(settings), ""),
        "units": {"system": units.name, "length": units.length, "pressure": units.pressure,
                  "unit_weight": units.unit_weight, "settlement": units.settlement,
                  "plan": _plan_label(crs, units)},
        "inputs": input_hashes,
        "outputs": dict(outputs or {}),
        "crs": _crs_wkt(crs),
        "grid": _grid_entry(grid, units, crs),
        "assumptions": _text(assumptions, "assumptions"),
        "cautions": _text(cautions, "cautions"),
    }


def write_manifest(folder, **fields) -> Path:
    """Checksum every file already in `folder`, then write ``folder/manifest.json``.

    `folder` is a path or a :class:`~fillstress.io.atomic.ResultsWriter` (its folder being
    assembled; files it checksummed before and that are unchanged are not read again);
    `fields` are those of :func:`build_manifest` except ``outputs``.

    Examples
    --------
    >>> import tempfile, pathlib, json
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "bodies.csv").write_text("body\\n")
    >>> m = json.loads(write_manifest(d, settings={}).read_text())
    >>> list(m["outputs"])
    ['bodies.csv']
    """
    root = folder.root if isinstance(folder, ResultsWriter) else Path(os.fspath(folder))
    if not root.is_dir():
        raise InputError("results folder does not exist", file=root)
    if "outputs" in fields:
        raise InputError("outputs are computed from the folder, do not pass them",
                         argument="outputs")
    known = folder.digests if isinstance(folder, ResultsWriter) else None
    manifest = build_manifest(outputs=output_checksums(root, known=known), **fields)
    text = json.dumps(manifest, indent=2, ensure_ascii=False, allow_nan=False) + "\n"
    return write_atomic(root / MANIFEST_NAME,
                        lambda tmp: tmp.write_text(text, encoding="utf-8"))


def _read_manifest(root: Path) -> dict:
    path = root / MANIFEST_NAME
    if not path.is_file():
        raise InputError("not a fillstress results folder (no manifest.json)", file=root)
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except ValueError as exc:
        raise InputError(f"is not valid JSON ({exc.msg} at line {exc.lineno})",
                         file=path) from None


def refresh_checksums(folder, relpaths: Iterable[str]) -> Path:
    """Record the current SHA-256 of files rewritten in a finished results folder (the
    report rewritten by ``fillstress report``) so the folder still verifies.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "report.html").write_text("first")
    >>> _ = write_manifest(d, settings={})
    >>> _ = (d / "report.html").write_text("second")
    >>> verify_folder(d)
    ['report.html: checksum differs from manifest.json']
    >>> _ = refresh_checksums(d, ["report.html"])
    >>> verify_folder(d)
    []
    """
    root = Path(os.fspath(folder))
    manifest = _read_manifest(root)
    outputs = dict(manifest.get("outputs") or {})
    for rel in relpaths:
        outputs[rel] = sha256_file(root / rel)
    manifest["outputs"] = dict(sorted(outputs.items()))
    text = json.dumps(manifest, indent=2, ensure_ascii=False, allow_nan=False) + "\n"
    return write_atomic(root / MANIFEST_NAME, lambda tmp: tmp.write_text(text, encoding="utf-8"))


def verify_folder(folder) -> list[str]:
    """Differences between a results folder and its manifest: files missing, changed or not
    listed. An empty list means the folder is complete and unaltered."""
    root = Path(os.fspath(folder))
    listed = _read_manifest(root).get("outputs") or {}
    found = output_checksums(root)
    problems = [f"{rel}: missing" for rel in listed if rel not in found]
    problems += [f"{rel}: checksum differs from manifest.json" for rel, sha in listed.items()
                 if rel in found and found[rel] != sha]
    problems += [f"{rel}: not listed in manifest.json" for rel in found if rel not in listed]
    return problems
