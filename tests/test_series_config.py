"""Dated series through the run-config path (``[series.<name>]``): the real published records
in ../shared/reference/records (read from there, never copied; check values from the records'
README, from memory) and the key validation.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from pipelines.config import load_run_config
from pipelines.series_inputs import read_series, series_problems, series_specs
from proxies.problems import InputError
from proxies.reconstruction import ReconstructionSettings
from proxies.reconstruction.dated import dated_series_result
from proxies.seeding import rng_for

RECORDS = (Path(__file__).resolve().parents[1] / ".." / "shared" / "reference" / "records").resolve()

REAL = f"""
[series.GISP2-T]
file = "{RECORDS / 'gisp2_temp_accum_alley2000.txt'}"
age_column = "Age"
value_column = "Temperature (C)"
age_units = "kyr"
variable = "air_temperature"
units = "degC"
age_sd_fraction = 0.01

[series.GISP2-ACC]
file = "{RECORDS / 'gisp2_temp_accum_alley2000.txt'}"
age_column = "1"
value_column = "2"
age_units = "kyr"
section = 2

[series.ODP658C]
file = "{RECORDS / '658C.terr.2.1.interp.csv'}"
age_column = "Age(cal. yr BP)"
value_column = "terr% (interp)"
units = "percent"
age_sd_yr = 100.0

[series.CARIACO]
file = "{RECORDS / 'cariaco2000_pc56_greyscale.txt'}"
age_column = "1"
value_column = "2"
age_sd_yr = 50.0
grid_step_yr = 20.0
"""


def _config(tmp_path, body: str):
    (tmp_path / "cores").mkdir(exist_ok=True)
    path = tmp_path / "run.toml"
    path.write_text('[run]\nseed = 3\nensemble = 50\ncores = ["cores"]\n' + body, encoding="utf-8")
    return load_run_config(path)


def test_real_records_enter_through_the_run_config(tmp_path):
    if not RECORDS.is_dir():
        pytest.fail(f"reference records not found at {RECORDS}")
    config = _config(tmp_path, REAL)
    specs = series_specs(config)
    assert series_problems(config) == []
    read = {name: read_series(config, name, spec) for name, spec in specs.items()}
    # GISP2 (Alley 2000): 0.095-49.98 kyr BP, temperature between -60 and -25 degC
    t = read["GISP2-T"].table
    assert t.age_yr[0] == pytest.approx(95.1409) and t.age_yr[-1] == pytest.approx(49981.0)
    assert read["GISP2-ACC"].table.value_column == "Accumulation"
    assert read["ODP658C"].table.age_yr[0] == 88.0
    assert 10300 < read["CARIACO"].table.age_yr.size < 10500
    rec = ReconstructionSettings()
    gisp = dated_series_result("GISP2-T", t.age_yr, t.value, rng_for(3, "series", "GISP2-T"), rec, 50,
                               0.0, specs["GISP2-T"].age_sd_fraction, variable="air_temperature", units="degC")
    series = gisp.series["air_temperature"]
    assert series.values.shape[1] == 50 and gisp.core_id == "GISP2-T"
    # the Younger Dryas (12.9-11.7 kyr BP) is colder than the early Holocene (10-9 kyr BP),
    # by ~10 degC or more in this record (Alley 2000, from memory)
    median = np.nanmedian(series.values, axis=1)
    yd = np.nanmean(median[(series.age_cal_bp > 12000) & (series.age_cal_bp < 12700)])
    holocene = np.nanmean(median[(series.age_cal_bp > 9000) & (series.age_cal_bp < 10000)])
    assert holocene - yd > 8.0
    # a 1 % age error: the members' ages spread ~1 % at 12 kyr -> cells differ between members
    assert np.nanstd(series.values[(series.age_cal_bp > 11500) & (series.age_cal_bp < 11900)], axis=1).max() > 1.0
    cariaco = read["CARIACO"].table
    grey = dated_series_result("CARIACO", cariaco.age_yr, cariaco.value, rng_for(3, "series", "CARIACO"), rec,
                               50, 50.0, step_yr=specs["CARIACO"].grid_step_yr)
    assert np.allclose(np.diff(grey.series["CARIACO"].age_cal_bp), 20.0)


def test_age_ensemble_file_is_used_member_by_member(tmp_path):
    (tmp_path / "s.csv").write_text("age,v\n100,1\n200,2\n300,3\n400,4\n", encoding="utf-8")
    rows = ["m1,m2,m3"] + [f"{a - 10},{a},{a + 10}" for a in (100, 200, 300, 400)]
    (tmp_path / "ens.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    config = _config(tmp_path, '[series.S]\nfile = "s.csv"\nage_column = "age"\nvalue_column = "v"\n'
                               'ensemble_file = "ens.csv"\n')
    name, spec = next(iter(series_specs(config).items()))
    read = read_series(config, name, spec)
    assert read.member_ages.shape == (4, 3)
    assert np.array_equal(read.member_ages[:, 0], [90, 190, 290, 390])
    (tmp_path / "ens.csv").write_text("\n".join(rows[:-1]) + "\n", encoding="utf-8")
    problems = series_problems(config)
    assert problems and "3 rows" in problems[0].message and problems[0].column == "series.S.ensemble_file"


def test_series_keys_are_validated_with_file_and_key(tmp_path):
    config = _config(tmp_path, '[series.S]\nvalue_colum = "v"\nage_sd_yr = -1\n'
                               'age_units = "years"\n')
    with pytest.raises(InputError) as info:
        series_specs(config)
    columns = {p.column: p for p in info.value.problems}
    assert "series.S.value_colum" in columns and "value_column" in columns["series.S.value_colum"].fix
    assert {"series.S.age_sd_yr", "series.S.age_units", "series.S.file"} <= set(columns)
    assert all(p.file == str(config.path) for p in info.value.problems)


def test_check_refuses_a_series_named_like_a_core(tmp_path):
    from archive_factory import write_archive
    from pipelines.config_problems import check_run_config

    (tmp_path / "s.csv").write_text("age,v\n100,1\n200,2\n300,3\n", encoding="utf-8")
    config = write_archive(tmp_path, n_cores=1, ensemble=20, n_dates=4, n_samples=10,
                           extra_config='[series.syn-000]\nfile = "s.csv"\n')
    problems = [p for p in check_run_config(config) if p.column == "series.syn-000"]
    assert problems and "also a core id" in problems[0].message and problems[0].fix
