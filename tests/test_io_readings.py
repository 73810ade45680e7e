"""Readings and construction-record CSVs: SI values, and one-line errors naming row and column."""
import pytest

from fillstress.errors import InputError
from fillstress.io.readings import read_construction, read_readings
from fillstress.units import FOOT, PSF_KPA

HEADER = "instrument,kind,x,y,depth (m),date,settlement (mm),pore pressure (kPa)\n"
GOOD = HEADER + (
    "SP-1,plate,100.0,200.0,,2025-11-03,0.0,\n"
    "# a comment row\n"
    "SP-1,plate,100.0,200.0,,2025-11-13,12.5,\n"
    "PZ-1,piezometer,101.0,200.0,6.0,2025-11-03,,88.0\n"
    "EX-1,extensometer,100.0,201.0,4.5,2025-11-13T12:00,3.0,\n")


def write(tmp_path, text, name="readings.csv"):
    f = tmp_path / name
    f.write_text(text, encoding="utf-8")
    return f


def test_reads_dates_units_and_kinds(tmp_path):
    r = read_readings(write(tmp_path, GOOD), day0="2025-11-01", metres_per_unit=FOOT)
    t = r.table.set_index(["instrument", "day"])
    assert r.dates
    assert t.loc[("SP-1", 12.0), "settlement"] == pytest.approx(0.0125)
    assert t.loc[("SP-1", 12.0), "x"] == pytest.approx(100.0 * FOOT)
    assert t.loc[("EX-1", 12.5), "depth"] == 4.5
    assert t.loc[("PZ-1", 2.0), "pore_pressure"] == 88.0
    assert t.loc[("PZ-1", 2.0), "row"] == 5          # the file's own line number
    assert r.instruments("plate") == ["SP-1"]


def test_days_and_customary_units(tmp_path):
    text = ("instrument,kind,x,y,depth (ft),day,settlement (in),pore pressure (psf)\n"
            "P,piezometer,0,0,10,3,,1000\nM,marker,0,0,,3,2,\n")
    t = read_readings(write(tmp_path, text)).table.set_index("instrument")
    assert t.loc["P", "depth"] == pytest.approx(10 * FOOT)
    assert t.loc["P", "pore_pressure"] == pytest.approx(1000 * PSF_KPA)
    assert t.loc["M", "settlement"] == pytest.approx(2 * FOOT / 12)
    assert t.loc["M", "kind"] == "plate"


@pytest.mark.parametrize("row, message", [
    ("SP-1,plate,100,200,,2025-11-20,abc,", r"row 4, column settlement \(mm\)\] must be a number"),
    ("SP-1,plate,100,200,,20/11/2025,3,", r"row 4, column date\] must be an ISO date"),
    ("SP-1,plate,105,200,,2025-11-20,3,", r"row 4, column x\] instrument 'SP-1' has x"),
    ("SP-1,plate,100,200,,2025-11-13,3,", r"row 4, column date\] instrument 'SP-1' has two"),
    ("SP-2,tiltmeter,100,200,,2025-11-13,3,", r"row 4, column kind\] must be one of"),
    ("PZ-2,piezometer,100,200,,2025-11-13,,50", r"row 4, column depth \(m\)\] is empty"),
    ("SP-2,plate,100,200,,2025-11-13,,", r"row 4, column settlement \(mm\)\] is empty"),
])
def test_bad_cell_names_file_row_and_column(tmp_path, row, message):
    text = HEADER + "SP-1,plate,100,200,,2025-11-03,0,\nSP-1,plate,100,200,,2025-11-13,1,\n" + row + "\n"
    with pytest.raises(InputError, match=message) as info:
        read_readings(write(tmp_path, text), day0="2025-11-01")
    assert str(info.value).startswith(str(tmp_path / "readings.csv"))
    assert "\n" not in str(info.value)


def test_header_problems(tmp_path):
    with pytest.raises(InputError, match="state the site's day 0"):
        read_readings(write(tmp_path, GOOD))
    bad_unit = GOOD.replace("settlement (mm)", "settlement (furlong)")
    with pytest.raises(InputError, match=r"row 1\] column 'settlement \(furlong\)' needs a length"):
        read_readings(write(tmp_path, bad_unit), day0="2025-11-01")
    with pytest.raises(InputError, match="missing column 'kind'"):
        read_readings(write(tmp_path, "instrument,x,y,day,settlement (mm)\n"))
    with pytest.raises(InputError, match="exactly one time column"):
        read_readings(write(tmp_path, "instrument,kind,x,y,settlement (mm)\nA,plate,0,0,1\n"))
    with pytest.raises(InputError, match="file not found"):
        read_readings(tmp_path / "none.csv")


def test_construction_record(tmp_path):
    f = write(tmp_path, "stage,date,placed\n2,2025-12-01,0.6\n1,2025-11-02,\n2,2025-12-21,0.4\n",
              "placed.csv")
    got = read_construction(f, day0="2025-11-01", stages=[1, 2])
    assert [(p.stage, p.day, p.fraction) for p in got] == [(1, 1.0, 1.0), (2, 30.0, 0.6),
                                                           (2, 50.0, 0.4)]
    with pytest.raises(InputError, match=r"placed.csv: \[row 2, column stage\] must be one of"):
        read_construction(write(tmp_path, "stage,day\n3,10\n", "placed.csv"), stages=[1, 2])
    with pytest.raises(InputError, match=r"row 2, column placed\] must be a fraction"):
        read_construction(write(tmp_path, "stage,day,placed\n1,10,-1\n", "placed.csv"))
