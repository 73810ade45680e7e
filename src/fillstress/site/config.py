"""Read and validate a site file (TOML) against the schema; convert every number to SI.

The result is a plain nested dict of validated values (`SiteConfig`), with paths
resolved relative to the site file. Building the model from it is `site/build.py`'s job.
"""
from __future__ import annotations

import difflib
import math
import os
import tomllib
from dataclasses import dataclass
from pathlib import Path

from . import schema
from .._validate import regular_file
from ..errors import InputError
from ..units import UnitSystem, unit_system


@dataclass
class SiteConfig:
    """A validated site file: `tables` maps table name → validated dict (or list / dict of
    dicts for arrays and named tables); values are SI; paths are absolute."""

    path: Path
    units: UnitSystem
    tables: dict

    def __getitem__(self, name):
        return self.tables[name]

    def get(self, name, default=None):
        return self.tables.get(name, default)

    def input_files(self) -> list[Path]:
        """Every file the site refers to, the site file first."""
        found = [self.path]

        def walk(v):
            if isinstance(v, Path):
                found.append(v)
            elif isinstance(v, dict):
                for x in v.values():
                    walk(x)
            elif isinstance(v, list):
                for x in v:
                    walk(x)
        walk(self.tables)
        return list(dict.fromkeys(found))


def read_site_file(path) -> SiteConfig:
    """Read, validate and convert a site file.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "s.toml").write_text('''
    ... [site]
    ... name = "Demo"
    ... units = "US"
    ... [bodies.pad]
    ... kind = "footprint"
    ... unit_weight = 120.0
    ... outline = [[0, 0], [100, 0], [100, 50]]
    ... height = 10.0
    ... ''')
    >>> cfg = read_site_file(d / "s.toml")
    >>> round(cfg["bodies"]["pad"]["height"], 4), round(cfg["bodies"]["pad"]["unit_weight"], 3)
    (3.048, 18.85)
    """
    path = Path(path)
    return validate(read_toml(path, "site file"), path)


