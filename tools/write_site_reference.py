"""Write docs/site-file.md from the schema the validator uses.

    python tools/write_site_reference.py
"""
from pathlib import Path

from fillstress.site.schema_doc import site_reference

TARGET = Path(__file__).resolve().parents[1] / "docs" / "site-file.md"

if __name__ == "__main__":
    TARGET.write_text(site_reference(), encoding="utf-8")
    print(f"wrote {TARGET}")
