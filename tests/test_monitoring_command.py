"""`fillstress monitor` on the preload sample: the invented truth recovered, the folder's
guarantees, and bad input as one line with exit code 2."""
import json
import shutil

import pytest

from fillstress.cli import main
from fillstress.examples import example_site
from fillstress.monitoring.command import monitor_site_file
from pathlib import Path

SAMPLE = Path(example_site("preload_surcharge")).parent
DAY0 = "2025-03-03"
# The invented true ground of tools/make_sample_readings.py: Cc 0.8 ×, cv 2 × the design.
TRUE_F_C, TRUE_F_CV = 0.8, 2.0


@pytest.fixture(scope="module")
def monitored(tmp_path_factory):
    out = tmp_path_factory.mktemp("mon") / "monitoring"
    summary = monitor_site_file(SAMPLE / "site.toml", SAMPLE / "readings.csv", out, day0=DAY0,
                                construction=SAMPLE / "construction.csv", residual_limit=50)
    return summary, out


def test_site_fit_recovers_the_invented_truth_within_its_interval(monitored):
    fit = monitored[0].results.site_fit
    assert fit.f_c_ci[0] < TRUE_F_C < fit.f_c_ci[1]
    assert fit.f_cv_ci[0] < TRUE_F_CV < fit.f_cv_ci[1]
    assert fit.rms == pytest.approx(0.003, rel=0.2)     # the generator's reading noise


def test_plate_fits_hold_the_truth(monitored):
    # Per-plate 95 % intervals: with seven plates and two anchors a miss or two is
    # expected by chance; the well-loaded centre plate must hold it.
    ins = monitored[0].results.instruments.set_index("instrument")
    centre = ins.loc["SP-01"]
    assert centre.f_c_low < TRUE_F_C < centre.f_c_high
    assert centre.f_cv_low < TRUE_F_CV < centre.f_cv_high
    held = ((ins.f_c_low < TRUE_F_C) & (TRUE_F_C < ins.f_c_high)).sum()
    assert held >= len(ins) - 2


def test_folder_has_tables_pictures_report_and_manifest(monitored):
    summary, out = monitored
    manifest = json.loads((out / "manifest.json").read_text())
    files = {p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file()}
    assert set(manifest["outputs"]) == files - {"manifest.json"}
    for name in ("instruments.csv", "readings_fit.csv", "piezometers.csv", "curves.csv",
                 "asaoka.csv", "monitoring.json", "report.html", "figures/plates_map.png",
                 "figures/instrument_SP-01.png", "figures/asaoka_SP-01.png",
                 "figures/piezometer_PZ-02.png"):
        assert name in files
    assert any("readings.csv" in k for k in manifest["inputs"])
    page = (out / "report.html").read_text()
    assert "Cautions" in page and "Asaoka" in page and "Tan (1971)" in page
    header = (out / "instruments.csv").read_text(encoding="utf-8-sig").splitlines()[0]
    assert "final_revised_mm" in header and "f_cv_low" in header


def test_report_command_refuses_a_monitoring_folder(monitored, capsys):
    assert main(["report", str(monitored[1])]) == 2
    assert "monitoring folder" in capsys.readouterr().err


def test_forecast_days_are_consistent(monitored):
    res = monitored[0].results
    ins = res.instruments
    # the drained instruments have consolidated by now, the others are still going; after
    # the surcharge came off, rebound still under way may leave s(now) a hair above final
    assert (ins["degree_now"] > 0).all() and (ins["degree_now"] <= 1.001).all()
    reached = ins["degree_now"] >= res.settings.target_degree
    assert reached.any() and not reached.all()
    assert (ins.loc[~reached, "day_target_degree"] > res.now_day).all()
    assert (ins.loc[reached, "day_target_degree"] <= res.now_day).all()
    assert ins["day_residual_limit"].notna().all()


def test_site_file_monitoring_table_names_the_files(tmp_path):
    # [monitoring] of the sample gives readings, construction and day 0
    s = monitor_site_file(SAMPLE / "site.toml", None, tmp_path / "m", report=False)
    assert s.results.recorded and s.results.readings.path.name == "readings.csv"
    assert not any("No construction record" in c for c in s.results.cautions)


def without_monitoring_table(folder):
    """A copy of the sample whose site file has no [monitoring] table."""
    shutil.copytree(SAMPLE, folder)
    site = folder / "site.toml"
    site.write_text(site.read_text().split("[monitoring]")[0])
    return site


def test_without_a_construction_record_says_so(tmp_path):
    site = without_monitoring_table(tmp_path / "plain")
    s = monitor_site_file(site, SAMPLE / "readings.csv", tmp_path / "m", day0=DAY0,
                          report=False)
    assert any("No construction record" in c for c in s.results.cautions)


def test_cli_bad_readings_one_line_exit_2_nothing_lost(tmp_path, capsys):
    bad = tmp_path / "readings.csv"
    text = (SAMPLE / "readings.csv").read_text().splitlines()
    text[5] = text[5].replace(",2025-", ",20x5-")
    bad.write_text("\n".join(text) + "\n")
    out = tmp_path / "mon"
    out.mkdir()
    (out / "keep.txt").write_text("earlier")
    code = main(["monitor", str(SAMPLE / "site.toml"), str(bad), "--day0", DAY0, "-o",
                 str(tmp_path / "new")])
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert "readings.csv" in err and "row 6, column date" in err and len(err.splitlines()) == 1
    assert not (tmp_path / "new").exists()
    code = main(["monitor", str(SAMPLE / "site.toml"), str(SAMPLE / "readings.csv"),
                 "--day0", DAY0, "-o", str(out)])
    assert code == 2 and "exists" in capsys.readouterr().err
    assert (out / "keep.txt").read_text() == "earlier"
    plain = without_monitoring_table(tmp_path / "plain")
    code = main(["monitor", str(plain), str(SAMPLE / "readings.csv"), "-o", str(tmp_path / "x")])
    assert code == 2 and "day 0" in capsys.readouterr().err
    code = main(["monitor", str(plain), "-o", str(tmp_path / "x")])
    assert code == 2 and "argument readings: missing" in capsys.readouterr().err
    code = main(["monitor", str(SAMPLE / "site.toml"), str(SAMPLE / "readings.csv"), "--day0",
                 "03/03/2025", "-o", str(tmp_path / "x")])
    assert code == 2 and "argument day0" in capsys.readouterr().err
    shutil.rmtree(out)
