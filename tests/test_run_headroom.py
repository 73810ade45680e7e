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
        kind, rid, point, limit, _ = found.receptors[found.governing[j, i]]
        assert (rid, limit) == (governing.receptor_id, governing.limit.label)


def test_a_template_body_that_is_not_on_the_site_is_named(tmp_path):
    path = tmp_path / "site.toml"
    path.write_text(SITE.format(extra="").replace(
        'kind = "rectangle"\nsize_x = 6.0\nsize_y = 6.0\npressure = 50.0',
        'kind = "body"\nbody = "pda"'))
    from fillstress.errors import InputError
    with pytest.raises(InputError, match="headroom.body.*did you mean 'pad'"):
        load_site(path)


# Overconsolidated clay (OCR 1.4): a further load carries the clay past σ'p, where the
# tangent of the e–log σ' law underestimates the settlement, so the linearised settlement
# map allows too much. Invented site and soil.
CLAY_SITE = """
[site]
name = "Holm Ings depot"
crs = "EPSG:32630"
[grid]
cell = 2.0
margin = 8.0
convergence_check = false
[bodies.heap]
kind = "footprint"
outline = [[440000, 5900000], [440016, 5900000], [440016, 5900012], [440000, 5900012]]
height = 3.0
unit_weight = 10.0
{extra}
[[buildings]]
id = "hall"
outline = [[440030, 5899996], [440046, 5899996], [440046, 5900010], [440030, 5900010]]
foundation_depth = 0.8
interior_spacing = 4.0
[soil]
water_table = 1.0
rigid_base = 12.0
[[soil.layers]]
name = "soft silty clay"
top = 0.0
bottom = 12.0
unit_weight = 17.0
saturated_unit_weight = 17.5
cc = 0.45
cr = 0.06
e0 = 1.2
ocr = 1.4
cv = 1.5
[limits]
published = false
settlement = 40.0
[headroom]
kind = "rectangle"
size_x = 6.0
size_y = 6.0
pressure = 50.0
recheck = 6
"""


def _clay_site(tmp_path, extra=""):
    path = tmp_path / "clay.toml"
    path.write_text(CLAY_SITE.format(extra=extra))
    return load_site(path)


def _settlement_use_with_template(tmp_path, spec, cell, multiple) -> float:
    """The hall's settlement ÷ its limit with the 6 m × 6 m template placed for real."""
    j, i = cell
    cx, cy = spec.x_centres[i], spec.y_centres[j]
    body = (f'[bodies.placed]\nkind = "footprint"\nunit_weight = 10.0\n'
            f'height = {5.0 * float(multiple)!r}\noutline = [[{cx - 3}, {cy - 3}], [{cx + 3}, '
            f'{cy - 3}], [{cx + 3}, {cy + 3}], [{cx - 3}, {cy + 3}]]')
    rows = compute(_clay_site(tmp_path, body)).limits.rows
    return max(r.row.utilisation for r in rows if r.row.limit.quantity == "settlement")


def test_on_overconsolidated_clay_the_map_is_scaled_safe_by_its_rechecks(tmp_path):
    res = compute(_clay_site(tmp_path))
    found, spec = res.headroom, res.headroom.spec
    checks = found.checks
    assert set(checks["selection"]) == {"lowest", "spread"} and len(checks) == 6
    ratio = checks["settlement_ratio"].to_numpy()
    assert found.unsafe and found.factor == pytest.approx(ratio.min()) and found.factor < 0.9
    assert any("may be unsafe" in w for w in res.warnings)
    # re-checked cells hold their full-model value, the others the linearisation × factor
    rc = np.column_stack([np.searchsorted(spec.y_centres, checks["y"]),
                          np.searchsorted(spec.x_centres, checks["x"])])
    np.testing.assert_allclose(found.multiple[rc[:, 0], rc[:, 1]], checks["full_multiple"])
    settlement = np.array([[found.receptors[g][3] == "settlement" if g >= 0 else False
                            for g in row] for row in found.governing])
    others = settlement.copy()
    others[rc[:, 0], rc[:, 1]] = False
    np.testing.assert_allclose(found.multiple[others],
                               found.linearised[others] * found.factor, rtol=1e-12)
    # placed for real: the full multiple reaches the limit, the scaled map stays within it
    # where the linearisation alone goes past it
    lowest = rc[checks["selection"].to_numpy() == "lowest"][0]
    assert _settlement_use_with_template(tmp_path, spec, lowest, found.multiple[tuple(lowest)]
                                         ) == pytest.approx(1.0, rel=2e-3)
    rng = np.random.default_rng(3)
    near = np.argwhere(others & (found.linearised < 3 * np.nanmin(found.linearised)))
    for cell in near[rng.choice(len(near), 2, replace=False)]:
        cell = tuple(cell)
        assert _settlement_use_with_template(tmp_path, spec, cell, found.multiple[cell]) <= 1.0
        assert _settlement_use_with_template(tmp_path, spec, cell, found.linearised[cell]) > 1.02


