"""The per-sample table (proxies.reconstruction.dated_samples) and its netCDF export.

The core is built by hand (two sections, an event layer, a proxy calibrated by an equation
with one sample outside its domain, a proxy never calibrated, assemblage counts at partly
other depths with analogue diagnostics); the chronology is linear per member, so every
expected quantile is computed here independently with numpy.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from pipelines.outputs_schema import checked
from proxies.calibration import CalibratedRecord
from proxies.cores import Core, EventLayer, Section
from proxies.reconstruction.dated_samples import column_units, dated_sample_table

MEMBERS = 400


class LinearChronology:
    """age = top + rate_m x event-free depth, one rate per member [yr/cm]."""

    def __init__(self, core, rng):
        self.scale = core.depth_scale
        self.rate = rng.normal(20.0, 2.0, MEMBERS)

    def age_at(self, depth_cm):
        free = self.scale.event_free_depth(np.asarray(depth_cm, dtype=float))
        return -60.0 + free[:, None] * self.rate[None, :]


class Calibration:
    def __init__(self, records, diagnostics):
        self.records, self.diagnostics = records, diagnostics


def _core() -> Core:
    samples = pd.DataFrame({
        "section": ["A", "A", "A", "B", "B"],
        "depth_cm": [2.0, 7.0, 12.0, 52.0, 57.0],
        "section_depth_cm": [2.0, 7.0, 12.0, 2.0, 7.0],
        "thickness_cm": [1.0, 1.0, np.nan, 1.0, 1.0],
        "tex86": [0.55, 0.60, -0.1, 0.58, np.nan],
        "tex86_error": [0.01, 0.01, 0.01, 0.01, np.nan],
        "magsus_si": [1.2, 1.5, 1.1, 3.0, 2.2],
        "source_row": np.array([2, 3, 4, 5, 6]),
    })
    counts = pd.DataFrame({"section": ["A", "B"], "depth_cm": [7.0, 55.0], "section_depth_cm": [7.0, 5.0],
                           "taxon_a": [30.0, 5.0], "taxon_b": [70.0, 15.0], "source_row": np.array([2, 3])})
    return Core("HAND-1", "lake", 61.0, 14.0, 2010, "", None, samples, pd.DataFrame(), counts,
                sections=(Section("A", 0.0), Section("B", 50.0)),
                event_layers=(EventLayer(10.0, 14.0, "turbidite"),))


@pytest.fixture(scope="module")
def built():
    rng = np.random.default_rng(11)
    core = _core()
    chronology = LinearChronology(core, rng)
    tex = rng.normal(25.0, 1.0, (4, MEMBERS))
    tex[2] = np.nan  # TEX86 < 0 has no temperature: the equation gives nothing
    records = [CalibratedRecord("tex86", "sst", "degC", "equation", "Kim et al. (2010)",
                                np.array([2.0, 7.0, 12.0, 52.0]), tex,
                                outside_range=np.array([False, False, False, True])),
               CalibratedRecord("counts", "july_temperature", "degC", "transfer", "WA-PLS",
                                np.array([7.0, 55.0]), rng.normal(12.0, 0.8, (2, MEMBERS)))]
    diagnostics = pd.DataFrame({"depth_cm": [7.0, 55.0], "proxy": "counts",
                                "analogue_quality": ["good", "none"]})
    result = dated_sample_table(core, chronology, Calibration(records, diagnostics))
    return core, chronology, records, result


def test_one_row_per_sample_level_in_depth_order(built):
    _, _, _, result = built
    table = result.table
    np.testing.assert_array_equal(table["depth_cm"], [2.0, 7.0, 12.0, 52.0, 55.0, 57.0])
    assert list(table["section"]) == ["A", "A", "A", "B", "B", "B"]
    np.testing.assert_array_equal(table["section_depth_cm"], [2.0, 7.0, 12.0, 2.0, 5.0, 7.0])
    assert list(table["samples_row"]) == [2, 3, 4, 5, -1, 6] and list(table["counts_row"]) == [-1, 2, -1, -1, 3, -1]
    np.testing.assert_array_equal(table["thickness_cm"].isna(), [False, False, True, False, True, False])


def test_event_free_depth_and_event_layer_flag(built):
    """The 4-cm turbidite at 10-14 cm is cut out below it (DepthScale); the sample at 12 cm lies
    inside it, so its event-free depth is the layer top."""
    table = built[3].table
    np.testing.assert_allclose(table["event_free_depth_cm"], [2.0, 7.0, 10.0, 48.0, 51.0, 53.0])
    assert list(table["in_event_layer"]) == [False, False, True, False, False, False]
    assert list(table["event_layer_kind"]) == ["", "", "turbidite", "", "", ""]


def test_age_ranges_are_the_ensemble_quantiles(built):
    """Median, 68 % (16-84 %) and 95 % (2.5-97.5 %) ranges over the members (numpy quantiles)."""
    _, chronology, _, result = built
    ages = chronology.age_at(result.table["depth_cm"].to_numpy())
    for column, level in (("age_median_cal_bp", 0.5), ("age_q160_cal_bp", 0.16), ("age_q840_cal_bp", 0.84),
                          ("age_q025_cal_bp", 0.025), ("age_q975_cal_bp", 0.975)):
        np.testing.assert_allclose(result.table[column], np.quantile(ages, level, axis=1))
    t = result.table
    assert ((t["age_q025_cal_bp"] <= t["age_q160_cal_bp"]) & (t["age_q160_cal_bp"] <= t["age_median_cal_bp"])
            & (t["age_median_cal_bp"] <= t["age_q840_cal_bp"]) & (t["age_q840_cal_bp"] <= t["age_q975_cal_bp"])).all()


def test_raw_calibrated_and_flags_for_every_proxy(built):
    core, _, records, result = built
    table = result.table
    # the never-calibrated proxy is there with its raw values (and so with ages)
    np.testing.assert_array_equal(table["magsus_si"].to_numpy(), [1.2, 1.5, 1.1, 3.0, np.nan, 2.2])
    np.testing.assert_array_equal(table["tex86_error"].isna(), [False, False, False, False, True, True])
    np.testing.assert_allclose(table["count_sum"].to_numpy()[[1, 4]], [100.0, 20.0])
    median = table["sst_degC_from_tex86_median"].to_numpy()
    np.testing.assert_allclose(median[[0, 1, 3]], np.median(records[0].values[[0, 1, 3]], axis=1))
    np.testing.assert_allclose(table["sst_degC_from_tex86_q975"].to_numpy()[[0, 1, 3]],
                               np.quantile(records[0].values[[0, 1, 3]], 0.975, axis=1))
    assert list(table["tex86_uncalibrated"]) == [False, False, True, False, False, False]
    assert list(table["tex86_outside_range"]) == [False, False, False, True, False, False]
    assert "counts_outside_range" not in table   # transfer functions carry no equation range
    assert list(table["counts_analogue"]) == ["", "good", "", "", "none", ""]
    assert list(table["counts_poor_analogue"]) == [False, False, False, False, True, False]
    assert np.isfinite(table["july_temperature_degC_from_counts_median"]).sum() == 2


def test_table_fits_the_run_folder_schema_and_every_column_is_described(built):
    result = built[3]
    checked("samples_dated", result.table)
    assert list(result.columns) == list(result.table.columns)
    assert column_units("sst_degC_from_tex86_q025") == "degC" and column_units("age_q840_cal_bp") == "year"


def test_without_calibration_every_sample_still_gets_its_ages(built):
    core, chronology, _, _ = built
    table = dated_sample_table(core, chronology, None).table
    assert table["age_median_cal_bp"].notna().all() and "tex86" in table and "magsus_si" in table
    assert not any(c.endswith("_median") and "_from_" in c for c in table.columns)


def test_netcdf_export_holds_the_per_sample_table(tmp_path, built):
    """Plain xarray.open_dataset (no engine, default decoding) reads it back; a core without
    reconstruction (BOG-3 of the factory run) joins the core axis with its samples."""
    import xarray as xr

    from pipelines.report.exports import write_exports
    from pipelines.runfolder import atomic_write_parquet
    from run_folder_factory import make_run_folder

    run = make_run_folder(tmp_path / "run")
    table = built[3].table
    atomic_write_parquet(run / "BOG-3" / "samples_dated.parquet", table)
    write_exports(run, csv=True)
    assert (run / "BOG-3" / "samples_dated.csv").is_file()
    with xr.open_dataset(run / "reconstructions.nc") as ds:
        assert "BOG-3" in list(ds["core"].values)
        row = list(ds["core"].values).index("BOG-3")
        n = len(table)
        np.testing.assert_allclose(ds["sample_age_median_cal_bp"].values[row, :n], table["age_median_cal_bp"])
        np.testing.assert_allclose(ds["sample_sst_degC_from_tex86_median"].values[row, :n],
                                   table["sst_degC_from_tex86_median"])
        assert ds["sample_sst_degC_from_tex86_median"].attrs["units"] == "degC"
        assert list(ds["sample_in_event_layer"].values[row, :n]) == [0, 0, 1, 0, 0, 0]
        kind = ds["sample_event_layer_kind"]
        assert kind.attrs["flag_meanings"] == "turbidite" and kind.values[row, 2] == 0
        assert np.isnan(kind.values[row, 0])  # empty cell: the fill value, decoded as missing
        analogue = ds["sample_counts_analogue"]
        assert analogue.attrs["flag_meanings"] == "good none" and analogue.values[row, 4] == 1
        assert all("units" in ds[name].attrs for name in ds.data_vars)
        assert ds["sample_magsus_si"].attrs["units"] == "1"
        assert ds["time"].dtype == object  # the CF time axis still decodes (cftime)
