"""A small invented site that runs in about a second, for tests of the workflow around
the engine (folders, messages, bad input): one rectangular pad, one borehole, no soil."""
from __future__ import annotations

import hashlib
from pathlib import Path

SITE = '''\
[site]
name = "Harrowgate test pad"
crs = "EPSG:32633"
units = "SI"

[grid]
cell = 2.0
margin = 8.0
convergence_check = false

[bodies.pad]
kind = "footprint"
outline = [[500000.0, 5200000.0], [500020.0, 5200000.0], [500020.0, 5200012.0], [500000.0, 5200012.0]]
height = 2.0
unit_weight = 20.0

[[boreholes]]
id = "B1"
x = 500010.0
y = 5200006.0
top = 1.0
bottom = 6.0
step = 1.0
'''


def write_site(folder: Path, text: str = SITE, name: str = "site.toml") -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / name
    path.write_text(text, encoding="utf-8")
    return path


def tree_hashes(root: Path) -> dict:
    """Every path under `root` with the SHA-256 of each file (None for folders and other
    entries), to show that nothing was lost or changed."""
    out = {}
    for p in sorted(Path(root).rglob("*")):
        rel = p.relative_to(root).as_posix()
        out[rel] = (hashlib.sha256(p.read_bytes()).hexdigest()
                    if p.is_file() and not p.is_symlink() else None)
    return out
