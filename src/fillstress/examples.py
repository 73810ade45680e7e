"""The bundled sample sites (invented scenarios for demonstration)."""
from __future__ import annotations

from pathlib import Path

from .errors import InputError


def sample_sites_dir() -> Path:
    """Folder of the bundled sample sites: installed beside this module (package data
    fillstress/sample_sites), or at the top of a source checkout."""
    installed = Path(__file__).resolve().parent / "sample_sites"
    if installed.is_dir():
        return installed
    return Path(__file__).resolve().parents[2] / "sample_sites"


def list_examples() -> list[list[str]]:
    """[name, first line of its README] for every bundled sample site."""
    rows = []
    for site in sorted(sample_sites_dir().glob("*/site.toml")):
        readme = site.parent / "README.md"
        text = readme.read_text(encoding="utf-8").splitlines() if readme.exists() else [""]
        first = next((line.lstrip("# ").strip() for line in text if line.strip()), "")
        rows.append([site.parent.name, first])
    return rows


def example_site(name: str) -> Path:
    """Path of the site file of sample site `name`."""
    site = sample_sites_dir() / name / "site.toml"
    if not site.is_file():
        names = ", ".join(r[0] for r in list_examples()) or "none found"
        raise InputError(f"no bundled sample site {name!r}; available: {names}", argument="name")
    return site
