"""The largest scale of a body's height (decide/max_height.py).

Stress: Newmark (1935) corner influence factor of a uniformly loaded rectangle, I = 0.1752
at m = n = 1 as tabulated in standard foundation texts (recalled from memory), and the
closed form itself (tests/reference.py, written out independently of the kernels).
Settlement: Terzaghi 1-D consolidation on the e–log σ' law, compared with a brute-force scan
of scales and, for one sublayer, with the inverted closed form. Sites and soils are invented.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

import reference
from fillstress.decide.max_height import linear_scale, scale_at_limit, settlement_utilisation
from fillstress.errors import InputError
from fillstress.grid import LoadGrid
from fillstress.settlement import consolidation_settlement, sublayers
from fillstress.soil import SoilLayer, SoilProfile
from fillstress.solve import vertical_stress

# a 12 m × 8 m rectangle of 4 m × 4 m cells, south-west corner at (300, 500), 45 kPa
RECT = LoadGrid(np.full((2, 3), 45.0), x0=300.0, y0=500.0, dx=4.0, dy=4.0)
PROFILE = SoilProfile([SoilLayer("crust", 0, 2, 18.0, 19.0, modulus_kpa=8000),
                       SoilLayer("clay", 2, 12, 16.5, 17.0, cc=0.42, cr=0.05, e0=1.3,
                                 ocr=1.6)], water_table_m=1.5, gamma_w=9.81)


def test_newmark_table_value_at_m_n_one():
    # Newmark (1935): I = 0.1752 under the corner of a rectangle B = L = z (table value)
    assert float(reference.boussinesq_corner(1.0, 1.0, 1.0)) == pytest.approx(0.1752, abs=5e-5)


@pytest.mark.parametrize("point", [(300.0, 500.0, 6.0), (306.0, 504.0, 9.0), (304.0, 509.0, 4.0)])
def test_stress_ratio_scale_is_the_closed_form_of_one_rectangle(point):
    # Δσz/σ'v0 <= 0.1 (the common-practice 10 % criterion): the rectangle may be loaded to
    # q_max = 0.1·σ'v0 / I(point), so the factor on 45 kPa is q_max / 45
    x, y, z = point
    edges = [300.0 - x, 312.0 - x, 500.0 - y, 508.0 - y]
    influence = float(reference.rectangle(*edges, z))
    s0 = float(PROFILE.sigma_v0_eff([z])[0])
    expected = 0.1 * s0 / influence / 45.0
    ratio = vertical_stress(RECT, [point])[0] / s0
    found = scale_at_limit(lambda s: s * ratio / 0.1, rtol=1e-12)
    assert found.found and found.scale == pytest.approx(expected, rel=1e-9)
    assert found.utilisation == pytest.approx(1.0, abs=1e-9)
    exact, k = linear_scale([ratio], 0.1)
    assert exact == pytest.approx(expected, rel=1e-12) and k == 0


def test_linear_scale_with_other_loads_in_place_picks_the_first_receptor_to_reach_it():
    pts = np.array([[306.0, 504.0, 5.0], [318.0, 504.0, 5.0], [330.0, 504.0, 5.0]])
    body = vertical_stress(RECT, pts)
    other = vertical_stress(LoadGrid([[60.0]], 326.0, 500.0, 8.0, 8.0), pts)
    limit = np.array([40.0, 40.0, 40.0])
    scale, k = linear_scale(body, limit, other)
    # brute force: the smallest s at which some receptor reaches its limit
    s_grid = np.linspace(0, 3, 300001)
    reached = np.any(other[None] + s_grid[:, None] * body[None] >= limit, axis=1)
    first = s_grid[np.argmax(reached)]
    assert first - 1e-5 <= scale <= first + 1e-12
    assert np.max((other + scale * body) / limit) == pytest.approx(1.0, rel=1e-12)
    assert k == int(np.argmax((other + scale * body) / limit))


def test_settlement_scale_matches_a_brute_force_scan():
    # three points beside and under the rectangle, a second body in place; the clay is
    # lightly overconsolidated (OCR = 1.6) so the path crosses from Cr to Cc
    pts = np.array([[306.0, 504.0], [313.0, 504.0], [299.0, 510.0]])
    z, h = sublayers(PROFILE)
    xyz = np.column_stack([np.repeat(pts, z.size, axis=0), np.tile(z, len(pts))])
    body = vertical_stress(RECT, xyz).reshape(len(pts), z.size)
    other = vertical_stress(LoadGrid([[25.0]], 312.0, 498.0, 6.0, 12.0), xyz).reshape(body.shape)
    limit = np.array([0.15, 0.12, 0.10])
    f = settlement_utilisation(PROFILE, z, h, body, limit, other)
    found = scale_at_limit(f, start=0.5, rtol=1e-9)
    assert found.found and found.utilisation == pytest.approx(1.0, abs=1e-6)
    scan = np.linspace(0.0, 4.0, 8001)
    stacked = (other[None] + scan[:, None, None] * body[None]).reshape(-1, z.size)
    u = (consolidation_settlement(PROFILE, z, h, stacked).reshape(scan.size, -1) / limit).max(axis=1)
    i = int(np.argmax(u >= 1.0))
    assert i > 0 and scan[i - 1] < found.scale <= scan[i] + 1e-12
    assert found.evaluations < 40


def test_one_sublayer_scale_inverts_the_log_law():
    # s = h·Cc/(1+e0)·log10((σ'0 + k·Δσ)/σ'0) = limit  =>  k = σ'0·(10^(limit(1+e0)/(h·Cc)) − 1)/Δσ
    p = SoilProfile([SoilLayer("c", 0, 6, 10.0, cc=0.3, cr=0.03, e0=0.9, ocr=1.0)],
                    water_table_m=20.0)
    s0, dsz, h, lim = 40.0, 25.0, 2.0, 0.08
    k = s0 * (10 ** (lim * 1.9 / (h * 0.3)) - 1) / dsz
    found = scale_at_limit(settlement_utilisation(p, [4.0], [h], [[dsz]], lim), rtol=1e-12)
    assert found.scale == pytest.approx(k, rel=1e-10)


def test_edge_cases_of_the_search():
    assert scale_at_limit(lambda s: 1.2 + s).scale == 0.0            # already over
    r = scale_at_limit(lambda s: 1 - math.exp(-s) * 0.5 - 0.4, max_doublings=8)
    assert r.scale == math.inf and not r.found                       # tends to 0.6 < 1
    assert scale_at_limit(lambda s: (s / 1000.0) ** 3, start=0.01, rtol=1e-10).scale == \
        pytest.approx(1000.0, rel=1e-9)
    assert linear_scale([0.0, -2.0], 10.0) == (math.inf, -1)
    assert linear_scale([1.0, 2.0], 10.0, other=[12.0, 0.0]) == (0.0, 0)
    with pytest.raises(InputError, match="rtol"):
        scale_at_limit(lambda s: s, rtol=0.0)
    with pytest.raises(InputError, match="max_utilisation"):
        scale_at_limit(3.0)
    with pytest.raises(InputError, match="max_utilisation"):
        scale_at_limit(lambda s: float("nan"))
    with pytest.raises(InputError, match="limit"):
        linear_scale([1.0], [-1.0])
    with pytest.raises(InputError, match="limit_m"):
        settlement_utilisation(PROFILE, [5.0], [1.0], [[10.0]], 0.0)
