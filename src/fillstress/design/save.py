"""Writing an edited layout as a site file (TOML), atomically, beside the original.

Only the site file's own value types occur (text, true/false, numbers, lists of numbers
or of lists, tables, arrays of tables), so a small writer serves; the original's comments
are not carried over. The file is written in the site file's folder, so the relative paths
it holds (vector files, surfaces) still point at the same files.
"""
from __future__ import annotations

import json
import math
import re
from pathlib import Path

from ..errors import InputError
from ..io.atomic import write_atomic
from ..site.config import validate

_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")
_NAME = re.compile(r"^[^/\\\x00]+\.toml$")


def toml_text(doc: dict, header: str = "") -> str:
    """TOML text of a parsed site file.

    Examples
    --------
    >>> print(toml_text({"site": {"name": "Ash Flats"}, "bodies": {"pad": {"height": 2.5,
    ...       "outline": [[0, 0], [1, 0], [1, 1]]}}, "pipes": [{"id": "P1"}]}).strip())
    [site]
    name = "Ash Flats"
    <BLANKLINE>
    [bodies.pad]
    height = 2.5
    outline = [[0, 0], [1, 0], [1, 1]]
    <BLANKLINE>
    [[pipes]]
    id = "P1"
    """
    out = [f"# {line}" for line in header.splitlines()] + ([""] if header else [])
    _table(out, [], doc)
    return "\n".join(out).strip() + "\n"


def _table(out: list, where: list, table: dict) -> None:
    """Plain keys first, under the table's header; then sub-tables and arrays of tables
    (a table holding only sub-tables needs no header of its own)."""
    plain = {k: v for k, v in table.items() if not _is_table(v) and not _is_tables(v)}
    if where and (plain or len(plain) == len(table)):
        out.append(f"[{_dotted(where)}]")
    out += [f"{_key(k)} = {_value(v)}" for k, v in plain.items()] + ([""] if plain else [])
    for k, v in table.items():
        if _is_table(v):
            _table(out, where + [k], v)
        elif _is_tables(v):
            for item in v:
                out.append(f"[[{_dotted(where + [k])}]]")
                out += [f"{_key(a)} = {_value(b)}" for a, b in item.items()] + [""]


def _is_table(v) -> bool:
    return isinstance(v, dict)


def _is_tables(v) -> bool:
    return isinstance(v, list) and bool(v) and all(isinstance(x, dict) for x in v)


def _dotted(parts: list) -> str:
    return ".".join(_key(p) for p in parts)


def _key(k: str) -> str:
    return k if _BARE_KEY.match(k) else json.dumps(k, ensure_ascii=False)


def _value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if not math.isfinite(v):
            raise InputError(f"cannot write {v!r} to a site file", argument="doc")
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)       # a TOML basic string
    if isinstance(v, list):
        return "[" + ", ".join(_value(x) for x in v) + "]"
    if isinstance(v, dict):                            # an inline table
        return "{" + ", ".join(f"{_key(a)} = {_value(b)}" for a, b in v.items()) + "}"
    raise InputError(f"cannot write a {type(v).__name__} to a site file", argument="doc")


def save_as(doc: dict, original: Path, name: str, *, replace_original: bool = False) -> Path:
    """Write `doc` as site file `name` in the original's folder (atomic); the result is
    validated before anything is written. The original is replaced only when asked."""
    if not isinstance(name, str) or not _NAME.match(name) or name in (".toml", "..toml"):
        raise InputError(f"give a file name ending in .toml, without folders; got {name!r}",
                         argument="name")
    original = Path(original).resolve()
    target = original.parent / name
    if target == original and not replace_original:
        raise InputError("that is the site file the page was opened with; tick 'replace the "
                         "original' to overwrite it", argument="name")
    validate(doc, target)
    text = toml_text(doc, header=f"Written by fillstress design from {original.name}.")
    return write_atomic(target, lambda tmp: Path(tmp).write_text(text, encoding="utf-8"))
