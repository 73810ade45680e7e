"""docs/validation.md, docs/api.md and docs/reliability.md must be what their generators
write now."""
from __future__ import annotations

import importlib.util
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def _tool(name: str):
    """Import tools/<name>.py (the tools folder is not a package)."""
    spec = importlib.util.spec_from_file_location(f"_tool_{name}", ROOT / "tools" / f"{name}.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _first_difference(committed: str, fresh: str) -> str:
    for n, (a, b) in enumerate(zip(committed.splitlines(), fresh.splitlines()), start=1):
        if a != b:
            return f"first difference at line {n}:\n  committed: {a}\n  generated: {b}"
    return f"committed has {len(committed.splitlines())} lines, generated {len(fresh.splitlines())}"


@pytest.mark.parametrize("tool, builder, doc", [
    ("write_validation_table", "validation_table", "validation.md"),
    ("write_api_reference", "api_reference", "api.md"),
    ("write_reliability_table", "reliability_table", "reliability.md"),
])
def test_generated_doc_is_current(tool, builder, doc):
    module = _tool(tool)
    fresh = getattr(module, builder)()
    path = ROOT / "docs" / doc
    committed = path.read_text(encoding="utf-8") if path.is_file() else ""
    assert committed == fresh, (f"docs/{doc} is stale: run {module.COMMAND}\n"
                                + _first_difference(committed, fresh))


def test_validation_table_has_one_row_per_case_and_all_pass():
    module = _tool("write_validation_table")
    import validation_cases
    text = module.validation_table()
    rows = [line for line in text.splitlines() if line.startswith("| `")]
    assert len(rows) == len(validation_cases.CASES)
    for case in validation_cases.CASES:
        assert sum(f"| `{case.id}` |" in row for row in rows) == 1, case.id
    assert all(row.endswith("| yes |") for row in rows)


def test_rounding_place_follows_the_tolerance_not_the_value():
    module = _tool("write_validation_table")
    import validation_cases
    corner = next(c for c in validation_cases.CASES if c.id == "corner-m1-n1-nodes")
    # abs 2e-4: shown to 1e-6, two decades finer than the tolerance
    assert module.display_exponent(corner) == -6
    assert module.rounded(0.17522149, -6) == "0.175221"
    assert module.rounded(-4e-9, -6) == "0.000000"          # no negative zero
    exact = next(c for c in validation_cases.CASES if c.id == "settlement-mv")
    # rel 1e-12 of 0.07 would ask for 1e-16: capped at 12 significant digits
    assert module.display_exponent(exact) == -13


def test_api_reference_covers_the_public_api():
    module = _tool("write_api_reference")
    text = module.api_reference()
    import fillstress
    for name in fillstress.__all__:           # every public name, and only those
        assert (f"### `fillstress.{name}`" in text) == (name != "__version__"), name
    assert text.count("\n### `") == len(fillstress.__all__) - 1
    assert " at 0x" not in text                       # no memory addresses from reprs
    assert "vertical_stress(grid, points, method='boussinesq'" in text
