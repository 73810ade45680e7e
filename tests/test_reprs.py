"""Short reprs: the main objects print a few labelled lines (and an HTML table in Jupyter),
not every array and point table they hold."""
import re

import numpy as np

from fillstress import LoadGrid, load_site
from fillstress.run.compute import compute
from test_cli_output import SITE as CLI_SITE

# The one-pad site of the command-line tests, renamed with markup and given a plan grid.
SITE = CLI_SITE.replace('name = "Ostrick siding pad"', 'name = "Brindle <east> pad"') + """
[[plan_grids]]
name = "pad"
depths = [2.0, 4.0]
"""


def rows(text: str) -> dict:
    """The labelled lines of a summary repr: label → text."""
    return dict(re.split(r"\s{2,}", line.strip(), maxsplit=1) for line in text.splitlines()[1:])


def test_load_grid_repr_is_a_summary_not_the_array():
    g = LoadGrid(np.full((400, 500), 38.0), x0=1000.0, y0=2000.0, dx=0.5, dy=0.5)
    text = repr(g)
    assert len(text) < 400 and "array" not in text
    assert "500 × 400 cells of 0.5 × 0.5 m" in text     # x × y, as `fillstress check`
    assert "1,900,000 kN" in text           # 38 kPa × 250 m × 200 m
    assert "<table>" in g._repr_html_()


def test_site_and_results_reprs_are_short_and_escaped_in_html(tmp_path):
    path = tmp_path / "site.toml"
    path.write_text(SITE, encoding="utf-8")
    site = load_site(path)
    res = compute(site)
    for obj, title in ((site, "Site Brindle <east> pad"),
                       (res, "RunResults of Brindle <east> pad")):
        text = repr(obj)
        assert text.startswith(f"<{title}>") and len(text) < 1000, text
        html = obj._repr_html_()
        assert "&lt;east&gt;" in html and "<east>" not in html
    about_site = rows(repr(site))
    assert about_site["receptors"] == "boreholes: 1" and about_site["sample points"] == "3"
    assert about_site["bodies"] == "pad (stage 1)" and about_site["plan grids"] == "pad"
    # the largest Δσz is at the top of the borehole, under the centre: a share of 40 kPa
    about_run = rows(repr(res))
    top = res.points["dsz"].max()
    assert about_run["max Δσz"] == f"{top:.4g} kPa" and 0 < top < 40.0
    assert about_run["plan grid pad"] == "2 depths on {} × {} nodes".format(
        res.slices["pad"].sizes["x"], res.slices["pad"].sizes["y"])
