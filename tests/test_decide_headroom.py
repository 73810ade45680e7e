"""Headroom maps by reciprocity (decide/headroom.py).

Checks: the template placed for real at random cells and its stress computed with the direct
solver (solve/direct.py) reaches the governing limit at the mapped multiple (the issue asks
for 0.5 %; the method is exact, so 1e-8 is asserted); the reciprocal field against the slow
per-cell reference (tests/reference.py); the settlement linearisation against the full
Terzaghi 1-D model. Sites, loads and soils are invented.
"""
from __future__ import annotations

import numpy as np
import pytest

import reference
from fillstress.decide.headroom import (headroom_map, lowest_cells, placed_template,
                                        recheck_settlement, rectangle_template,
                                        settlement_headroom_map, settlement_sensitivity,
                                        template_influence)
from fillstress.errors import InputError
from fillstress.grid import GridSpec, LoadGrid
from fillstress.settlement import consolidation_settlement, sublayers
from fillstress.soil import SoilLayer, SoilProfile
from fillstress.solve import vertical_stress

SPEC = GridSpec(7200.0, 3100.0, 2.0, 2.0, 36, 28)          # a 72 m × 56 m yard
TEMPLATE = rectangle_template(9.0, 6.0, 80.0, 2.0, 2.0)    # 5 × 3 cells, part-covered edges
EXISTING = LoadGrid(np.full((6, 8), 55.0), 7230.0, 3120.0, 2.0, 2.0)


def _receptors(rng, n=14):
    # some at cell centres, some anywhere, two outside the map, depths 0.5–14 m
    x = rng.uniform(7195.0, 7280.0, n)
    y = rng.uniform(3095.0, 3162.0, n)
    x[:4] = 7201.0 + 2.0 * rng.integers(0, 36, 4)
    y[:4] = 3101.0 + 2.0 * rng.integers(0, 28, 4)
    return np.column_stack([x, y, rng.uniform(0.5, 14.0, n)])


def test_template_is_the_cell_average_of_the_rectangle():
    assert TEMPLATE.shape == (3, 5)
    assert TEMPLATE.sum() * 4.0 == pytest.approx(80.0 * 9.0 * 6.0)     # load is kept
    assert TEMPLATE[1, 2] == 80.0 and TEMPLATE[0, 0] == pytest.approx(80.0 * 0.75)   # x: 1.5 of 2 m


def test_reciprocal_field_equals_the_slow_reference_at_every_cell():
    spec = GridSpec(10.0, 20.0, 1.5, 1.0, 7, 5)
    t = np.array([[10.0, 30.0], [0.0, 20.0], [5.0, 5.0]])           # even width, uneven load
    pts = np.array([[14.3, 22.7, 2.5], [9.0, 26.2, 0.8], [14.3, 22.7, 4.0]])
    fields = dict(template_influence(t, spec, pts))
    for p, point in enumerate(pts):
        expected = np.empty(spec.shape)
        for j in range(spec.ny):
            for i in range(spec.nx):
                g = placed_template(t, spec, (j, i))
                expected[j, i] = reference.grid_stress(g.pressure, g.x0, g.y0, g.dx, g.dy,
                                                       [point])[0]
        np.testing.assert_allclose(fields[p], expected, rtol=1e-10, atol=1e-12)


@pytest.mark.parametrize("method, poisson", [("boussinesq", None), ("westergaard", 0.3)])
def test_mapped_multiple_reaches_the_governing_limit_when_placed_for_real(method, poisson):
    rng = np.random.default_rng(16)
    pts = _receptors(rng)
    limit = rng.uniform(40.0, 90.0, len(pts))
    current = vertical_stress(EXISTING, pts, method, poisson)
    hm = headroom_map(TEMPLATE, SPEC, pts, limit, current, method, poisson)
    assert hm.multiple.shape == SPEC.shape and not np.isnan(hm.multiple).any()
    cells = np.column_stack([rng.integers(0, SPEC.ny, 8), rng.integers(0, SPEC.nx, 8)])
    for cell in cells:
        m = hm.multiple[tuple(cell)]
        placed = placed_template(TEMPLATE, SPEC, cell)
        added = vertical_stress(placed.with_pressure(m * placed.pressure), pts, method, poisson)
        use = (current + added) / limit
        assert use.max() == pytest.approx(1.0, rel=1e-8)
        assert int(np.argmax(use)) == hm.governing[tuple(cell)]


