"""Exports: CSV beside every Parquet table and the CF netCDF file of the reconstructions."""

from __future__ import annotations

import hashlib
import warnings

import cftime
import numpy as np
import pandas as pd
import pytest
import xarray as xr
from click.testing import CliRunner

from pipelines.report import write_exports
from pipelines.report.csv import parquet_tables
from pipelines.report.netcdf import DAYS_PER_YEAR, build_dataset, cf_units, standard_name_for
from pipelines.report.rundata import read_run
from pipelines.runfolder import atomic_write_parquet
from run_folder_factory import make_run_folder

#: units our netCDF may carry; each is a valid udunits string (udunits2 unit database, from
#: memory: "year", "degC", "K", "1", "1e-3", "percent", "mm", "m")
UDUNITS_OK = {"year", "degC", "K", "1", "1e-3", "percent", "mm", "m", "mm year-1"}


@pytest.fixture(scope="module")
def exported(tmp_path_factory):
    run = make_run_folder(tmp_path_factory.mktemp("exp") / "run")
    return run, write_exports(run)


def _open(path):
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # "opens cleanly": no decoding or serialisation warning
        return xr.open_dataset(path, engine="h5netcdf").load()


def test_csv_beside_every_parquet_and_round_trip(exported):
    """Every Parquet table has a CSV twin holding the same values to 6 significant digits
    (the documented CSV precision; Parquet keeps full precision), and no float in the CSV
    text is longer than that (see test_csv_values_carry_six_significant_digits)."""
    run, written = exported
    tables = parquet_tables(run)
    assert len(tables) >= 15
    for table in tables:
        csv = table.with_suffix(".csv")
        assert csv in written
        original = pd.read_parquet(table)
        again = pd.read_csv(csv, keep_default_na=True)
        assert list(again.columns) == list(original.columns)
        for column in original.columns:
            if pd.api.types.is_numeric_dtype(original[column]) and not pd.api.types.is_bool_dtype(original[column]):
                np.testing.assert_allclose(again[column].to_numpy(float), original[column].to_numpy(float),
                                           rtol=5e-6, atol=0, equal_nan=True, err_msg=f"{csv}:{column}")


def test_csv_values_carry_six_significant_digits():
    """pi, a tiny and a large value print with 6 significant digits; integers and missing
    values are kept as they are."""
    from pipelines.report.csv import table_csv_text

    table = pd.DataFrame({"x": [np.pi, -1.234567891e-5, 123456789.123, np.nan], "n": [1, 2, 3, 4]})
    assert table_csv_text(table).splitlines() == ["x,n", "3.14159,1", "-1.23457e-05,2",
                                                  "1.23457e+08,3", ",4"]


def test_csv_text_is_that_of_pandas_to_csv_for_awkward_tables():
    """The fast float path writes pandas' own bytes (``DataFrame.to_csv`` with ``%.6g``, the
    reference): NaN, infinities, -0.0, tiny and huge values, float32, ints, booleans, missing
    strings, text that needs quoting, list cells, and columns in any order."""
    import io

    from pipelines.report.csv import _flatten, table_csv_text

    rng = np.random.default_rng(3)
    members = {f"m{i:04d}": rng.normal(0, 10.0 ** rng.integers(-8, 9), 7) for i in range(5)}
    members["m0001"][[1, 4]] = [np.nan, -0.0]
    members["m0003"][[0, 2, 5]] = [np.inf, -np.inf, 1e20]
    quoted = pd.DataFrame({
        "label": ["a", 'say "hi"', "x,y", None, "two\nlines", "", "plain"],
        **members,
        "n": np.arange(7), "flag": [True, False] * 3 + [True],
        "f32": np.linspace(0, 1, 7, dtype=np.float32),
        "list": [[1, 2], [], ["a"], [0.5], [3], [4], [5]],
    })
    plain = quoted.drop(columns=["label"]).assign(label=list("abcdefg"))  # nothing to quote
    for table in (quoted, plain, quoted[["m0000"]], quoted.iloc[:0]):
        expected = table.copy()
        for column in expected.columns:
            if expected[column].dtype == object:
                expected[column] = expected[column].map(_flatten)
        buffer = io.StringIO()
        expected.to_csv(buffer, index=False, lineterminator="\n", float_format="%.6g")
        assert table_csv_text(table) == buffer.getvalue()


def test_no_csv_on_request(tmp_path):
    run = make_run_folder(tmp_path / "run")
    written = write_exports(run, csv=False)
    assert [p.name for p in written] == ["reconstructions.nc"]
    assert not _csv_exports(run)


