"""Instrumental-overlap calibration: window aggregation, fits, split-period verification."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from proxies.calibration.data import InstrumentalSeries
from proxies.calibration.overlap import (aggregate_windows, calibrate_overlap,
                                         fit_classical, fit_errors_in_variables, fit_inverse,
                                         split_period_skill)


@pytest.fixture()
def years_series():
    years = np.arange(1900, 2000)
    return InstrumentalSeries("t", "temperature", "degC", years, years.astype(float))


def test_window_mean_by_hand(years_series):
    """A window from 1910.3 to 1919.9 CE covers the years 1910..1919: mean 1914.5."""
    assert aggregate_windows(years_series, 1919.9, 1910.3) == pytest.approx(1914.5)
    assert aggregate_windows(years_series, 1950.2, 1950.1) == pytest.approx(1950.0)  # < 1 yr
    assert np.isnan(aggregate_windows(years_series, 1850.0, 1840.0))  # before the series
    # 1995..2005: 5 of 11 years have data -> below 50 % coverage
    assert np.isnan(aggregate_windows(years_series, 2005.0, 1995.0))
    assert aggregate_windows(years_series, 2005.0, 1995.0, min_coverage=0.4) == \
        pytest.approx(1997.0)
    grid = aggregate_windows(years_series, np.full((3, 4), 1919.0), np.full((3, 4), 1910.0))
    assert grid.shape == (3, 4) and np.allclose(grid, 1914.5)


def test_missing_years_are_skipped():
    values = np.arange(10.0)
    values[3] = np.nan
    s = InstrumentalSeries("t", "x", "u", np.arange(2000, 2010), values)
    assert aggregate_windows(s, 2004.5, 2002.0) == pytest.approx(np.mean([2.0, 4.0]))


def test_errors_in_variables_recovers_slope_and_matches_odr():
    """With noise in the proxy, OLS (inverse) underestimates the slope (attenuation);
    Deming regression with the true error-variance ratio recovers it, and equals orthogonal
    distance regression (scipy.odr, an independent implementation) with the same weights."""
    rng = np.random.default_rng(21)
    truth = rng.normal(0, 1, 400)
    proxy = truth + rng.normal(0, 0.6, 400)
    climate = 1.0 + 2.0 * truth + rng.normal(0, 0.5, 400)
    ratio = 0.5 ** 2 / 0.6 ** 2
    assert fit_inverse(proxy, climate).slope < 1.6
    eiv = fit_errors_in_variables(proxy, climate, ratio)
    assert eiv.slope == pytest.approx(2.0, rel=0.08)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)
        from scipy import odr
    out = odr.ODR(odr.RealData(proxy, climate, sx=0.6, sy=0.5), odr.unilinear,
                  beta0=[2.0, 1.0]).run()
    # ODR is iterative (default convergence tolerance): agreement to 1e-5 relative
    assert eiv.slope == pytest.approx(out.beta[0], rel=1e-5)
    assert eiv.intercept == pytest.approx(out.beta[1], rel=1e-5)
    se = np.sqrt(np.diag(eiv.covariance))
    assert 0.5 < se[1] / out.sd_beta[0] < 2.0   # jackknife vs ODR's own standard error


def test_reduced_major_axis_default():
    """Without an error ratio the line is the reduced major axis: |slope| = sd(y)/sd(x)."""
    rng = np.random.default_rng(2)
    x = rng.normal(size=50)
    y = -3 * x + rng.normal(size=50)
    fit = fit_errors_in_variables(x, y)
    assert fit.slope == pytest.approx(-np.std(y) / np.std(x))


def test_classical_inverts_proxy_on_climate():
    """Classical calibration regresses proxy on climate and inverts it (so a perfect line
    is recovered exactly)."""
    climate = np.linspace(0, 10, 20)
    proxy = 0.5 + 0.2 * climate
    fit = fit_classical(proxy, climate)
    np.testing.assert_allclose(fit.climate(proxy), climate, atol=1e-12)


def _simulated_overlap(rng, n=40, members=200, skill=True, age_sd=1.0):
    """A core top with annual samples 1920-1999 CE overlapping an instrumental series."""
    years = np.arange(1900, 2020)
    # a 30-year oscillation plus weather noise: every half of the overlap has signal
    climate_series = 10 + 2 * np.sin(2 * np.pi * years / 30) + rng.normal(0, 0.3, years.size)
    series = InstrumentalSeries("t", "temperature", "degC", years, climate_series)
    true_years = np.linspace(1999, 1999 - 2 * (n - 1), n)
    # what each sample records: the climate averaged over its true one-year window
    true_climate = aggregate_windows(series, true_years + 0.5, true_years - 0.5)
    proxy = 0.5 * true_climate + rng.normal(0, 0.15, n) if skill else rng.normal(5, 1, n)
    age_mid = 1950.0 - true_years[:, None] + rng.normal(0, age_sd, (1, members))
    climate = aggregate_windows(series, 1950.0 - (age_mid - 0.5), 1950.0 - (age_mid + 0.5))
    return proxy, climate, age_mid, true_climate


@pytest.mark.parametrize("method", ["inverse", "classical", "errors_in_variables"])
def test_skilful_overlap_recovers_climate(method):
    """Simulation: a proxy linear in climate passes verification (RE, CE > 0) and its
    ensemble covers the true climate of the samples ~95 % (accepted 85-100 %, small n)."""
    rng = np.random.default_rng(99)
    proxy, climate, ages, truth = _simulated_overlap(rng)
    result = calibrate_overlap(proxy, climate, ages, method, rng)
    assert result.has_skill
    verify = result.skill.set_index("period")
    assert (verify.loc[["verify_early", "verify_late"], "re"] > 0).all()
    assert verify.loc["full", "n_members"] == 200
    lo, hi = np.nanquantile(result.values, [0.025, 0.975], axis=1)
    assert 0.85 <= np.mean((truth >= lo) & (truth <= hi)) <= 1.0


def test_no_skill_is_detected():
    """A proxy unrelated to climate fails split-period verification (RE <= 0)."""
    rng = np.random.default_rng(5)
    proxy, climate, ages, _ = _simulated_overlap(rng, skill=False)
    result = calibrate_overlap(proxy, climate, ages, "inverse", rng)
    assert not result.has_skill


def test_split_period_by_hand():
    """A perfect line verifies perfectly: RE = CE = 1, RMSE = 0, n split in halves."""
    p = np.arange(10.0)
    c = 3 + 2 * p
    out = split_period_skill(p, c, "inverse", "early")
    assert (out["n_calibration"], out["n_verification"]) == (5, 5)
    assert out["re"] == pytest.approx(1.0) and out["ce"] == pytest.approx(1.0)
    assert out["rmse"] == pytest.approx(0.0, abs=1e-9)


@pytest.mark.slow
@pytest.mark.parametrize("method", ["inverse", "classical", "errors_in_variables"])
def test_overlap_interval_coverage_without_age_error(method):
    """Simulation check: with exact ages, the 95 % ensemble intervals cover the climate each
    sample recorded in about 95 % of 20 x 40 samples (accepted 92-98 %). With age errors the
    intervals are wider than needed (age scatter inflates the residual; see README)."""
    covered = []
    for rep in range(20):
        rng = np.random.default_rng(1000 + rep)
        proxy, climate, ages, truth = _simulated_overlap(rng, members=200, age_sd=0.0)
        result = calibrate_overlap(proxy, climate, ages, method, rng)
        lo, hi = np.nanquantile(result.values, [0.025, 0.975], axis=1)
        covered.append(np.mean((truth >= lo) & (truth <= hi)))
    assert 0.92 <= np.mean(covered) <= 0.98
