"""The package's import graph flows one way: read from the package's own source (ast).

Every ``import`` counts, at module level or inside a function, so a lazy import cannot hide
an edge. A module may import from its own layer or the layers below it, never above, and
the graph has no cycle.
"""
from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "src" / "fillstress"

# Lowest first. A module belongs to the first entry that is its name or a prefix of it.
LAYERS = [
    ["errors", "cautions", "_validate", "progress", "units", "crs", "_version", "_lazy", "_summary"],
    ["grid"],
    ["kernels"],
    ["solve"],
    ["shapes"],
    ["soil", "settlement", "structures", "drains", "monitoring.backanalysis"],
    ["decide"],  # limits, largest scale, headroom, odds: on solve/ and the settlement core
    ["io"],
    ["site"],
    ["report", "viewer", "scene_page"],  # read a finished results folder only (io.results)
    ["run", "monitoring"],  # write a folder (run, monitor), then its report and scene
    ["design"],             # the layout page: edits one body at a time, on site/ and solve/
    ["examples", "console"],
    ["cli", "__main__", ""],  # "" is the package face, fillstress/__init__.py
]


def module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def is_package(name: str) -> bool:
    return (PACKAGE.joinpath(*name.split(".")) / "__init__.py").is_file() if name else True


def exists(name: str) -> bool:
    return is_package(name) or PACKAGE.joinpath(*name.split(".")).with_suffix(".py").is_file()


def imports_of(path: Path) -> set[str]:
    """Internal modules (dotted, relative to the package) that `path` imports."""
    here = module_name(path)
    base = here.split(".") if path.name == "__init__.py" else here.split(".")[:-1]
    base = [b for b in base if b]
    found = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name == "fillstress" or alias.name.startswith("fillstress."):
                    found.add(alias.name.removeprefix("fillstress").lstrip("."))
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                target = base[: len(base) - (node.level - 1)] + ([node.module] if node.module else [])
                target = ".".join(target)
            elif node.module and (node.module == "fillstress" or node.module.startswith("fillstress.")):
                target = node.module.removeprefix("fillstress").lstrip(".")
            else:
                continue
            for alias in node.names:
                sub = f"{target}.{alias.name}".lstrip(".")
                found.add(sub if exists(sub) else target)
    found.discard(here)
    return found


def graph() -> dict[str, set[str]]:
    edges = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        if "sample_sites" in path.parts:
            continue
        edges[module_name(path)] = imports_of(path)
    return edges


def layer(name: str) -> int:
    for level, entries in enumerate(LAYERS):
        for entry in entries:
            if entry == "" and name == "":
                return level
            if entry and (name == entry or name.startswith(entry + ".")):
                return level
    raise AssertionError(f"module fillstress.{name} has no layer: add it to LAYERS in "
                         "tests/test_architecture.py")


def test_every_module_has_a_layer():
    for name in graph():
        layer(name)


def test_no_import_runs_against_the_flow():
    against = [f"fillstress.{a} -> fillstress.{b}".replace("fillstress. ", "fillstress ")
               for a, targets in graph().items() for b in sorted(targets) if layer(b) > layer(a)]
    assert not against, "imports against the data flow:\n" + "\n".join(against)


def find_cycle(edges: dict[str, set[str]]) -> list[str] | None:
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(node):
        state[node] = 1
        stack.append(node)
        for nxt in sorted(edges.get(node, ())):
            if state.get(nxt) == 1:
                return stack[stack.index(nxt):] + [nxt]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        stack.pop()
        state[node] = 2
        return None

    for node in sorted(edges):
        if node not in state:
            found = visit(node)
            if found:
                return found
    return None


def test_no_import_cycle():
    cycle = find_cycle(graph())
    assert cycle is None, "import cycle: " + " -> ".join(f"fillstress.{m}" for m in cycle)


def test_the_checker_sees_a_cycle_and_a_back_edge():
    """The checks above can fail: a made-up graph with a cycle and an upward edge."""
    assert find_cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]
    assert find_cycle({"a": {"b"}, "b": set()}) is None
    assert layer("grid") < layer("solve.direct") < layer("cli")
    with pytest.raises(AssertionError):
        layer("nowhere")


def test_module_exports_are_public_and_plain_python():
    """No module-level __all__ names a private symbol or a numba-compiled internal."""
    import importlib

    from numba.core.dispatcher import Dispatcher

    wrong = []
    for name in graph():
        module = importlib.import_module("fillstress" + (f".{name}" if name else ""))
        for item in getattr(module, "__all__", ()):
            obj = getattr(module, item)             # also fails for a name that is not there
            if (item.startswith("_") and item != "__version__") or isinstance(obj, Dispatcher):
                wrong.append(f"fillstress.{name}: {item}")
    assert not wrong, "exports that are private or numba internals: " + ", ".join(wrong)
