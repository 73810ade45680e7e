"""Write docs/api.md from the numpy docstrings of the public API (fillstress.__all__).

    python tools/write_api_reference.py

Signatures come from inspect.signature, text from inspect.getdoc; numpy section headers
become bold labels, parameter entries list items and examples code blocks.  Nothing is
written by hand, so the reference follows the code.
"""
from __future__ import annotations

import importlib
import inspect
import re
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
TARGET = ROOT / "docs" / "api.md"
COMMAND = "python tools/write_api_reference.py"

# The reference documents exactly fillstress.__all__ (the public API), each name in the
# section of the module that defines it; a public name from no listed module is an error.
SECTIONS = [
    ("Load model", ("fillstress.grid",)),
    ("Stress", ("fillstress.solve",)),
    ("Distributed (Dask)", ("fillstress.solve.distributed",)),
    ("Site files and runs", ("fillstress.site.build", "fillstress.run")),
    ("Soil", ("fillstress.soil",)),
    ("Settlement", ("fillstress.settlement",)),
    ("Structures", ("fillstress.structures",)),
    ("Receptors", ("fillstress.site.receptors",)),
    ("Fill bodies", ("fillstress.shapes", "fillstress.io.surfaces", "fillstress.io.footprints")),
    ("Report", ("fillstress.report",)),
    ("Errors", ("fillstress.errors",)),
]


def public_api() -> list[tuple[str, list[str]]]:
    """(section title, ["fillstress.NAME", ...]) for every name of fillstress.__all__."""
    _import_package()
    import fillstress
    sections = {title: [] for title, _ in SECTIONS}
    for name in fillstress.__all__:
        if name == "__version__":
            continue
        module = getattr(fillstress, name).__module__
        # the section of the longest listed prefix (solve.distributed before solve)
        matches = [(len(p), t) for t, prefixes in SECTIONS for p in prefixes
                   if module == p or module.startswith(p + ".")]
        title = max(matches)[1] if matches else None
        if title is None:
            raise SystemExit(f"fillstress.{name} (from {module}) has no section in "
                             f"tools/write_api_reference.py SECTIONS")
        sections[title].append(f"fillstress.{name}")
    return [(title, names) for title, names in sections.items() if names]


LIST_SECTIONS = {"Parameters", "Other Parameters", "Returns", "Yields", "Raises", "Warns",
                 "Attributes"}


def _import_package():
    try:
        import fillstress  # noqa: F401
    except ImportError:                      # a source checkout that is not installed
        sys.path.insert(0, str(ROOT / "src"))


def resolve(dotted: str):
    """The object named by a dotted path (module attribute, longest importable module)."""
    parts = dotted.split(".")
    for cut in range(len(parts) - 1, 0, -1):
        try:
            obj = importlib.import_module(".".join(parts[:cut]))
        except ModuleNotFoundError:
            continue
        for name in parts[cut:]:
            obj = getattr(obj, name)
        return obj
    raise ImportError(dotted)


# --- signatures ----------------------------------------------------------------------------
class _Shown(str):
    """A string that inspect prints without quotes (annotations and defaults)."""

    def __repr__(self) -> str:
        return str(self)


def _default_text(value) -> str:
    """Defaults as source would write them; functions by name (a repr holds an address)."""
    if inspect.isfunction(value) or inspect.isclass(value) or inspect.isbuiltin(value):
        return value.__name__
    text = repr(value)
    return re.sub(r" at 0x[0-9a-fA-F]+", "", text)


def _annotation_text(annotation) -> str:
    if isinstance(annotation, str):           # postponed annotations; a forward ref is quoted
        quoted = len(annotation) > 1 and annotation[0] == annotation[-1] and annotation[0] in "'\""
        return annotation[1:-1] if quoted else annotation
    return inspect.formatannotation(annotation)


def signature_text(name: str, obj, drop_self: bool = False) -> str:
    try:
        sig = inspect.signature(obj)
    except (TypeError, ValueError):
        return f"{name}(...)"
    params = list(sig.parameters.values())
    if drop_self and params and params[0].name in ("self", "cls"):
        params = params[1:]
    shown = [p.replace(
        annotation=p.empty if p.annotation is p.empty else _Shown(_annotation_text(p.annotation)),
        default=p.empty if p.default is p.empty else _Shown(_default_text(p.default)))
        for p in params]
    ret = sig.return_annotation
    ret = sig.empty if ret is sig.empty or inspect.isclass(obj) else _Shown(_annotation_text(ret))
    return name + str(sig.replace(parameters=shown, return_annotation=ret))


# --- docstrings ------------------------------------------------------------------------------
def _inline(text: str) -> str:
    """reST roles and double backticks → markdown code."""
    text = re.sub(r":[a-z]+:`~?([^`]+)`", r"`\1`", text)
    return re.sub(r"``([^`]+)``", r"`\1`", text)


