"""Overlap calibration with age uncertainty, by simulation: no member is lost and the 95 %
prediction intervals hold the true window climate 90-98 % of the time, per family of
climate history (AR(1) red noise, a multidecadal cycle, a trend with white noise)."""

from __future__ import annotations

import numpy as np
import pytest

from proxies.calibration.data import InstrumentalSeries
from proxies.calibration.overlap import aggregate_windows, calibrate_overlap

YEARS = np.arange(1400, 2011)
TOP_CAL_BP = -60.0            # core taken in 2010 CE


def _climate(family: str, rng) -> np.ndarray:
    """Annual truth from processes the calibration does not model."""
    if family == "red_noise":
        x = np.zeros(YEARS.size)
        for i in range(1, YEARS.size):
            x[i] = 0.7 * x[i - 1] + rng.normal(0, 0.5)
        return 10 + x
    if family == "cycle":
        return 10 + 1.5 * np.sin(2 * np.pi * YEARS / 60 + rng.uniform(0, 6)) \
            + rng.normal(0, 0.3, YEARS.size)
    return 10 + 0.01 * (YEARS - 1850) + rng.normal(0, 0.6, YEARS.size)


def _one_core(family, seed, members=150, n=70, age_sd_yr=5.0, rate_error=0.08):
    """A core with 1-cm samples at 1.5-4 yr/cm; proxy = 2 + 0.8 climate + noise; member
    ages with an offset (sd 5 yr) and a rate error (8 %) each."""
    rng = np.random.default_rng(seed)
    climate = _climate(family, rng)
    truth_series = InstrumentalSeries("truth", "t", "degC", YEARS, climate)
    station = InstrumentalSeries("station", "t", "degC", YEARS[YEARS >= 1850],
                                 climate[YEARS >= 1850])
    rate = rng.uniform(1.5, 4.0)
    depth = np.arange(n) + 0.5
    truth = aggregate_windows(truth_series, 1950 - (TOP_CAL_BP + rate * (depth - 0.5)),
                              1950 - (TOP_CAL_BP + rate * (depth + 0.5)))
    proxy = 2 + 0.8 * truth + rng.normal(0, 0.3, n)
    member_rate = rate * (1 + rng.normal(0, rate_error, members))
    offset = rng.normal(0, age_sd_yr, members)
    young = TOP_CAL_BP + member_rate * (depth[:, None] - 0.5) + offset
    old = TOP_CAL_BP + member_rate * (depth[:, None] + 0.5) + offset
    windows = aggregate_windows(station, 1950 - young, 1950 - old)
    result = calibrate_overlap(proxy, windows, (young + old) / 2, "inverse", rng)
    return result, truth


@pytest.mark.parametrize("family", ["red_noise", "cycle", "trend"])
def test_no_member_lost_and_prediction_intervals_cover(family):
    covered, failed = [], 0
    for seed in range(20):
        result, truth = _one_core(family, seed)
        failed += result.n_failed
        assert np.all(np.isfinite(result.values))          # no member silently dropped
        lo, hi = np.quantile(result.values, [0.025, 0.975], axis=1)
        covered.append(np.mean((truth >= lo) & (truth <= hi)))
    coverage = float(np.mean(covered))
    print(f"{family}: 95 % prediction intervals hold the truth {coverage:.3f}")
    assert failed == 0
    assert 0.90 <= coverage <= 0.98
