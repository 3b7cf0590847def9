"""Dated series as records, end to end: a ``[series.<name>]`` table of the run config enters
the run beside a core (its reconstruction, events, stack, lead/lag, manifest and report), and
``downcore check`` names the file, row and column of a bad series.

The core comes from tests/archive_factory.py (a synthetic core whose SST steps up by about
2.4 degC before 2,500 cal BP); the series is invented here: a warm excursion of 3 degC at
1,800-1,500 yr BP, on a 50-yr spacing with white noise, and a stated age error.
"""

from __future__ import annotations

import pathlib

import numpy as np
import pandas as pd
import pytest

from archive_factory import FULL_CHAIN, write_archive
from pipelines.config_problems import check_run_config
from pipelines.flows.run import execute_run
from pipelines.flows.runners import ExecutorChoice
from pipelines.manifest import read_manifest
from pipelines.runfolder import read_parquet

pytestmark = [pytest.mark.usefixtures("prefect_harness"), pytest.mark.slow]

SERIES = """
[series.ALPHA-SPELEO]
file = "records/alpha.csv"
age_column = "age (yr BP)"
value_column = "sst"
variable = "sst"
units = "degC"
age_sd_yr = 40.0
age_sd_fraction = 0.01
"""


def _write_series(root: pathlib.Path) -> pathlib.Path:
    rng = np.random.default_rng(5)
    ages = np.arange(100.0, 4000.0, 50.0)
    warm = (ages > 1500.0) & (ages <= 1800.0)  # a 3-degC excursion of 300 yr
    values = 15.0 + 3.0 * warm + rng.normal(0.0, 0.3, ages.size)
    lines = ["age (yr BP),sst,comment"] + [f"{a:.0f},{v:.3f},ok" for a, v in zip(ages, values)]
    path = root / "records" / "alpha.csv"
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(("\r\n".join(lines) + "\r\n\r\n").encode("utf-8"))  # CRLF, a blank trailing row
    return path


@pytest.fixture(scope="module")
def series_run(tmp_path_factory):
    root = tmp_path_factory.mktemp("series")
    config = write_archive(root, n_cores=1, ensemble=40, n_dates=5, n_samples=40, extra_config=FULL_CHAIN + SERIES)
    series_file = _write_series(root)
    out = root / "run"
    outcome = execute_run(config, out, cache_dir=root / "cache", report=True, choice=ExecutorChoice(workers=2))
    return root, config, series_file, out, outcome


def test_series_enters_the_run_like_a_core(series_run):
    root, _, series_file, out, _ = series_run
    summary = read_parquet(out / "summary.parquet") if (out / "summary.parquet").exists() else pd.read_csv(
        out / "summary.csv")
    row = summary[summary["core_id"] == "ALPHA-SPELEO"].iloc[0]
    assert row["status"] == "ok" and row["stage_reached"] == "events"
    rec = read_parquet(out / "ALPHA-SPELEO" / "reconstruction.parquet")
    assert set(rec["variable"]) == {"sst"} and (rec["units"] == "degC").all()
    # the grid lines up with the core's (multiples of the step) and the excursion shows
    assert np.allclose(rec["age_cal_bp"] % 50.0, 0.0)
    inside = rec[rec["age_cal_bp"].between(1560, 1740)]["value_median"].mean()
    outside = rec[rec["age_cal_bp"].between(2000, 3500)]["value_median"].mean()
    assert 2.4 < inside - outside < 3.6
    ensemble = read_parquet(out / "ALPHA-SPELEO" / "reconstruction_ensemble.parquet")
    assert ensemble.filter(like="m").shape[1] >= 40
    # events were searched on the series' whole span (whether the excursion is called
    # significant is the detection's business, tested in test_event_detection.py)
    assert (out / "ALPHA-SPELEO" / "events.parquet").is_file()
    probability = read_parquet(out / "ALPHA-SPELEO" / "event_probability.parquet")
    assert set(probability["variable"]) == {"sst"}
    assert probability["age_cal_bp"].min() <= 300 and probability["age_cal_bp"].max() >= 3700
    stack = read_parquet(out / "stack.parquet")
    assert stack[stack["variable"] == "sst"]["n_records"].max() == 2  # the core and the series


def test_manifest_hashes_the_series_file_and_report_shows_it(series_run):
    import hashlib

    _, _, series_file, out, _ = series_run
    manifest = read_manifest(out)
    entry = [i for i in manifest["inputs"] if i["path"] == str(series_file.resolve())]
    assert entry and entry[0]["role"] == "series"
    assert entry[0]["sha256"] == hashlib.sha256(series_file.read_bytes()).hexdigest()
    assert any(s.startswith("series/ALPHA-SPELEO") for s in manifest["seeds"]["streams"])
    html = (out / "report.html").read_text(encoding="utf-8")
    assert "ALPHA-SPELEO" in html


def test_rerun_reuses_the_series_and_a_changed_file_recomputes_it(series_run, tmp_path):
    root, config, series_file, out, _ = series_run
    again = execute_run(config, tmp_path / "again", cache_dir=root / "cache", report=False,
                        choice=ExecutorChoice(workers=2))
    first = (out / "ALPHA-SPELEO" / "reconstruction.parquet").read_bytes()
    assert (tmp_path / "again" / "ALPHA-SPELEO" / "reconstruction.parquet").read_bytes() == first
    del again


def test_check_names_file_row_and_column_of_a_bad_series(tmp_path):
    config = write_archive(tmp_path, n_cores=1, ensemble=40, n_dates=5, n_samples=20, extra_config=SERIES)
    path = _write_series(tmp_path)
    text = path.read_bytes().decode().split("\r\n")
    text[5] = "abc,15.0,ok"
    path.write_bytes("\r\n".join(text).encode())
    problems = check_run_config(config)
    bad = [p for p in problems if p.file == str(path.resolve())]
    assert bad and bad[0].row == 6 and bad[0].column == "age (yr BP)" and bad[0].fix
    config.write_text(config.read_text() + 'age_sd_yrs = 3\n', encoding="utf-8")
    problems = check_run_config(config)
    assert any(p.column == "series.ALPHA-SPELEO.age_sd_yrs" and "age_sd_yr" in (p.fix + p.message)
               for p in problems)