def test_a_receptor_over_its_limit_leaves_no_room_where_the_template_reaches_it():
    pts = np.array([[7240.0, 3130.0, 3.0], [7210.0, 3110.0, 3.0]])
    hm = headroom_map(TEMPLATE, SPEC, pts, [30.0, 30.0], [31.0, 0.0])
    assert np.all(hm.multiple == 0.0) and np.all(hm.governing == 0)
    far = headroom_map(TEMPLATE, SPEC, [[7210.0, 3110.0, 0.0]], 30.0)   # surface: local only
    assert np.isinf(far.multiple).sum() > 0.9 * far.multiple.size
    assert np.all(far.governing[np.isinf(far.multiple)] == -1)


CLAY = SoilProfile([SoilLayer("sand", 0, 1.5, 18.5, 20.0, modulus_kpa=25000),
                    SoilLayer("clay", 1.5, 9.0, 16.0, 16.8, cc=0.38, cr=0.045, e0=1.15,
                              ocr=1.0, cv_m2_per_yr=2.0)], water_table_m=1.0)


def _settlement_case(profile):
    xy = np.array([[7236.0, 3116.0], [7250.0, 3131.0], [7221.0, 3143.0]])
    z, h = sublayers(profile, max_thickness=1.5)
    pts = np.column_stack([np.repeat(xy, z.size, axis=0), np.tile(z, len(xy))])
    now = vertical_stress(EXISTING, pts).reshape(len(xy), z.size)
    limit = np.array([0.35, 0.30, 0.25])
    return xy, z, h, pts, now, limit


def test_settlement_map_is_the_stated_linearisation_and_the_recheck_is_the_full_model():
    xy, z, h, pts, now, limit = _settlement_case(CLAY)
    current = consolidation_settlement(CLAY, z, h, now)
    sens = settlement_sensitivity(CLAY, z, h, now)
    hm = settlement_headroom_map(TEMPLATE, SPEC, xy, z, sens, limit, current)
    cells = lowest_cells(hm, 3)
    full = recheck_settlement(TEMPLATE, SPEC, cells, xy, CLAY, z, h, now, limit, rtol=1e-10)
    for cell, m_full in zip(cells, full):
        m = hm.multiple[tuple(cell)]
        added = vertical_stress(placed_template(TEMPLATE, SPEC, cell), pts).reshape(now.shape)
        linear = current + m * (sens * added).sum(axis=1)       # the linearisation, directly
        assert np.max(linear / limit) == pytest.approx(1.0, rel=1e-8)
        nonlinear = consolidation_settlement(CLAY, z, h, now + m_full * added)
        assert np.max(nonlinear / limit) == pytest.approx(1.0, rel=1e-7)
        # normally consolidated clay: the log law is concave, the linearisation is safe
        assert m_full > m


def test_on_linear_layers_the_linearisation_is_exact():
    mv = SoilProfile([SoilLayer("silt", 0, 9.0, 18.0, 19.0, mv_per_kpa=4e-4)], water_table_m=1.0)
    xy, z, h, _, now, limit = _settlement_case(mv)
    limit = limit / 10.0
    current = consolidation_settlement(mv, z, h, now)
    hm = settlement_headroom_map(TEMPLATE, SPEC, xy, z, settlement_sensitivity(mv, z, h, now),
                                 limit, current)
    cells = np.array([[3, 4], [20, 30], [14, 17]])
    full = recheck_settlement(TEMPLATE, SPEC, cells, xy, mv, z, h, now, limit, rtol=1e-10)
    np.testing.assert_allclose(full, hm.multiple[cells[:, 0], cells[:, 1]], rtol=1e-6)


def test_bad_inputs_are_named():
    with pytest.raises(InputError, match="template"):
        headroom_map([[-1.0, 5.0]], SPEC, [[7210.0, 3110.0, 2.0]], 10.0)
    with pytest.raises(InputError, match="template"):
        headroom_map([[0.0]], SPEC, [[7210.0, 3110.0, 2.0]], 10.0)
    with pytest.raises(InputError, match="spec"):
        headroom_map(TEMPLATE, (0, 0, 1, 1), [[7210.0, 3110.0, 2.0]], 10.0)
    with pytest.raises(InputError, match="limit_kpa"):
        headroom_map(TEMPLATE, SPEC, [[7210.0, 3110.0, 2.0]], 0.0)
    with pytest.raises(InputError, match="points"):
        headroom_map(TEMPLATE, SPEC, [[7210.0, 3110.0, -2.0]], 10.0)
    with pytest.raises(InputError, match="sensitivity"):
        settlement_headroom_map(TEMPLATE, SPEC, [[7210.0, 3110.0]], [2.0, 3.0], [[1e-3]], 0.05)


