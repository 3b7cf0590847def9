"""Dated series as records: the reader on the real published records in
../shared/reference/records (read from there, never copied) and the gridded ensemble."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from pipelines.dated_series import read_dated_table
from proxies.problems import InputError
from proxies.reconstruction.dated import age_ensemble, dated_series_on_grid

RECORDS = Path(__file__).resolve().parents[1] / ".." / "shared" / "reference" / "records"


def _record(name):
    path = RECORDS / name
    if not path.exists():
        pytest.skip(f"reference record {path} not found")
    return path


def test_gisp2_two_sections_cr_line_ends_kyr_ages():
    """GISP2 (Alley 2000): CR/CRLF line ends, ages in kyr, temperature then accumulation in
    one file (README of the records folder: 0.095-49.98 kyr BP)."""
    path = _record("gisp2_temp_accum_alley2000.txt")
    temp = read_dated_table(path, "Age", "Temperature (C)", age_units="kyr")
    assert temp.value_column == "Temperature (C)"
    assert temp.age_yr[0] == pytest.approx(95.1409) and temp.age_yr[-1] == pytest.approx(49981.0)
    assert temp.value[0] == pytest.approx(-31.5913)
    assert np.all(np.diff(temp.age_yr) >= 0) and -60 < temp.value.min() < temp.value.max() < -25
    accumulation = read_dated_table(path, 1, 2, age_units="kyr", section=2)
    assert accumulation.value_column == "Accumulation"
    assert 0.02 < accumulation.value.min() < accumulation.value.max() < 0.4  # m ice / yr
    assert accumulation.rows.min() > temp.rows.max()


def test_odp_658c_bom_and_blank_trailing_rows():
    """ODP 658C (deMenocal et al. 2000): UTF-8 BOM, comma separated, an empty row at the
    hiatus, blank trailing rows."""
    path = _record("658C.terr.2.1.interp.csv")
    terr = read_dated_table(path, "Age(cal. yr BP)", "terr% (interp)")
    assert terr.age_column == "Age(cal. yr BP)"  # the BOM is not part of the name
    assert terr.age_yr[0] == 88.0 and terr.value[0] == pytest.approx(62.2)
    # the hiatus at 324-328 cm (17.4-14.3 cal ka BP, records README) is an empty row, not a
    # section break: the record goes on beyond it
    gap = np.diff(terr.age_yr).argmax()
    assert terr.age_yr[gap] == 14400.0 and terr.age_yr[gap + 1] == 17420.0
    import csv
    with open(path, encoding="utf-8-sig", newline="") as handle:  # independent count
        rows = [r for r in csv.reader(handle) if len(r) > 5 and r[5].strip() and r[0].strip()]
    assert terr.age_yr.size == len(rows) - 1  # less the header
    caco3 = read_dated_table(path, 1, "% CaCO3")
    assert caco3.age_yr[-1] > terr.age_yr[-1] > 20000  # CaCO3 goes on where terr% stops


def test_cariaco_tab_separated():
    """Cariaco PL07-56PC grey scale (Hughen et al. 2000): tab separated, ~10,400 rows,
    426-14,953 yr BP."""
    grey = read_dated_table(_record("cariaco2000_pc56_greyscale.txt"), 1, 2)
    assert 10300 < grey.age_yr.size < 10500
    assert grey.age_yr[0] == 426.0 and grey.age_yr[-1] == pytest.approx(14952.69)
    assert 0 <= grey.value.min() < grey.value.max() <= 255


def test_reader_errors_name_file_row_and_column(tmp_path):
    bad = tmp_path / "bad.csv"
    bad.write_text("age,value\n100,1\n200,2\nabc,3\n400,4\n", encoding="utf-8")
    with pytest.raises(InputError) as info:
        read_dated_table(bad, "age", "value")
    problem = info.value.problems[0]
    assert problem.row == 4 and problem.column == "age" and problem.file == str(bad)
    with pytest.raises(InputError, match="not found"):
        read_dated_table(bad, "age", "temperature")
    with pytest.raises(InputError, match="section 2"):
        read_dated_table(bad, "age", "value", section=2)
    assert bad.read_text(encoding="utf-8").startswith("age,value")  # never modified


def test_dated_series_ensemble_spreads_ages_by_the_stated_error():
    rng = np.random.default_rng(5)
    age = np.linspace(1000.0, 20000.0, 400)
    ages = age_ensemble(age, 2000, rng, age_sd_yr=30.0, age_sd_fraction=0.01)
    sd = ages.std(axis=1)
    assert np.allclose(sd, 30.0 + 0.01 * age, rtol=0.06)
    assert np.all(np.diff(ages, axis=0) > 0)  # every member keeps its ages in order
    value = np.where(age < 11700, 1.0, 0.0)
    series = dated_series_on_grid("t", age, value, rng, n_members=300, age_sd_yr=50.0, step_yr=50.0)
    assert series.values.shape[1] == 300 and np.all(np.diff(series.age_cal_bp) == 50.0)
    # the step's position varies over members by about the age error (50 yr)
    crossing = np.array([series.age_cal_bp[np.nanargmax(series.values[:, m] < 0.5)] for m in range(300)])
    assert 30 < crossing.std() < 80 and abs(np.median(crossing) - 11700) <= 50
