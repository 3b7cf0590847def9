"""Reference windows (WMO normals), per-member reference values and anomalies."""

from __future__ import annotations

import numpy as np
import pytest

from proxies.problems import InputError
from proxies.reconstruction import ReconstructionSettings, reconstruct_core
from proxies.reconstruction.anomalies import (anomalies_from_reference, normal_window_cal_bp,
                                              window_coverage, window_mean_per_member)
from synthetic_cores import make_synthetic_core


def test_wmo_normals_in_cal_bp():
    """WMO-No. 1203: standard normals 1961-1990 and 1991-2020 (30 calendar years each)."""
    assert normal_window_cal_bp("1961-1990") == (-41.0, -11.0)
    assert normal_window_cal_bp("1991-2020") == (-71.0, -41.0)
    young, old = normal_window_cal_bp("1991-2020")
    assert old - young == 30.0
    with pytest.raises(ValueError):
        normal_window_cal_bp("1981-2010")


def test_window_mean_of_a_line_is_its_midpoint_value():
    """Time mean of a linear function over [a, b] is its value at (a+b)/2 (calculus)."""
    ages = np.linspace(0, 1000, 11)[:, None] + np.array([[0.0, 3.0, -7.0]])
    values = 2.0 + 0.01 * ages
    ref = window_mean_per_member(ages, values, (200.0, 500.0))
    np.testing.assert_allclose(ref, 2.0 + 0.01 * 350.0, rtol=1e-12)


def test_window_mean_of_a_step_weights_by_time():
    ages = np.array([[0.0], [99.999], [100.0], [300.0]])
    values = np.array([[1.0], [1.0], [4.0], [4.0]])
    ref = window_mean_per_member(ages, values, (0.0, 300.0))
    assert ref[0] == pytest.approx((1 * 100 + 4 * 200) / 300, abs=0.02)


def test_members_not_spanning_the_window_get_no_reference():
    ages = np.array([[0.0, 50.0], [100.0, 150.0]])
    values = np.ones_like(ages)
    ref = window_mean_per_member(ages, values, (10.0, 90.0))
    assert ref[0] == 1.0 and np.isnan(ref[1])
    np.testing.assert_array_equal(window_coverage(ages, (10.0, 90.0)), [True, False])


def test_anomalies_are_member_by_member():
    grid_values = np.array([[1.0, 10.0], [2.0, 20.0]])
    out = anomalies_from_reference(grid_values, np.array([1.0, 10.0]))
    np.testing.assert_array_equal(out, [[0.0, 0.0], [1.0, 10.0]])


def _stage(settings, **kw):
    rng = np.random.default_rng(3)
    core, chron, cal, _, _ = make_synthetic_core(rng, n_members=40, max_depth_cm=200.0, **kw)
    return reconstruct_core(core, chron, cal, settings, rng), chron, cal


def test_auto_reference_uses_the_wmo_normal_when_the_record_reaches_it():
    result, chron, cal = _stage(ReconstructionSettings())
    s = result.series["temperature"]
    assert s.reference_kind == "normal 1961-1990"
    assert s.reference_window == (-41.0, -11.0)
    ages = chron.age_at(cal.records[0].depth_cm)
    ref = window_mean_per_member(ages, cal.records[0].values, (-41.0, -11.0))
    has = np.isfinite(s.values)
    np.testing.assert_allclose((s.values - s.anomalies)[has], np.broadcast_to(ref, s.values.shape)[has])


def test_stated_window_and_record_fallback():
    result, _, _ = _stage(ReconstructionSettings(reference="window", reference_young_cal_bp=1000.0,
                                                 reference_old_cal_bp=2000.0))
    assert result.series["temperature"].reference_window == (1000.0, 2000.0)
    assert result.table["reference_young_cal_bp"].eq(1000.0).all()
    result, _, _ = _stage(ReconstructionSettings(reference="record"))
    s = result.series["temperature"]
    np.testing.assert_allclose(np.nanmean(s.anomalies, axis=0), 0.0, atol=1e-9)
    assert s.reference_kind == "record"


def test_a_window_outside_the_record_is_an_input_error():
    with pytest.raises(InputError) as info:
        _stage(ReconstructionSettings(reference="window", reference_young_cal_bp=50000.0,
                                      reference_old_cal_bp=51000.0))
    assert "reference window" in str(info.value) and "SYN-1" in str(info.value)


def test_settings_validation_names_the_key():
    with pytest.raises(InputError) as info:
        ReconstructionSettings.from_mapping({"grid_step_yr": -5, "bogus": 1, "binning": "mean",
                                             "reference_young_cal_bp": 10.0}, "run.toml [reconstruction]")
    columns = {p.column for p in info.value.problems}
    assert {"grid_step_yr", "bogus", "binning", "reference_old_cal_bp"} <= columns
    assert all(p.file == "run.toml [reconstruction]" for p in info.value.problems)
    ok = ReconstructionSettings.from_mapping({"grid_step_yr": 20, "normal_period": "1991-2020",
                                              "reference": "window", "reference_young_cal_bp": 0,
                                              "reference_old_cal_bp": 500})
    assert ok.grid_step_yr == 20.0 and ok.reference_window == (0.0, 500.0)