def test_sensitivity_is_the_tangent_or_the_secant_of_the_log_law():
    # one NC sublayer, h = 2 m at 3 m in clay: ds/dσ' = Cc·h/((1+e0)·ln10·σ'0) (derivative of
    # Terzaghi's log law); a 40 kPa step gives the secant h·Cc/(1+e0)·log10((σ'0+40)/σ'0)/40
    p = SoilProfile([SoilLayer("c", 0, 6, 10.0, cc=0.3, cr=0.03, e0=0.9, ocr=1.0)],
                    water_table_m=20.0)
    tangent = settlement_sensitivity(p, [3.0], [2.0], [[0.0]])[0, 0]
    assert tangent == pytest.approx(0.3 * 2 / (1.9 * np.log(10) * 30.0), rel=1e-4)
    secant = settlement_sensitivity(p, [3.0], [2.0], [[0.0]], step_kpa=40.0)[0, 0]
    assert secant == pytest.approx(2 * 0.3 / 1.9 * np.log10(70 / 30) / 40, rel=1e-12)
    with pytest.raises(InputError, match="step_kpa"):
        settlement_sensitivity(p, [3.0], [2.0], [[0.0]], step_kpa=0.0)


def _first_reached(quantity, limit, hi=1e3) -> float:
    """Slow reference: the least m >= 0 with quantity(m) >= limit, by a scan and bisection
    (inf when not reached by `hi`)."""
    grid = np.concatenate([[0.0], np.geomspace(1e-6, hi, 4000)])
    over = np.flatnonzero([quantity(m) >= limit for m in grid])
    if not len(over):
        return np.inf
    if over[0] == 0:
        return 0.0
    lo, up = grid[over[0] - 1], grid[over[0]]
    for _ in range(80):
        mid = 0.5 * (lo + up)
        lo, up = (lo, mid) if quantity(mid) >= limit else (mid, up)
    return up


def _pair_operator(n: int) -> np.ndarray:
    """Rows s_a − s_b of every pair of n points: two non-zeros a row."""
    a, b = np.triu_indices(n, 1)
    op = np.zeros((len(a), n))
    op[np.arange(len(a)), a], op[np.arange(len(a)), b] = 1.0, -1.0
    return op


@pytest.mark.parametrize("norm,kind", [(False, "dense"), (True, "dense"), (False, "pairs")])
def test_a_combination_map_is_where_the_quantity_first_reaches_its_limit(norm, kind):
    """combination_headroom_map against a brute-force search of m on each cell, for random
    operators (dense, or the pair differences a pipe's limit makes), responses of either
    sign and a present state (rows chunked: 2 cells a chunk)."""
    from fillstress.decide.headroom import combination_headroom_map
    rng = np.random.default_rng(21)
    spec = GridSpec(0.0, 0.0, 1.0, 1.0, 4, 3)
    op = rng.normal(size=(2 if norm else 5, 6)) if kind == "dense" else _pair_operator(6)
    response = rng.normal(size=(6,) + spec.shape) * 1e-3
    response[:, 0, 0] = 0.0                                   # a cell the load does not reach
    current = rng.normal(size=6) * 1e-3
    limit = 1.5 * float(np.abs(op @ current).max()) if not norm else 1.5 * float(
        np.hypot(*(op @ current)))
    found = combination_headroom_map(spec, op, response, current, limit, norm=norm,
                                     cells_per_chunk=2 * spec.nx * spec.ny)
    for j in range(spec.ny):
        for i in range(spec.nx):
            def quantity(m):
                q = op @ (current + m * response[:, j, i])
                return float(np.hypot(*q)) if norm else float(np.abs(q).max())
            expected = _first_reached(quantity, limit)
            assert found.multiple[j, i] == pytest.approx(expected, rel=1e-9)
            if not norm and np.isfinite(expected):
                q = op @ (current + expected * response[:, j, i])
                assert found.governing[j, i] == int(np.argmax(np.abs(q)))
    assert found.multiple[0, 0] == np.inf and found.governing[0, 0] == -1


def test_a_combination_already_over_its_limit_has_no_headroom():
    from fillstress.decide.headroom import combination_headroom_map
    spec = GridSpec(0.0, 0.0, 1.0, 1.0, 2, 1)
    response = np.array([[[1e-3, 0.0]], [[0.0, 0.0]]])
    for norm in (False, True):
        m = combination_headroom_map(spec, [[1.0, -1.0], [0.5, 0.5]], response, [0.03, 0.0],
                                     0.02, norm=norm)
        assert m.multiple.tolist() == [[0.0, np.inf]]


def test_sparse_rows_apply_as_the_dense_operator():
    from fillstress.decide.headroom import apply_rows, sparse_rows
    rng = np.random.default_rng(4)
    values = rng.normal(size=(7, 5, 3))
    for op in (_pair_operator(7), rng.normal(size=(3, 7))):
        np.testing.assert_allclose(apply_rows(sparse_rows(op), values),
                                   np.einsum("en,nyx->eyx", op, values), rtol=1e-13,
                                   atol=1e-15)
