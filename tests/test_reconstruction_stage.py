"""The reconstruction stage (proxies.reconstruction.reconstruct_core) on duck-typed inputs."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from proxies.reconstruction import ReconstructionSettings, reconstruct_core
from proxies.calibration import CalibratedRecord
from synthetic_cores import FakeCalibration, make_synthetic_core

REQUIRED = ["age_cal_bp", "variable", "value_median", "value_q025", "value_q975",
            "anomaly_median", "anomaly_q025", "anomaly_q975", "n_samples"]


@pytest.fixture(scope="module")
def synthetic():
    rng = np.random.default_rng(42)
    return make_synthetic_core(rng, n_members=60, max_depth_cm=300.0)


def test_table_has_the_contract_columns_and_ordered_bands(synthetic):
    core, chron, cal, _, _ = synthetic
    result = reconstruct_core(core, chron, cal, ReconstructionSettings(), np.random.default_rng(0))
    table = result.table
    assert set(REQUIRED) <= set(table.columns)
    np.testing.assert_allclose(table["year_ce"], 1950 - table["age_cal_bp"])
    bands = table[["value_q025", "value_q160", "value_median", "value_q840", "value_q975"]].dropna()
    assert len(bands) > 100 and (np.diff(bands.to_numpy(), axis=1) >= 0).all()
    grid = result.series["temperature"].age_cal_bp
    # grid_step_yr = "auto": samples every 1 cm at 20 yr/cm -> median spacing ~20 yr -> 20 yr
    assert np.all(np.diff(grid) == 20.0) and len(table) == grid.size
    assert any("every 20 yr (median sample spacing 20 yr" in n for n in result.notes)
    assert table["n_samples"].dtype == np.int64 and table["n_samples"].min() >= 0
    given = reconstruct_core(core, chron, cal, ReconstructionSettings(grid_step_yr=50.0),
                             np.random.default_rng(0))
    assert np.all(np.diff(given.series["temperature"].age_cal_bp) == 50.0)


def test_member_m_pairs_values_with_age_path_m(synthetic):
    """Values set equal to each member's own sample ages: every member's cell mean must fall
    inside its cell; pairing values of one member with ages of another would not."""
    core, chron, cal, _, _ = synthetic
    record = cal.records[0]
    ages = chron.age_at(record.depth_cm)
    spy = CalibratedRecord("age_probe", "age_probe", "yr", "test", "none", record.depth_cm, ages.copy())
    result = reconstruct_core(core, chron, FakeCalibration([spy]), ReconstructionSettings(grid_step_yr=100.0,
                                                                                    binning="bin"),
                              np.random.default_rng(0))
    s = result.series["age_probe"]
    centre = s.age_cal_bp[:, None]
    has = np.isfinite(s.values)
    assert np.all(np.abs(s.values - centre)[has] <= 50.0)


def test_ensemble_table_holds_every_member(synthetic):
    core, chron, cal, _, _ = synthetic
    result = reconstruct_core(core, chron, cal, ReconstructionSettings(), np.random.default_rng(0))
    ens = result.ensemble
    s = result.series["temperature"]
    assert len(ens) == 2 * s.age_cal_bp.size
    assert list(ens.columns[:3]) == ["age_cal_bp", "variable", "quantity"]
    assert ens.shape[1] == 3 + 60 and ens.columns[-1] == "m0059"
    values = ens[ens["quantity"] == "value"].iloc[:, 3:].to_numpy()
    np.testing.assert_array_equal(values, s.values)
    median = np.nanquantile(values, 0.5, axis=1)
    ok = result.table["value_median"].notna().to_numpy()
    np.testing.assert_allclose(result.table["value_median"].to_numpy()[ok], median[ok])


def test_interpolation_mode_and_empty_cells(synthetic):
    core, chron, cal, _, _ = synthetic
    # 10-yr cells with 20-yr sample spacing: about half the cells are empty when binning.
    fine = ReconstructionSettings(grid_step_yr=10.0, binning="bin")
    binned = reconstruct_core(core, chron, cal, fine, np.random.default_rng(0))
    s = binned.series["temperature"]
    assert 0.3 < s.n_empty / s.age_cal_bp.size < 0.7
    assert binned.table.loc[binned.table["n_samples"] == 0, "value_median"].isna().all()
    assert any("left empty" in n for n in binned.notes)
    for binning in ("interpolate", "filled"):
        interp = reconstruct_core(core, chron, cal, ReconstructionSettings(grid_step_yr=10.0, binning=binning),
                                  np.random.default_rng(0))
        inner = interp.table.iloc[5:-5]
        assert inner["value_median"].notna().all()
        # the notes say what was done: interpolated, not "left empty"
        assert any("between neighbouring samples they are interpolated" in n for n in interp.notes)
        assert not any("left empty" in n for n in interp.notes) and not interp.thin


def test_filled_keeps_cell_means_where_samples_are(synthetic):
    """binning = 'filled': cells holding samples carry exactly the cell means of 'bin'; the
    other cells inside the record carry the interpolation of 'interpolate'."""
    core, chron, cal, _, _ = synthetic
    results = {b: reconstruct_core(core, chron, cal, ReconstructionSettings(grid_step_yr=10.0, binning=b),
                                   np.random.default_rng(0)).series["temperature"].values
               for b in ("bin", "interpolate", "filled")}
    has_mean = np.isfinite(results["bin"])
    np.testing.assert_array_equal(results["filled"][has_mean], results["bin"][has_mean])
    np.testing.assert_array_equal(results["filled"][~has_mean], results["interpolate"][~has_mean])


def test_same_inputs_same_table_and_two_records_of_one_variable(synthetic):
    core, chron, cal, _, _ = synthetic
    a = reconstruct_core(core, chron, cal, ReconstructionSettings(), np.random.default_rng(0)).table
    b = reconstruct_core(core, chron, cal, ReconstructionSettings(), np.random.default_rng(99)).table
    pd.testing.assert_frame_equal(a, b)
    rec = cal.records[0]
    twin = CalibratedRecord("uk37", rec.variable, rec.units, "test", "synthetic", rec.depth_cm, rec.values + 1.0)
    both = reconstruct_core(core, chron, FakeCalibration([rec, twin]), ReconstructionSettings(),
                            np.random.default_rng(0))
    assert set(both.series) == {"temperature", "temperature_uk37"}
    assert set(both.table["proxy"]) == {"mgca_mmol_mol", "uk37"}


def test_mismatched_member_counts_are_refused(synthetic):
    core, chron, cal, _, _ = synthetic
    rec = cal.records[0]
    bad = CalibratedRecord(rec.proxy, rec.variable, rec.units, "test", "x", rec.depth_cm, rec.values[:, :10])
    with pytest.raises(ValueError, match="members"):
        reconstruct_core(core, chron, FakeCalibration([bad]), ReconstructionSettings(), np.random.default_rng(0))
    empty = reconstruct_core(core, chron, FakeCalibration([]), ReconstructionSettings(), np.random.default_rng(0))
    assert empty.series == {} and empty.warnings