def test_exports_leave_the_stage_written_samples_csv_alone(tmp_path):
    """samples_dated.csv is the samples stage's own output (declared ``with_csv``): the
    exports keep an existing copy and write only missing ones; other CSV copies are always
    (re)written from their Parquet table."""
    run = make_run_folder(tmp_path / "run")
    core = next(p.parent for p in sorted(run.glob("*/chronology.parquet")))
    atomic_write_parquet(core / "samples_dated.parquet", pd.DataFrame({"depth_cm": [1.0, 2.0]}))
    (core / "samples_dated.csv").write_text("from the stage\n", encoding="utf-8")
    (core / "chronology.csv").write_text("stale\n", encoding="utf-8")
    written = write_exports(run)
    assert (core / "samples_dated.csv").read_text(encoding="utf-8") == "from the stage\n"
    assert core / "samples_dated.csv" not in written
    assert (core / "chronology.csv").read_text(encoding="utf-8") != "stale\n"


def test_netcdf_opens_cleanly_and_every_variable_has_units(exported):
    run, _ = exported
    ds = _open(run / "reconstructions.nc")
    assert ds.attrs["Conventions"] == "CF-1.8"
    for key in ("title", "history", "source"):
        assert ds.attrs[key]
    assert len(ds.data_vars) >= 4
    for name, variable in ds.data_vars.items():
        assert variable.attrs.get("units") in UDUNITS_OK, name
        assert variable.attrs.get("long_name"), name
    for name in ("age", "quantile"):
        assert ds[name].attrs["units"] in UDUNITS_OK
    assert ds["sst"].dims == ("core", "quantile", "age")
    assert ds["sst"].attrs["standard_name"] == "sea_surface_temperature"
    assert ds["sst_anomaly"].attrs["units"] == "K"  # a temperature difference
    np.testing.assert_array_equal(ds["quantile"].values, [0.025, 0.16, 0.5, 0.84, 0.975])


def _csv_exports(run):
    """CSV copies beside Parquet tables (timings.csv is a run table of its own)."""
    return [p for p in run.rglob("*.csv") if p.with_suffix(".parquet").exists()]


def test_netcdf_values_equal_the_tables(exported):
    """Median and 2.5 % quantile of core TARN-2 equal reconstruction.parquet; the stack
    equals stack.parquet; the age axis is the union of the grids."""
    run, _ = exported
    ds = _open(run / "reconstructions.nc")
    recon = pd.read_parquet(run / "TARN-2" / "reconstruction.parquet")
    part = ds.sel(core="TARN-2").sel(age=recon["age_cal_bp"].to_numpy())
    np.testing.assert_array_equal(part["sst"].sel(quantile=0.5).values, recon["value_median"])
    np.testing.assert_array_equal(part["sst"].sel(quantile=0.025).values, recon["value_q025"])
    np.testing.assert_array_equal(part["sst_anomaly"].sel(quantile=0.975).values, recon["anomaly_q975"])
    np.testing.assert_array_equal(part["sst_n_samples"].values, recon["n_samples"])
    np.testing.assert_array_equal(ds["sst_reference_window"].sel(core="TARN-2").values, [0.0, 1000.0])
    stack = pd.read_parquet(run / "stack.parquet")
    np.testing.assert_array_equal(ds["stack_sst"].sel(quantile=0.5, age=stack["age_cal_bp"].to_numpy()).values,
                                  stack["value_median"])
    np.testing.assert_array_equal(ds["stack_sst"].sel(quantile=0.16, age=stack["age_cal_bp"].to_numpy()).values,
                                  stack["value_q160"])
    expected_ages = np.union1d(recon["age_cal_bp"], stack["age_cal_bp"])
    np.testing.assert_array_equal(ds["age"].values, expected_ages)


def test_time_coordinate_decodes_to_the_right_calendar_year(exported):
    """The auxiliary CF time decodes (cftime, 365-day calendar) to year 1950 - age on
    1 January for whole-year ages; the raw file holds -365 days per year of age."""
    run, _ = exported
    ds = _open(run / "reconstructions.nc")
    decoded = ds["time"].values
    assert isinstance(decoded[0], cftime.DatetimeNoLeap)
    for age, when in zip(ds["age"].values, decoded):
        assert when.year == 1950 - int(age) and (when.month, when.day) == (1, 1)
    with xr.open_dataset(run / "reconstructions.nc", engine="h5netcdf", decode_times=False) as raw:
        np.testing.assert_array_equal(raw["time"].values, -DAYS_PER_YEAR * raw["age"].values)
        assert raw["time"].attrs["calendar"] == "365_day"
        assert raw["time"].attrs["units"].startswith("days since 1950-01-01")


