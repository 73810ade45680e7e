"""Pictures the tests look at, kept for the guide.

With ``FILLSTRESS_GUIDE_IMAGES=docs/images`` in the environment, the viewer tests copy
the pictures they check into that folder (docs/guide.md shows them); otherwise nothing
is kept. PNGs are stored with a 256-colour palette so each stays well under 300 kB.
"""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np


def keep(picture, name: str) -> None:
    """Save `picture` (a PNG path or an RGB array) as ``<folder>/<name>`` when asked to."""
    folder = os.environ.get("FILLSTRESS_GUIDE_IMAGES")
    if not folder:
        return
    from PIL import Image
    image = Image.open(picture) if isinstance(picture, (str, os.PathLike)) else \
        Image.fromarray(np.asarray(picture, dtype=np.uint8))
    image = image.convert("RGB").quantize(256, method=Image.Quantize.MEDIANCUT)
    Path(folder).mkdir(parents=True, exist_ok=True)
    image.save(Path(folder) / name, optimize=True)