def test_a_run_states_the_headroom_in_its_summary_and_on_the_console(tmp_path, capsys):
    import json
    from fillstress.cli import main
    path = tmp_path / "clay.toml"
    path.write_text(CLAY_SITE.format(extra=""))
    assert main(["run", str(path), "-o", str(tmp_path / "out"), "--no-report"]) == 0
    printed = capsys.readouterr().out
    capsys_lines = [" ".join(t.split()) for t in printed.splitlines()]
    out = " ".join(printed.split())
    summary = json.loads((tmp_path / "out" / "summary.json").read_text())["headroom"]
    least = summary["least"]
    assert summary["template"] == "rectangle 6 m × 6 m at 50 kPa"
    assert summary["governing_limit_type"] == "settlement" == least["limit_type"]
    assert least["receptor_id"] == "hall" and least["height_m"] is None
    assert summary["rechecked_cells"] == 6 and summary["linearisation_unsafe"] is True
    assert summary["settlement_scale_applied"] == summary["worst_settlement_full_over_linearised"]
    import rasterio
    with rasterio.open(tmp_path / "out" / "headroom.tif") as src:
        band = src.read(1, masked=True)
    assert float(band.min()) == pytest.approx(least["multiple"], rel=1e-6)
    assert (tmp_path / "out" / "headroom_linearised.tif").is_file()
    line = next(t for t in capsys_lines if t.startswith("headroom: least"))
    assert line == f"headroom: least × {least['multiple']:.3g}, settlement at hall"
    assert "settlement-governed values between re-checked cells are linearised and may be unsafe" in out


def _headroom_section(folder) -> str:
    html = (folder / "report.html").read_text(encoding="utf-8")
    section = html[html.index('<section id="headroom"'):]
    return section[:section.index("</section>")]


def test_the_report_draws_the_map_and_the_rechecks_and_cautions_on_settlement(tmp_path):
    import base64
    import io
    import re
    import pandas as pd
    from PIL import Image
    from fillstress.run.compute import run_site_file
    path = tmp_path / "clay.toml"
    path.write_text(CLAY_SITE.format(extra=""))
    run_site_file(path, tmp_path / "out")
    section = _headroom_section(tmp_path / "out")
    assert "<strong>Settlement-governed values between re-checked cells are linearised and " \
           "may be unsafe.</strong>" in section
    assert "scaled by" in section and "headroom_linearised.tif" in section
    png = re.search(r'src="data:image/png;base64,([^"]+)"', section).group(1)
    assert Image.open(io.BytesIO(base64.b64decode(png))).size[0] > 500
    checks = pd.read_csv(tmp_path / "out" / "headroom_checks.csv", encoding="utf-8-sig")
    table = section[section.index("Cells re-checked on the full settlement model"):]
    assert table.count("<tr>") == len(checks) + 1          # a row per re-check, and the head
    for value in checks["full_multiple"]:
        assert f">{value:.4g}<" in table


def test_a_map_governed_by_stress_alone_carries_no_settlement_caution(tmp_path):
    from fillstress.run.compute import run_site_file
    path = tmp_path / "site.toml"
    path.write_text(SITE.format(extra=""))
    run_site_file(path, tmp_path / "out")
    section = _headroom_section(tmp_path / "out")
    assert "may be unsafe" not in section and "Least headroom" in section
    assert "stress_increase at borehole BH-T1 governs." in section


PILE = """
[headroom]
kind = "pile"
{toe}
height = {height}
repose_angle = 34.0
unit_weight = 21.0
"""


