"""Skill statistics and regression fits against statsmodels and hand computations."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from statsmodels.stats.stattools import durbin_watson as sm_durbin_watson
from statsmodels.tsa.stattools import acf

from proxies.calibration.overlap import fit_classical, fit_inverse
from proxies.calibration.skill import (coefficient_of_efficiency, durbin_watson,
                                       effective_sample_size, lag1_autocorrelation, r_squared,
                                       reduction_of_error, root_mean_square_error)


@pytest.fixture(scope="module")
def nile():
    """Annual Nile flow 1871-1970 (statsmodels.datasets.nile, an open dataset)."""
    data = sm.datasets.nile.load_pandas().data
    return data["year"].to_numpy(float), data["volume"].to_numpy(float)


def test_ols_fit_agrees_with_statsmodels(nile):
    """Intercept, slope, their standard errors, residual SD and r2 equal statsmodels OLS."""
    year, volume = nile
    ours = fit_inverse(year, volume)
    ref = sm.OLS(volume, sm.add_constant(year)).fit()
    np.testing.assert_allclose([ours.intercept, ours.slope], ref.params, rtol=1e-10)
    np.testing.assert_allclose(np.sqrt(np.diag(ours.covariance)), ref.bse, rtol=1e-10)
    assert ours.residual_sd == pytest.approx(np.sqrt(ref.scale), rel=1e-10)
    assert r_squared(volume, ours.climate(year)) == pytest.approx(ref.rsquared, rel=1e-10)
    cla = fit_classical(volume, year)  # proxy = volume regressed on "climate" = year
    np.testing.assert_allclose([cla.intercept, cla.slope],
                               sm.OLS(volume, sm.add_constant(year)).fit().params, rtol=1e-10)


def test_durbin_watson_and_lag1_agree_with_statsmodels(nile):
    """Durbin-Watson equals statsmodels.stats.stattools.durbin_watson; lag-1
    autocorrelation equals statsmodels.tsa.stattools.acf at lag 1."""
    year, volume = nile
    resid = sm.OLS(volume, sm.add_constant(year)).fit().resid
    assert durbin_watson(resid) == pytest.approx(sm_durbin_watson(resid), rel=1e-12)
    assert lag1_autocorrelation(volume) == pytest.approx(acf(volume, nlags=1)[1], rel=1e-12)


def test_re_ce_by_hand():
    """Cook et al. (1994): RE uses the calibration mean, CE the verification mean.
    Observed (1, 2, 3), predicted (1, 2, 4): SSE = 1; about the verification mean 2 the
    sum of squares is 2, so CE = 0.5; about a calibration mean of 0 it is 14, RE = 13/14."""
    o, p = [1.0, 2.0, 3.0], [1.0, 2.0, 4.0]
    assert coefficient_of_efficiency(o, p) == pytest.approx(0.5)
    assert reduction_of_error(o, p, 0.0) == pytest.approx(13 / 14)
    assert coefficient_of_efficiency(o, [2.0, 2.0, 2.0]) == pytest.approx(0.0)
    assert reduction_of_error(o, [5.0, 5.0, 5.0], 5.0) == pytest.approx(0.0)
    assert root_mean_square_error(o, p) == pytest.approx(np.sqrt(1 / 3))


def test_effective_sample_size_formula_and_simulation():
    """Bretherton et al. (1999) eq. 31: n (1 - r1 r2) / (1 + r1 r2); n = 100, r = 0.5 gives
    60. Simulation: for two independent AR(1) series the variance of their sample
    correlation is about 1 / n_eff (accepted within 20 %)."""
    assert effective_sample_size(100, 0.5, 0.5) == pytest.approx(60.0)
    assert effective_sample_size(100, 0.0, 0.9) == pytest.approx(100.0)
    assert effective_sample_size(10, 0.99, 0.99) == pytest.approx(2.0)  # floor
    rng = np.random.default_rng(6)
    n, phi, reps = 200, 0.7, 3000
    noise = rng.standard_normal((reps, 2, n))
    series = np.empty_like(noise)
    series[..., 0] = noise[..., 0] / np.sqrt(1 - phi ** 2)
    for t in range(1, n):
        series[..., t] = phi * series[..., t - 1] + noise[..., t]
    a = series[:, 0] - series[:, 0].mean(axis=1, keepdims=True)
    b = series[:, 1] - series[:, 1].mean(axis=1, keepdims=True)
    r = np.sum(a * b, axis=1) / np.sqrt(np.sum(a * a, axis=1) * np.sum(b * b, axis=1))
    n_eff = effective_sample_size(n, phi, phi)
    assert r.var() * n_eff == pytest.approx(1.0, rel=0.2)


def test_nan_and_degenerate_inputs():
    assert np.isnan(r_squared([1.0, 1.0, 1.0], [1.0, 2.0, 3.0]))
    assert np.isnan(durbin_watson([0.0, 0.0]))
    assert np.isnan(coefficient_of_efficiency([], []))