def _split_sections(lines: list[str]) -> list[tuple[str | None, list[str]]]:
    sections, title, body = [], None, []
    i = 0
    while i < len(lines):
        line = lines[i]
        underline = lines[i + 1] if i + 1 < len(lines) else ""
        if line.strip() and re.fullmatch(r"-{3,}", underline.strip()) \
                and not line.startswith(" "):
            sections.append((title, body))
            title, body = line.strip(), []
            i += 2
            continue
        body.append(line)
        i += 1
    sections.append((title, body))
    return sections


def _list_section(body: list[str]) -> list[str]:
    items = []
    for line in body:
        if not line.strip():
            continue
        if not line.startswith(" "):
            term, _, kind = line.partition(" : ")
            items.append([f"`{term.strip()}`" + (f" : {_inline(kind.strip())}" if kind else ""), []])
        elif items:
            items[-1][1].append(_inline(line.strip()))
        else:                                  # description before any term: keep as text
            items.append([_inline(line.strip()), []])
    return [f"- {term}" + (" — " + " ".join(desc) if desc else "") for term, desc in items]


def _example_section(body: list[str]) -> list[str]:
    out, in_code = [], False
    for line in body:
        starts_code = line.startswith(">>>")
        if starts_code and not in_code:
            out += ["```pycon"]
            in_code = True
        if in_code and not line.strip():
            out += ["```", ""]
            in_code = False
            continue
        out.append(line if in_code else _inline(line))
    if in_code:
        out.append("```")
    return out


def docstring_markdown(obj) -> list[str]:
    doc = inspect.getdoc(obj)
    if not doc:
        return ["*(no docstring)*"]
    out = []
    for title, body in _split_sections(doc.splitlines()):
        if title is not None:
            out += ["", f"**{title}**", ""]
        if title in LIST_SECTIONS:
            out += _list_section(body)
        elif title == "Examples":
            out += _example_section(body)
        else:
            out += [_inline(line) for line in body]
    text = "\n".join(out).strip("\n")
    return re.sub(r"\n{3,}", "\n\n", text).splitlines()


# --- classes -----------------------------------------------------------------------------------
def _members(cls):
    """Public methods and properties of `cls` and its bases, own class first."""
    seen, methods, props = set(), [], []
    for klass in cls.__mro__[:-1]:
        for name, attr in vars(klass).items():
            if name.startswith("_") or name in seen:
                continue
            seen.add(name)
            if isinstance(attr, property):
                props.append((name, attr))
            elif isinstance(attr, (classmethod, staticmethod)) or inspect.isfunction(attr):
                methods.append((name, getattr(cls, name)))
    return methods, props


def _first_line(obj) -> str:
    doc = inspect.getdoc(obj)
    return _inline(doc.splitlines()[0]) if doc else ""


def class_markdown(short: str, cls) -> list[str]:
    out = []
    methods, props = _members(cls)
    if props:
        out += ["", "**Properties**", ""]
        out += [f"- `{name}`" + (f" — {_first_line(p)}" if _first_line(p) else "")
                for name, p in props]
    for name, method in methods:
        out += ["", f"#### `{short}.{name}`", "", "```python",
                signature_text(name, method, drop_self=True), "```", ""]
        out += docstring_markdown(method)
    return out


# --- the page ------------------------------------------------------------------------------------
HEADER = f"""# fillstress API reference

Generated by `{COMMAND}` from the signatures and numpy docstrings of
the code; do not edit by hand. `tests/test_docs_validation.py` fails when this file differs from what the command
writes. The examples are doctests: `python -m pytest` runs them (`--doctest-modules` on
`src/`), so they work as shown. Units inside the library: m, kPa, kN/m³; depth positive
downward below the existing ground; x east, y north.
"""


def entry_markdown(dotted: str) -> list[str]:
    obj = resolve(dotted)
    short = dotted.rsplit(".", 1)[1]
    kind = " (class)" if inspect.isclass(obj) else ""
    out = [f"### `{dotted}`{kind}", "", "```python", signature_text(short, obj), "```", ""]
    out += docstring_markdown(obj)
    if inspect.isclass(obj):
        out += class_markdown(short, obj)
    return out + [""]


def api_reference() -> str:
    """The text of docs/api.md, generated now."""
    api = public_api()
    lines = [HEADER, "## Contents", ""]
    for title, names in api:
        anchors = ", ".join(f"`{n.rsplit('.', 1)[1]}`" for n in names)
        lines.append(f"- {title}: {anchors}")
    lines.append("")
    for title, names in api:
        lines += [f"## {title}", ""]
        for dotted in names:
            lines += entry_markdown(dotted)
    return "\n".join(lines).rstrip("\n") + "\n"


if __name__ == "__main__":
    TARGET.write_text(api_reference(), encoding="utf-8")
    print(f"wrote {TARGET}")