def _pile_site(tmp_path, toe="diameter = 9.0", height=2.5, extra=""):
    text = SITE.format(extra=extra)
    text = text[:text.index("[headroom]")] + PILE.format(toe=toe, height=height)
    path = tmp_path / "pile.toml"
    path.write_text(text)
    return path


@pytest.mark.parametrize("toe", ["diameter = 9.0", "size_x = 10.0\nsize_y = 8.0"])
def test_a_pile_template_placed_for_real_as_a_pile_reaches_the_limit_at_the_mapped_multiple(
        tmp_path, toe):
    """m times the pile's thickness is the pile with tan(angle) and height times m: a pile
    body of the site built by the body builder at the analysis cells."""
    import math
    import shapely
    from fillstress.site.build import load_site
    site = load_site(_pile_site(tmp_path, toe))
    found = compute(site).headroom
    spec, pile = found.spec, site.settings.headroom.pile
    rng = np.random.default_rng(8)
    finite = np.argwhere(np.isfinite(found.multiple) & (found.multiple > 0.05))
    for j, i in finite[rng.choice(len(finite), 2, replace=False)]:
        m = float(found.multiple[j, i])
        toe_here = shapely.affinity.translate(pile.toe(), spec.x_centres[i], spec.y_centres[j])
        ring = [list(c) for c in toe_here.exterior.coords[:-1]]
        angle = math.degrees(math.atan(m * math.tan(math.radians(pile.repose_angle))))
        body = (f'[bodies.placed]\nkind = "pile"\nunit_weight = 21.0\nrepose_angle = {angle!r}\n'
                f'crest_height = {m * pile.height!r}\noutline = {ring!r}')
        res = compute(load_site(_pile_site(tmp_path, toe, extra=body)))
        assert res.limits.governing.row.utilisation == pytest.approx(1.0, rel=1e-3)
    assert found.template_height == 2.5
    np.testing.assert_allclose(found.height, 2.5 * found.multiple)


@pytest.mark.parametrize("toe, height, key, message", [
    ("diameter = 9.0\nsize_x = 4.0", 2.5, "headroom.size_x", "size_x and size_y, or diameter"),
    ("size_x = 4.0", 1.0, "headroom.size_x", "given: size_x"),
    ("diameter = 9.0", 3.5, "headroom.height", "higher than the 3.04 m its toe reaches at 34°"),
    ("diameter = 9.0\nrepose_angel = 30", 2.5, "headroom.repose_angel",
     "did you mean 'repose_angle'"),
])
def test_a_wrong_pile_template_is_refused_in_one_line(tmp_path, toe, height, key, message):
    from fillstress.errors import InputError
    with pytest.raises(InputError, match=message) as err:
        load_site(_pile_site(tmp_path, toe, height))
    assert f"[{key}]" in str(err.value) and "\n" not in str(err.value)


def test_a_misspelt_template_kind_is_named_with_the_nearest(tmp_path):
    from fillstress.errors import InputError
    path = _pile_site(tmp_path)
    path.write_text(path.read_text().replace('kind = "pile"', 'kind = "piel"'))
    with pytest.raises(InputError, match=r"headroom.kind.*did you mean 'pile'"):
        load_site(path)


MAPPED = ("stress_increase", "stress_ratio", "settlement", "angular_distortion")


def _mapped_use(res) -> tuple[float, str]:
    """The largest utilisation of a mapped limit in a run, and that limit's label."""
    rows = [r.row for r in res.limits.rows if r.row.limit.quantity in MAPPED]
    top = max(rows, key=lambda r: r.utilisation)
    return top.utilisation, top.limit.label


def _distortion_site(tmp_path, soil, extra=""):
    """The clay site with the published building limits (Bjerrum's 1/500 among them) and
    no settlement limit of its own: the hall's angular distortion governs the map."""
    text = CLAY_SITE.format(extra=extra).replace("published = false\nsettlement = 40.0\n", "")
    text = text[:text.index("[[soil.layers]]")] + soil + text[text.index("[limits]"):]
    path = tmp_path / "beta.toml"
    path.write_text(text)
    return load_site(path)


