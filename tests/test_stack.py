"""Regional composite of several cores (proxies.reconstruction.stack)."""

from __future__ import annotations

import numpy as np
import pytest

from proxies.reconstruction import GridSeries, ReconstructionSettings, stack_records
from proxies.reconstruction.stack import coarsen_series, standardise_over_window


class _Result:
    def __init__(self, series):
        self.series = series


def _series(ages, values, variable="temperature"):
    n = np.ones(ages.size, dtype=int)
    return GridSeries(variable, "degC", ages, values, values - np.nanmean(values, axis=0), n,
                      (float(ages[0]), float(ages[-1])))


def test_anomaly_stack_recovers_a_common_signal_with_offsets():
    """Cores = common signal + core offset + member noise; the stack recovers the signal."""
    rng = np.random.default_rng(0)
    ages = np.arange(0.0, 2001.0, 50.0)
    signal = np.sin(ages / 300.0)
    results = {}
    for k, offset in enumerate((5.0, -3.0, 12.0)):
        values = signal[:, None] + offset + 0.3 * rng.standard_normal((ages.size, 400))
        results[f"C{k}"] = _Result({"temperature": _series(ages, values)})
    settings = ReconstructionSettings(stack_young_cal_bp=0.0, stack_old_cal_bp=2000.0)
    stack = stack_records(results, settings, rng)
    expected = signal - signal.mean()
    np.testing.assert_allclose(stack["value_median"], expected, atol=0.06)
    assert (stack["n_records"] == 3).all()
    # Member noise sd 0.3 averaged over 3 records: 95 % half-width ~ 1.96 * 0.3 / sqrt(3) = 0.34.
    half = (stack["value_q975"] - stack["value_q025"]) / 2
    assert half.mean() == pytest.approx(1.96 * 0.3 / np.sqrt(3), rel=0.12)


def test_n_records_counts_contributing_cores_per_step():
    rng = np.random.default_rng(1)
    a = np.arange(0.0, 1001.0, 100.0)
    b = np.arange(500.0, 1501.0, 100.0)
    results = {"A": _Result({"t": _series(a, rng.normal(size=(a.size, 50)), "t")}),
               "B": _Result({"t": _series(b, rng.normal(size=(b.size, 50)), "t")})}
    stack = stack_records(results, ReconstructionSettings(), rng)
    counts = dict(zip(stack["age_cal_bp"], stack["n_records"]))
    assert counts[0.0] == 1 and counts[700.0] == 2 and counts[1500.0] == 1
    assert stack["stack_young_cal_bp"].iloc[0] == 500.0 and stack["stack_old_cal_bp"].iloc[0] == 1000.0


def test_zscore_has_unit_spread_over_the_window():
    rng = np.random.default_rng(2)
    ages = np.arange(0.0, 1000.0, 10.0)
    values = 7 + 4 * rng.standard_normal((ages.size, 5))
    z = standardise_over_window(ages, values, (0.0, 990.0), "zscore")
    np.testing.assert_allclose(z.mean(axis=0), 0.0, atol=1e-12)
    np.testing.assert_allclose(z.std(axis=0, ddof=1), 1.0)


def test_different_ensemble_sizes_are_resampled_and_finer_grids_are_coarsened():
    rng = np.random.default_rng(3)
    ages = np.arange(0.0, 501.0, 50.0)
    results = {"A": _Result({"t": _series(ages, rng.normal(size=(ages.size, 30)), "t")}),
               "B": _Result({"t": _series(ages, rng.normal(size=(ages.size, 80)), "t")})}
    stack = stack_records(results, ReconstructionSettings(), rng)
    assert len(stack) == ages.size and stack["value_median"].notna().all()
    # a core whose automatic grid step is 25 yr joins on the coarsest step, 50 yr
    other = np.arange(0.0, 501.0, 25.0)
    results["C"] = _Result({"t": _series(other, rng.normal(size=(other.size, 30)), "t")})
    with pytest.warns(UserWarning, match="stacked on the coarsest, 50 yr"):
        stack = stack_records(results, ReconstructionSettings(), rng)
    np.testing.assert_array_equal(stack["age_cal_bp"], ages)
    assert (stack["n_records"] == 3).all()


def test_coarsen_series_is_the_mean_of_the_fine_cells_in_each_coarse_cell():
    """Brute force: coarse cell k (centre 50 k, half-open [50 k - 25, 50 k + 25)) holds the
    fine 10-yr cells whose centres fall inside it."""
    fine = np.arange(0.0, 301.0, 10.0)
    values = np.random.default_rng(5).normal(size=(fine.size, 4))
    values[7, 2] = np.nan
    coarse, means = coarsen_series(fine, values, 50.0)
    np.testing.assert_array_equal(coarse, np.arange(0.0, 301.0, 50.0))
    for k, centre in enumerate(coarse):
        inside = (fine >= centre - 25) & (fine < centre + 25)
        np.testing.assert_allclose(means[k], np.nanmean(values[inside], axis=0))


def test_records_without_values_are_not_counted():
    """An empty record (no value at all) is left out: the composite is the other record's and
    n_records counts 1, not 2."""
    rng = np.random.default_rng(6)
    ages = np.arange(0.0, 501.0, 50.0)
    full = rng.normal(size=(ages.size, 20))
    results = {"A": _Result({"t": _series(ages, full, "t")}),
               "E": _Result({"t": _series(ages, np.full((ages.size, 20), np.nan), "t")})}
    stack = stack_records(results, ReconstructionSettings(), rng)
    assert (stack["n_records"] == 1).all() and stack["value_median"].notna().all()


def test_records_are_grouped_by_climate_variable():
    """Two proxies of one variable in one core (labels 'sst' and 'sst_uk37') and a second
    core's 'sst' make one composite of three records."""
    rng = np.random.default_rng(4)
    ages = np.arange(0.0, 501.0, 50.0)

    def series(label):
        values = rng.normal(size=(ages.size, 20))
        return GridSeries(label, "degC", ages, values, values, np.ones(ages.size, int),
                          (0.0, 500.0), "window", "p", "sst")

    results = {"A": _Result({"sst": series("sst"), "sst_uk37": series("sst_uk37")}),
               "B": _Result({"sst": series("sst")})}
    stack = stack_records(results, ReconstructionSettings(), rng)
    assert set(stack["variable"]) == {"sst"} and (stack["n_records"] == 3).all()
