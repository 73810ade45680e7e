"""Generated documentation must match what its generator writes now."""
from pathlib import Path

from fillstress.site.schema_doc import site_reference

DOCS = Path(__file__).resolve().parents[1] / "docs"


def test_site_file_reference_is_current():
    committed = (DOCS / "site-file.md").read_text(encoding="utf-8")
    assert committed == site_reference(), (
        "docs/site-file.md is stale: run python tools/write_site_reference.py")


def test_reference_lists_every_schema_key():
    from fillstress.site import schema
    text = site_reference()
    for table in schema.TABLES:
        for name in table.all_key_names():
            assert f"| `{name}` |" in text