SILT = """[[soil.layers]]
name = "silt"
top = 0.0
bottom = 12.0
unit_weight = 17.5
saturated_unit_weight = 18.0
mv = 0.0004
"""
OC_CLAY = CLAY_SITE[CLAY_SITE.index("[[soil.layers]]"):CLAY_SITE.index("[limits]")]


def _placed(spec, cell, multiple) -> str:
    j, i = cell
    cx, cy = spec.x_centres[i], spec.y_centres[j]
    return (f'[bodies.placed]\nkind = "footprint"\nunit_weight = 10.0\n'
            f'height = {5.0 * float(multiple)!r}\noutline = [[{cx - 3}, {cy - 3}], [{cx + 3}, '
            f'{cy - 3}], [{cx + 3}, {cy + 3}], [{cx - 3}, {cy + 3}]]')


def test_on_a_linear_soil_the_distortion_map_is_exact_when_the_template_is_placed_for_real(
        tmp_path):
    """β is linear in the settlements and mv settlement linear in Δσz: the mapped multiple
    is the one at which the first mapped limit is reached with the template placed for real,
    and the full re-checks agree with the map."""
    found = compute(_distortion_site(tmp_path, SILT)).headroom
    spec = found.spec
    labels = {found.receptors[g][3] for g in np.unique(found.governing[found.governing >= 0])}
    assert "beta_no_cracking" in labels
    checks = found.checks
    np.testing.assert_allclose(checks["full_multiple"], checks["linearised_multiple"], rtol=1e-5)
    assert found.factor == 1.0
    rng = np.random.default_rng(11)
    beta = np.argwhere(np.vectorize(lambda g: g >= 0 and found.receptors[g][3] ==
                                    "beta_no_cracking")(found.governing)
                       & (found.multiple > 0.05))
    for cell in beta[rng.choice(len(beta), 2, replace=False)]:
        m = found.multiple[tuple(cell)]
        use, label = _mapped_use(compute(_distortion_site(tmp_path, SILT, _placed(spec, cell, m))))
        assert use == pytest.approx(1.0, rel=2e-3) and label == "beta_no_cracking"


def test_on_overconsolidated_clay_the_distortion_recheck_is_the_full_model(tmp_path):
    """A lowest re-checked cell holds its full-model multiple: the template placed there
    for real reaches the hall's angular distortion limit."""
    found = compute(_distortion_site(tmp_path, OC_CLAY)).headroom
    spec = found.spec
    row = found.checks[found.checks["selection"] == "lowest"].iloc[0]
    cell = (int(np.searchsorted(spec.y_centres, row["y"])),
            int(np.searchsorted(spec.x_centres, row["x"])))
    assert found.multiple[cell] == pytest.approx(row["full_multiple"])
    use, label = _mapped_use(compute(_distortion_site(tmp_path, OC_CLAY,
                                                      _placed(spec, cell, row["full_multiple"]))))
    assert use == pytest.approx(1.0, rel=2e-3) and label.startswith("beta")


# The limits linear in a receptor's point settlements (issue 16): differential settlement
# of a building (any two points) and of a pipe (within a length), a building's tilt and a
# pipe's curvature. Invented site: a ballast heap in place beside a cabin and a gas main.
SIDINGS = """
[site]
name = "Wrenfold sidings"
crs = "EPSG:32630"
[grid]
cell = 2.0
margin = 8.0
convergence_check = false
[bodies.ballast]
kind = "footprint"
outline = [[450000, 5800000], [450014, 5800000], [450014, 5800010], [450000, 5800010]]
height = 2.5
unit_weight = 16.0
{extra}
[[buildings]]
id = "cabin"
outline = [[450024, 5799998], [450034, 5799998], [450034, 5800006], [450024, 5800006]]
foundation_depth = 0.6
interior_spacing = 4.0
[[pipes]]
id = "gas_main"
line = [[449996, 5800018], [450040, 5800020]]
crown_depth = 1.2
diameter = 0.3
spacing = 2.0
differential_length = 6.0
[soil]
water_table = 1.5
rigid_base = 10.0
{soil}
[limits]
published = false
{limits}
[headroom]
kind = "rectangle"
size_x = 6.0
size_y = 6.0
pressure = 50.0
recheck = 4
"""
SIDINGS_SILT = SILT.replace("bottom = 12.0", "bottom = 10.0").replace("0.0004", "0.0003")
SIDINGS_CLAY = OC_CLAY.replace("bottom = 12.0", "bottom = 10.0")
# (limits text, the limit label and quantity it maps): each alone, so that it governs
LINEAR_LIMITS = [
    ("differential_settlement = 10.0", "differential_settlement", "differential_settlement"),
    ("tilt = 0.001", "tilt", "tilt"),
    ("pipe_differential = 5.0\npipe_differential_length = 4.0", "pipe_differential",
     "differential_settlement"),
    ("pipe_radius_min = 2000.0", "pipe_radius_min", "pipe_curvature"),
]