def read_toml(path: Path, what: str) -> dict:
    """Parse a TOML file, with one-line errors naming it (`what`: "site file", ...)."""
    path = regular_file(path, what=what)
    try:
        return tomllib.loads(path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML: {exc}", file=path) from None
    except UnicodeDecodeError:
        raise InputError("not a UTF-8 text file", file=path) from None


def validate(raw: dict, path: Path) -> SiteConfig:
    """Validate an already parsed TOML document (see `read_site_file`)."""
    path = Path(path)
    reject_unknown(raw, list(schema.TOP_LEVEL), path, where="")
    site_raw = raw.get("site")
    if not isinstance(site_raw, dict):
        raise InputError("missing the [site] table (name, crs, units)", file=path, key="site")
    units = unit_system(_units_name(site_raw, path))
    v = _Validator(path, units)
    tables = {}
    for name, table in schema.TOP_LEVEL.items():
        if name not in raw:
            if table.required:
                raise InputError(f"missing the [{name}] table", file=path, key=name)
            continue
        tables[name] = v.table_group(raw[name], table)
    if "soil" in tables:
        layers = raw["soil"].get("layers")
        if not isinstance(layers, list) or not layers:
            raise InputError("needs at least one [[soil.layers]] entry", file=path, key="soil.layers")
        tables["soil"]["layers"] = [v.table(t, schema.LAYER, f"soil.layers[{i}]")
                                    for i, t in enumerate(layers)]
    if "limits" in tables:
        overrides = raw["limits"].get("overrides", [])
        tables["limits"]["overrides"] = v.table_group(overrides, schema.LIMIT_OVERRIDES)
    if "uncertainty" in tables:
        tables["uncertainty"].update(v.uncertainty(raw["uncertainty"]))
    return SiteConfig(path, units, tables)


def validate_group(raw, table: schema.Table, path, units: UnitSystem):
    """Validate one table (or array or named group of tables) of a TOML file other than
    the site file against `table`, with the site file's checks, hints and unit conversion."""
    return _Validator(Path(path), units).table_group(raw, table)


# Arrays of tables inside a table, validated on their own (soil.layers, limits.overrides).
SUB_TABLES = {"soil": ["layers"], "limits": ["overrides"],
              "uncertainty": ["parameters", "correlations"]}


def _units_name(site_raw, path):
    name = site_raw.get("units", "SI")
    if not isinstance(name, str) or name.upper() not in ("SI", "US"):
        raise InputError(f"must be \"SI\" or \"US\", got {name!r}", file=path, key="site.units")
    return name.upper()


def reject_unknown(data: dict, valid: list[str], path, where: str = ""):
    """InputError for the first key of `data` not in `valid`, naming the nearest valid key."""
    for key in data:
        if key not in valid:
            near = difflib.get_close_matches(key, valid, n=1, cutoff=0.5)
            hint = f"; did you mean '{near[0]}'?" if near else f"; valid keys: {', '.join(valid)}"
            full = f"{where}.{key}" if where else key
            raise InputError(f"unknown key{hint}", file=path, key=full)


class _Validator:
    def __init__(self, path: Path, units: UnitSystem):
        self.path, self.units = path, units

    def fail(self, where, reason):
        raise InputError(reason, file=self.path, key=where)

    def table_group(self, raw, table: schema.Table):
        if table.many == "array":
            if not isinstance(raw, list):
                self.fail(table.name, f"must be an array of tables, written [[{table.name}]]")
            return [self.table(t, table, f"{table.name}[{i}]") for i, t in enumerate(raw)]
        if table.many == "named":
            if not isinstance(raw, dict) or not raw:
                self.fail(table.name, f"needs at least one [{table.name}.<name>] table")
            return {n: self.table(t, table, f"{table.name}.{n}") for n, t in raw.items()}
        return self.table(raw, table, table.name)

    def table(self, raw, table: schema.Table, where: str) -> dict:
        if not isinstance(raw, dict):
            self.fail(where, "must be a table of keys")
        kind = raw.get("kind") if table.variants else None
        if table.variants and kind not in table.variants:
            near = (difflib.get_close_matches(kind, list(table.variants), n=1)
                    if isinstance(kind, str) else [])
            hint = f" (did you mean '{near[0]}'?)" if near else ""
            self.fail(f"{where}.kind",
                      f"must be one of {', '.join(table.variants)}, got {kind!r}{hint}")
        keys = table.keys_for(kind)
        raw = self._spelled(raw, keys, where)
        valid = [k.name for k in keys] + SUB_TABLES.get(table.name, [])
        reject_unknown(raw, valid, self.path, where)
        out = {}
        for key in keys:
            if key.name in raw:
                out[key.name] = self.value(raw[key.name], key, f"{where}.{key.name}")
            elif key.required:
                self.fail(f"{where}.{key.name}", "required key is missing")
            else:
                out[key.name] = key.default  # defaults are declared in SI
        return out

    def _spelled(self, raw: dict, keys, where: str) -> dict:
        """`raw` with other accepted spellings of a key (centerline, stations) renamed."""
        out = dict(raw)
        for key in keys:
            for alias in key.aliases:
                if alias in out:
                    if key.name in out:
                        self.fail(f"{where}.{alias}", f"give {key.name} or {alias}, not both")
                    out[key.name] = out.pop(alias)
        return out

    def uncertainty(self, raw: dict) -> dict:
        """[[uncertainty.parameters]] and [[uncertainty.correlations]]; each parameter's
        mean, sd and bounds converted to SI in the unit of that parameter."""
        params = self.table_group(raw.get("parameters", []), schema.UNCERTAIN_PARAMETERS)
        for p in params:
            unit = schema.Key("", "float", "", unit=schema.UNCERTAIN_UNITS[p["parameter"]])
            p.update({k: self._si(p[k], unit) for k in ("mean", "sd", "low", "high")})
        return {"parameters": params, "correlations": self.table_group(
            raw.get("correlations", []), schema.UNCERTAIN_CORRELATIONS)}

    def value(self, v, key: schema.Key, where: str):
        kind = key.kind
        if kind == "strs":
            if not isinstance(v, list) or not v or not all(isinstance(x, str) and x for x in v):
                self.fail(where, f"must be a list of names, got {v!r}")
            return list(v)
        if kind == "str":
            if not isinstance(v, str):
                self.fail(where, f"must be text, got {v!r}")
            if key.choices and v not in key.choices:
                near = difflib.get_close_matches(v, key.choices, n=1)
                hint = f" (did you mean '{near[0]}'?)" if near else ""
                self.fail(where, f"must be one of {', '.join(key.choices)}, got {v!r}{hint}")
            return v
        if kind == "bool":
            if not isinstance(v, bool):
                self.fail(where, f"must be true or false, got {v!r}")
            return v
        if kind == "path":
            if not isinstance(v, str) or not v:
                self.fail(where, f"must be a file path, got {v!r}")
            p = Path(os.path.abspath(self.path.parent / v))
            regular_file(p, file=self.path, key=where)
            return p
        if kind in ("float", "int"):
            return self._si(self.number(v, key, where, integer=(kind == "int")), key)
        if kind == "floats":
            vals = v if isinstance(v, list) else [v]
            if not vals:
                self.fail(where, "must be a non-empty list of numbers")
            return [self._si(self.number(x, key, where), key) for x in vals]
        if kind == "extent":
            if not isinstance(v, list) or len(v) != 4:
                self.fail(where, "must be [xmin, ymin, xmax, ymax]")
            e = [self._si(self.number(x, key, where), key) for x in v]
            if not (e[2] > e[0] and e[3] > e[1]):
                self.fail(where, f"must have xmax > xmin and ymax > ymin, got {v}")
            return e
        if kind in ("xy", "pairs"):
            return self.coordinates(v, key, where, pairs=(kind == "pairs"))
        raise AssertionError(f"schema kind {kind!r} not handled")  # a schema bug, not input

    def number(self, v, key: schema.Key, where: str, integer=False):
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            self.fail(where, f"must be a number, got {v!r}")
        if integer and not float(v).is_integer():
            self.fail(where, f"must be a whole number, got {v!r}")
        if not math.isfinite(v):
            self.fail(where, f"must be finite, got {v!r}")
        if key.minimum is not None:
            low = key.minimum
            if (key.exclusive_minimum and v <= low) or v < low:
                rel = ">" if key.exclusive_minimum else "≥"
                self.fail(where, f"must be {rel} {low:g}, got {v!r}")
        return int(v) if integer else float(v)

    def coordinates(self, v, key, where, pairs):
        if not isinstance(v, list) or len(v) < 2:
            self.fail(where, "must be a list of at least two [x, y] pairs")
        out = []
        for i, p in enumerate(v):
            ok = isinstance(p, list) and len(p) in ((2,) if pairs else (2, 3))
            if not ok or any(isinstance(c, bool) or not isinstance(c, (int, float))
                             or not math.isfinite(c) for c in p):
                shape = "[a, b]" if pairs else "[x, y] or [x, y, z]"
                self.fail(where, f"item {i} must be {shape} numbers, got {p!r}")
            out.append(p)
        if pairs:
            # [chainage, height]: both lengths
            return [[self.units.length_si(a), self.units.length_si(b)] for a, b in out]
        # x, y stay in CRS units (site/build.py scales them by the CRS axis factor); z is a length
        return [[float(p[0]), float(p[1])] + [self.units.length_si(c) for c in p[2:]]
                for p in out]

    def _si(self, v, key: schema.Key):
        if v is None or isinstance(v, (bool, str)) or key.kind in ("str", "bool", "int"):
            return v
        u = self.units
        if key.unit == schema.LENGTH:
            return u.length_si(v)
        if key.unit == schema.PRESSURE:
            return u.pressure_si(v)
        if key.unit == schema.UNIT_WEIGHT:
            return u.unit_weight_si(v)
        if key.unit == schema.INV_PRESSURE:
            return u.to_si(v, "compressibility")
        if key.unit == schema.CV:
            return u.to_si(v, "consolidation")
        if key.unit == schema.SETTLE:
            return u.to_si(v, "settlement")
        return v