def test_plain_open_dataset_decodes_the_time_axis(exported):
    """As the README shows it: ``xarray.open_dataset(path)`` with no engine and no options
    (whatever backend is installed) opens the file and decodes its 365-day time axis through
    cftime, a declared dependency (issue 10: this failed on a fresh machine)."""
    run, _ = exported
    with xr.open_dataset(run / "reconstructions.nc") as ds:
        decoded = ds["time"].values
        ages = ds["age"].values
    assert isinstance(decoded[0], cftime.DatetimeNoLeap)
    assert [when.year for when in decoded] == [int(np.floor(1950.0 - age)) for age in ages]


def test_netcdf_readable_by_the_netcdf_c_library(exported):
    """An independent reader (netCDF4-python over netCDF-C) sees the same variables,
    dimensions and units."""
    import netCDF4

    run, _ = exported
    with netCDF4.Dataset(run / "reconstructions.nc") as nc:
        assert nc.Conventions == "CF-1.8"
        assert nc.variables["sst"].dimensions == ("core", "quantile", "age")
        for name, variable in nc.variables.items():
            assert "units" in variable.ncattrs() or name in ("core",), name
        assert list(nc.variables["core"][:]) == ["TARN-2"]


def test_exports_are_byte_identical_on_rerun(exported):
    run, written = exported
    before = {p: hashlib.sha256(p.read_bytes()).hexdigest() for p in written}
    again = write_exports(run)
    assert {p: hashlib.sha256(p.read_bytes()).hexdigest() for p in again} == before


def test_same_variable_from_two_proxies_gets_two_names(tmp_path):
    run = make_run_folder(tmp_path / "run")
    path = run / "TARN-2" / "reconstruction.parquet"
    recon = pd.read_parquet(path)
    other = recon.assign(proxy="uk37", value_median=recon["value_median"] + 1.0)
    atomic_write_parquet(path, pd.concat([recon, other], ignore_index=True))
    ds = build_dataset(read_run(run))
    assert {"sst_mgca_mmol_mol", "sst_uk37"} <= set(ds.data_vars)
    np.testing.assert_allclose(ds["sst_uk37"].sel(quantile=0.5).values - ds["sst_mgca_mmol_mol"].sel(quantile=0.5).values,
                               np.where(np.isnan(ds["sst_uk37"].sel(quantile=0.5).values), np.nan, 1.0))


def test_run_without_reconstructions_writes_no_netcdf(tmp_path):
    run = make_run_folder(tmp_path / "run")
    for core in ("TARN-2",):
        (run / core / "reconstruction.parquet").unlink()
    (run / "stack.parquet").unlink()
    assert build_dataset(read_run(run)) is None
    assert all(p.suffix == ".csv" for p in write_exports(run))


@pytest.mark.parametrize("units, expected", [("°C", "degC"), ("degC", "degC"), ("‰", "1e-3"),
                                             ("", "1"), ("%", "percent"), ("mm", "mm")])
def test_cf_units(units, expected):
    assert cf_units(units) == expected


def test_standard_name_needs_matching_units():
    assert standard_name_for("sst", "degC") == "sea_surface_temperature"
    assert standard_name_for("tjul", "°C") == "air_temperature"
    assert standard_name_for("sst", "1") is None
    assert standard_name_for("varve_mm", "mm") is None


def test_cli_report_regenerates_report_and_exports(tmp_path):
    """`downcore report RUN --no-csv` writes the report, figures and netCDF but no CSV;
    without the flag the CSV files appear too."""
    from pipelines.cli import main

    run = make_run_folder(tmp_path / "run")
    result = CliRunner().invoke(main, ["report", str(run), "--no-csv"])
    assert result.exit_code == 0, result.output
    assert (run / "report.html").is_file() and (run / "reconstructions.nc").is_file()
    assert not _csv_exports(run)
    assert "report:" in result.output
    result = CliRunner().invoke(main, ["report", str(run)])
    assert result.exit_code == 0, result.output
    assert (run / "TARN-2" / "chronology.csv").is_file()
    bad = CliRunner().invoke(main, ["report", str(tmp_path)])
    assert bad.exit_code != 0 and "no summary.parquet" in bad.output
