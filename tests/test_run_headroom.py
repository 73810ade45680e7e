"""Headroom map through a run (run/headroom.py), the issue's check: the template placed for
real as a body of the site at random map cells, the site run again, and the governing stress
limit reached at the mapped multiple (within 0.5 %). Invented site, loads and limits."""
from __future__ import annotations

import numpy as np
import pytest

from fillstress.run.compute import compute
from fillstress.site.build import load_site

SITE = """
[site]
name = "Tarn Brook yard"
crs = "EPSG:32631"
[grid]
cell = 2.0
margin = 10.0
convergence_check = false
[bodies.pad]
kind = "footprint"
outline = [[430000, 6100000], [430020, 6100000], [430020, 6100012], [430000, 6100012]]
height = 2.0
unit_weight = 18.0
{extra}
[[boreholes]]
id = "BH-T1"
x = 430031.0
y = 6100021.0
top = 1.0
bottom = 5.0
step = 2.0
[limits]
stress_increase = 30.0
[headroom]
kind = "rectangle"
size_x = 6.0
size_y = 6.0
pressure = 50.0
"""


def _site(tmp_path, extra=""):
    path = tmp_path / "site.toml"
    path.write_text(SITE.format(extra=extra))
    return load_site(path)


def test_the_template_placed_for_real_reaches_the_limit_at_the_mapped_multiple(tmp_path):
    found = compute(_site(tmp_path)).headroom
    spec = found.spec
    assert found.multiple.shape == spec.shape and not np.isnan(found.multiple).any()
    rng = np.random.default_rng(5)
    finite = np.argwhere(np.isfinite(found.multiple) & (found.multiple > 0.05))
    for j, i in finite[rng.choice(len(finite), 3, replace=False)]:
        m = float(found.multiple[j, i])
        cx, cy = spec.x_centres[i], spec.y_centres[j]
        body = (f'[bodies.placed]\nkind = "footprint"\nunit_weight = 10.0\n'
                f'height = {5.0 * m!r}\noutline = [[{cx - 3}, {cy - 3}], [{cx + 3}, {cy - 3}],'
                f' [{cx + 3}, {cy + 3}], [{cx - 3}, {cy + 3}]]')
        res = compute(_site(tmp_path, body))
        governing = res.limits.governing.row
        assert governing.utilisation == pytest.approx(1.0, rel=5e-3)
        kind, rid, point, limit = found.receptors[found.governing[j, i]]
        assert (rid, limit) == (governing.receptor_id, governing.limit.label)


def test_a_template_body_that_is_not_on_the_site_is_named(tmp_path):
    path = tmp_path / "site.toml"
    path.write_text(SITE.format(extra="").replace(
        'kind = "rectangle"\nsize_x = 6.0\nsize_y = 6.0\npressure = 50.0',
        'kind = "body"\nbody = "pda"'))
    from fillstress.errors import InputError
    with pytest.raises(InputError, match="headroom.body.*did you mean 'pad'"):
        load_site(path)
