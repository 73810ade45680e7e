"""Batch runs over variants and their envelope."""
import json

import numpy as np
import pandas as pd
import pytest

from fillstress.run.batch import apply_variant, read_variants, Variant
from fillstress.cli import main
from fillstress.errors import InputError
from fillstress.examples import example_site
from fillstress.run.compute import compute
from fillstress.site.build import load_site
from fillstress.units import SI

VARIANTS = """
[[variants]]
name = "as_designed"

[[variants]]
name = "heavy"
unit_weight_factor = 1.25

[[variants]]
name = "taller"
height_factor = 1.5
water_table = 0.5
"""


@pytest.fixture(scope="module")
def batch(tmp_path_factory):
    root = tmp_path_factory.mktemp("batch")
    (root / "variants.toml").write_text(VARIANTS)
    out = root / "out"
    code = main(["batch", str(example_site("preload_surcharge")), str(root / "variants.toml"),
                 "-o", str(out), "--quiet", "--no-report"])
    assert code == 0
    return out


def _points(folder):
    return pd.read_csv(folder / "boreholes_points.csv")


def test_each_variant_has_a_complete_results_folder(batch):
    for name in ("as_designed", "heavy", "taller"):
        assert (batch / name / "manifest.json").is_file()
        assert (batch / name / "boreholes_points.csv").is_file()
    assert (batch / "manifest.json").is_file()


def test_stress_scales_linearly_with_unit_weight_and_height(batch):
    # Elastic superposition: Δσz is linear in the surface pressure γ·t (exact up to the
    # round-off of summing signed corner terms, ~1e-15 of the applied pressure); the CSV
    # keeps 6 significant digits, so each side carries up to 5e-6 of its value.
    base = _points(batch / "as_designed")["dsz_kPa"]
    for name, factor in (("heavy", 1.25), ("taller", 1.5)):
        np.testing.assert_allclose(_points(batch / name)["dsz_kPa"], factor * base,
                                   rtol=1.1e-5, atol=1e-12)


def test_as_designed_variant_equals_a_plain_run():
    site = load_site(example_site("preload_surcharge"))
    plain = compute(site).points
    same = compute(apply_variant(site, Variant("as_designed"))).points
    pd.testing.assert_frame_equal(plain, same)


def test_envelope_is_the_largest_value_of_any_variant(batch):
    # the envelope covers every receptor point; compare its borehole points
    env = pd.read_csv(batch / "envelope_points.csv").set_index("point_id")
    holes = _points(batch / "as_designed")["point_id"]
    stacked = np.vstack([_points(batch / n)["dsz_kPa"] for n in ("as_designed", "heavy", "taller")])
    np.testing.assert_allclose(env.loc[holes, "dsz_kPa"], stacked.max(axis=0), rtol=1e-12)
    assert set(env["variant_of_max_dsz"]) == {"taller"}        # 1.5 > 1.25 everywhere
    # each column names the variant of its own maximum (settlement and stress ratio too)
    names = ["as_designed", "heavy", "taller"]
    for col in ("settlement_mm", "stress_ratio"):
        values = np.vstack([_points(batch / n)[col] for n in names])
        have = ~np.isnan(values).all(axis=0)
        expected = np.array(names)[np.nanargmax(np.where(np.isnan(values), -np.inf, values),
                                                 axis=0)]
        got = env.loc[holes, f"variant_of_max_{col.removesuffix('_mm')}"].fillna("").to_numpy()
        assert have.any() and (got[have] == expected[have]).all(), col
        assert (got[~have] == "").all()


def test_higher_water_table_lowers_effective_stress(batch):
    base = _points(batch / "as_designed")
    wet = _points(batch / "taller")
    deep = (base["depth_m"] > 1.0) & base["sigma_v0_kPa"].notna()   # below both water tables
    assert deep.sum() > 10
    assert (wet.loc[deep, "sigma_v0_kPa"] < base.loc[deep, "sigma_v0_kPa"]).all()


@pytest.mark.parametrize("text, words", [
    ("[[variants]]\nname = \"a\"\nunit_weight_factr = 1.1\n", "did you mean 'unit_weight_factor'"),
    ("[[variants]]\nname = \"a\"\nheight_factor = -1\n", r"height_factor\] must be > 0"),
    ("[[variants]]\nname = \"a\"\n[[variants]]\nname = \"a\"\n", "unique"),
    ("[[variants]]\nname = \"a b\"\n", "needs a name"),
    ("[[variants]]\nname = \"a\"\nmethod = \"elastic\"\n", "boussinesq, westergaard"),
    ("[[variant]]\nname = \"a\"\n", "did you mean 'variants'"),
    ("[variants]\nname = \"a\"\n", "must be an array of tables"),
    ("[[variants]]\nheight_factor = 1.2\n", r"variants\[0\].name\] required key is missing"),
])
def test_bad_variants_file(tmp_path, text, words):
    p = tmp_path / "v.toml"
    p.write_text(text)
    with pytest.raises(InputError, match=words) as err:
        read_variants(p, SI)
    assert str(p) in str(err.value)


def test_variants_file_lengths_are_in_the_site_units_and_defaults_keep_the_site(tmp_path):
    from fillstress.units import US
    p = tmp_path / "v.toml"
    p.write_text('[[variants]]\nname = "wet"\nwater_table = 10.0\n\n'
                 '[[variants]]\nname = "as_built"\n')
    wet, as_built = read_variants(p, US)
    assert wet.water_table == pytest.approx(3.048)        # 10 international feet (exact)
    assert as_built == Variant("as_built")                # every other key the site's own


def test_report_of_a_batch_folder_compares_the_variants(batch, tmp_path):
    import re
    from fillstress.report import write_report
    page = write_report(batch, tmp_path / "batch.html").read_text(encoding="utf-8")
    site_name = json.loads((batch / "as_designed" / "summary.json").read_text())["site"]["name"]
    assert f"<title>Variants of {site_name}</title>" in page          # not the file's path
    assert "licensed geotechnical engineer" in page and "data:image/png;base64," in page
    text = re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", re.sub(r"<style.*?</style>", "", page,
                                                               flags=re.S)))
    for name in ("as_designed", "heavy", "taller"):
        assert name in text
    assert "0.5" in text                                              # taller's water table
    # the envelope rows name the variant and point of each column's maximum, as in the CSV
    env = pd.read_csv(batch / "envelope_points.csv", dtype={"receptor_id": str})
    for rid, group in env.groupby("receptor_id"):
        at = group["dsz_kPa"].idxmax()
        assert f"{group.at[at, 'variant_of_max_dsz']} at {group.at[at, 'point_id']}" in text, rid
    # each variant's governing utilisation, from its own summary
    summary = json.loads((batch / "heavy" / "summary.json").read_text())["receptors"]
    worst = max(r["utilisation_max"] for rows in summary.values() for r in rows
                if r.get("utilisation_max") is not None)
    assert re.search(rf"heavy [^|]*? {worst:.4g}", text)


def test_batch_run_writes_its_report_with_the_variants(tmp_path):
    (tmp_path / "v.toml").write_text('[[variants]]\nname = "one"\n\n[[variants]]\n'
                                     'name = "two"\nheight_factor = 0.5\n')
    out = tmp_path / "out"
    assert main(["batch", str(example_site("preload_surcharge")), str(tmp_path / "v.toml"),
                 "-o", str(out), "--quiet"]) == 0
    page = (out / "report.html").read_text(encoding="utf-8")
    assert 'href="one/report.html"' in page and (out / "one" / "report.html").is_file()
    assert "report.html" in json.loads((out / "manifest.json").read_text())["outputs"]
