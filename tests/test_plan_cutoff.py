"""The plan-grid settlement analyses only the nodes where Δσz can reach the stated cut-off
(1 % of the largest applied pressure); the rest are nodata. Slow reference: the same
computation over every node of the box (cut-off 0), as before the cut-off.

Invented site "Kestle Moor bend": an L-shaped fill 4 m high in two lifts (the second
removed on day 120) with a wide margin, over 9 m of soft clay on rock.
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from fillstress.run import compute, settle
from fillstress.site.build import load_site

SITE = """\
[site]
name = "Kestle Moor bend"
crs = "EPSG:25832"
units = "SI"

[grid]
cell = 4.0
margin = 160.0
method = "{method}"
{poisson}
convergence_check = false

[bodies.leg]
kind = "footprint"
outline = [[500000.0, 6000000.0], [500120.0, 6000000.0], [500120.0, 6000030.0], [500030.0, 6000030.0], [500030.0, 6000110.0], [500000.0, 6000110.0]]
height = 3.0
unit_weight = 20.0

[bodies.lift]
kind = "footprint"
outline = [[500000.0, 6000000.0], [500030.0, 6000000.0], [500030.0, 6000030.0], [500000.0, 6000030.0]]
height = 1.0
unit_weight = 19.0
stage = 2
removal_day = 120

[settlement]
stage_days = [0, 40]

[[plan_grids]]
name = "bend"
depths = [3.0]

[soil]
water_table = 1.0
rigid_base = 10.0

[[soil.layers]]
name = "crust"
top = 0.0
bottom = 1.0
unit_weight = 18.0
saturated_unit_weight = 19.0
modulus = 10000.0

[[soil.layers]]
name = "soft clay"
top = 1.0
bottom = 10.0
unit_weight = 16.5
saturated_unit_weight = 16.5
cc = 0.45
cr = 0.06
e0 = 1.4
ocr = 1.2
"""


@pytest.fixture(scope="module", params=["boussinesq", "westergaard"])
def site(tmp_path_factory, request):
    path = tmp_path_factory.mktemp("cutoff") / "site.toml"
    poisson = "poisson = 0.2" if request.param == "westergaard" else ""
    path.write_text(SITE.format(method=request.param, poisson=poisson))
    return load_site(path)


def _slices_at(site):
    return lambda plan, z, g: compute._plan_slices(site, g, replace(plan, depths=z))


def _full_box(site, monkeypatch):
    with monkeypatch.context() as m:
        m.setattr(settle, "NEGLIGIBLE_FRACTION", 0.0)
        return compute.plan_settlement(site)["bend"]


def test_analysed_nodes_equal_the_full_box(site, monkeypatch):
    cut = compute.plan_settlement(site)["bend"]
    full = _full_box(site, monkeypatch)
    analysed = cut.notnull().values
    assert full.notnull().values.all() and full.attrs["not_analysed_nodes"] == 0
    assert 0 < cut.attrs["not_analysed_nodes"] == (~analysed).sum() < 0.9 * analysed.size
    np.testing.assert_allclose(cut.values[analysed], full.values[analysed], rtol=1e-9, atol=0)


def test_left_out_nodes_are_below_the_cut_off(site, monkeypatch):
    cut = compute.plan_settlement(site)["bend"]
    full = _full_box(site, monkeypatch)
    left = cut.isnull().values
    z, _ = settle.st.sublayers(site.soil)
    for g in [site.load_grid(k) for k in site.stages]:
        dsz = np.abs(_slices_at(site)(site.plan_grids[0], tuple(z), g).values)   # (K, y, x)
        assert dsz[:, left].max() < cut.attrs["not_analysed_below_kpa"]
    assert np.all(np.abs(full.values[left]) <= cut.attrs["not_analysed_settlement_bound_m"])
    assert cut.attrs["not_analysed_settlement_bound_m"] > 0


def test_stress_bound_is_above_the_stress_everywhere(site):
    """The bound holds at every node and depth, not only where it decides."""
    g = site.load_grid()
    z = (0.5, 3.0, 9.5)
    da = _slices_at(site)(site.plan_grids[0], z, g)
    bound = settle.stress_bound(site, [g], da.x.values, da.y.values, max(z))
    assert np.all(np.abs(da.values) <= bound[None, :, :] * (1 + 1e-12))
    assert np.isfinite(bound).any() and np.isinf(bound).any()


def test_cut_off_note_is_in_the_sites_units():
    import xarray as xr

    from fillstress.run.compute import _plan_cutoff_notes
    from fillstress.units import US
    da = xr.DataArray(np.zeros((4, 5)), dims=("y", "x"), attrs={
        "not_analysed_nodes": 7, "not_analysed_below_kpa": 0.4788026,   # 10 psf
        "not_analysed_settlement_bound_m": 0.00254})                   # 0.1 in
    (note,) = _plan_cutoff_notes({"levee": da}, US)
    assert note == ("plan grid 'levee': 7 of 20 nodes left as nodata (Δσz < 10 psf at every "
                    "sublayer, settlement there ≤ 0.1 in)")
    assert _plan_cutoff_notes({"levee": da.assign_attrs(not_analysed_nodes=0)}, US) == []