def _sidings(tmp_path, limits, soil=SIDINGS_SILT, extra=""):
    path = tmp_path / "sidings.toml"
    path.write_text(SIDINGS.format(extra=extra, soil=soil, limits=limits))
    return load_site(path)


def _use_of(res, receptor_id, label) -> tuple[float, float]:
    """(utilisation of `label` at `receptor_id`, largest utilisation of the run)."""
    rows = [r.row for r in res.limits.rows]
    mine = [r.utilisation for r in rows if (r.receptor_id, r.limit.label) == (receptor_id, label)]
    return max(mine), max(r.utilisation for r in rows)


@pytest.mark.parametrize("limits, label, quantity", LINEAR_LIMITS)
def test_on_a_linear_soil_each_linear_settlement_limit_is_reached_at_the_mapped_multiple(
        tmp_path, limits, label, quantity):
    """mv settlement is linear in Δσz and each quantity linear in the settlements: the map is
    the brute force (the full re-checks agree with it), and the template placed for real at
    random cells governed by the limit reaches it at the mapped multiple."""
    found = compute(_sidings(tmp_path, limits)).headroom
    kinds = {found.receptors[g][3:] for g in np.unique(found.governing[found.governing >= 0])}
    assert kinds == {(label, quantity)}
    np.testing.assert_allclose(found.checks["full_multiple"],
                               found.checks["linearised_multiple"], rtol=1e-5)
    assert found.factor == 1.0
    rng = np.random.default_rng(16)
    cells = np.argwhere(np.isfinite(found.multiple) & (found.multiple > 0.05)
                        & (found.multiple < 20))
    for cell in cells[rng.choice(len(cells), 2, replace=False)]:
        rid = found.receptors[found.governing[tuple(cell)]][1]
        res = compute(_sidings(tmp_path, limits,
                               extra=_placed(found.spec, cell, found.multiple[tuple(cell)])))
        use, top = _use_of(res, rid, label)
        assert use == pytest.approx(1.0, rel=5e-3) and top == pytest.approx(use)


@pytest.mark.parametrize("limits, label, quantity", LINEAR_LIMITS)
def test_on_overconsolidated_clay_each_linear_settlement_limit_is_rechecked_on_the_full_model(
        tmp_path, limits, label, quantity):
    """OCR 1.4 clay: the lowest re-checked cell holds its full-model multiple, which the
    template placed for real reaches; the other settlement-governed cells are the
    linearisation times the factor of the re-checks."""
    found = compute(_sidings(tmp_path, limits, SIDINGS_CLAY)).headroom
    spec, checks = found.spec, found.checks
    row = checks[checks["selection"] == "lowest"].iloc[0]
    cell = (int(np.searchsorted(spec.y_centres, row["y"])),
            int(np.searchsorted(spec.x_centres, row["x"])))
    assert found.multiple[cell] == pytest.approx(row["full_multiple"])
    assert found.factor == (found.worst_ratio if found.unsafe else 1.0)
    rc = np.column_stack([np.searchsorted(spec.y_centres, checks["y"]),
                          np.searchsorted(spec.x_centres, checks["x"])])
    others = np.isfinite(found.linearised)
    others[rc[:, 0], rc[:, 1]] = False
    np.testing.assert_allclose(found.multiple[others], found.linearised[others] * found.factor,
                               rtol=1e-12)
    rid = found.receptors[found.governing[cell]][1]
    res = compute(_sidings(tmp_path, limits, SIDINGS_CLAY,
                           _placed(spec, cell, row["full_multiple"])))
    use, top = _use_of(res, rid, label)
    assert use == pytest.approx(1.0, rel=5e-3) and top == pytest.approx(use)
