"""The shared/independent error model of the calibration (DESIGN.md section 4b), by
simulation, and the applicability flags of the published equations."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from proxies.calibration import CalibrationSettings, calibrate_core
from proxies.calibration.equations import (mgca_from_temperature_anand2003,
                                           published_equation)
from proxies.calibration.inversion import invert_ensemble, split_error_draws
from test_calibration_stage import StandInCore

SIGMA = 1.2          # Anand et al. (2003) total calibration error [degC] (from memory)
SHARED = 0.5         # the default split: half of its variance systematic for a core
N_SAMPLES, STEP_YR, WINDOW_YR = 100, 50.0, 500.0


def _truth(family: str, rng) -> np.ndarray:
    """True temperatures of one core's samples (oldest last), from processes the
    calibration does not model: a random walk, a step change, a sine plus trend."""
    t = np.arange(N_SAMPLES) * STEP_YR
    if family == "random_walk":
        return 18.0 + np.cumsum(rng.normal(0, 0.3, N_SAMPLES))
    if family == "step":
        return np.where(t < rng.uniform(1000, 4000), 22.0, 17.0) + rng.normal(0, 0.2, N_SAMPLES)
    return 19.0 + 2.0 * np.sin(2 * np.pi * t / 1700.0) - t / 2500.0


def _offsets(family: str, rng, size):
    """Systematic offset drawn once per core: normal, or Laplace with the same variance
    (heavier tails than the error model assumes)."""
    sd = SIGMA * np.sqrt(SHARED)
    if family == "laplace":
        return rng.laplace(0, sd / np.sqrt(2), size)
    return rng.normal(0, sd, size)


def _coverage(truth_family, offset_family, shared_fraction, n_cores=120, members=300, seed=0):
    rng = np.random.default_rng(seed)
    eq = published_equation("mgca_anand2003")
    single, means = [], []
    windows = (np.arange(N_SAMPLES) * STEP_YR // WINDOW_YR).astype(int)
    for _ in range(n_cores):
        true = _truth(truth_family, rng)
        apparent = true + _offsets(offset_family, rng, 1) \
            + rng.normal(0, SIGMA * np.sqrt(1 - SHARED), N_SAMPLES)
        mgca = mgca_from_temperature_anand2003(apparent) + rng.normal(0, 0.03, N_SAMPLES)
        ens = invert_ensemble(mgca, 0.03, eq.climate_from_proxy, eq.coefficients, SIGMA,
                              members, rng, shared_fraction=shared_fraction)
        lo, hi = np.quantile(ens, [0.025, 0.975], axis=1)
        single.append(np.mean((true >= lo) & (true <= hi)))
        for w in np.unique(windows):
            inside = windows == w
            band = np.quantile(ens[inside].mean(axis=0), [0.025, 0.975])
            means.append(band[0] <= true[inside].mean() <= band[1])
    return float(np.mean(single)), float(np.mean(means))


@pytest.mark.parametrize("truth_family", ["random_walk", "step", "sine_trend"])
@pytest.mark.parametrize("offset_family", ["normal", "laplace"])
def test_coverage_of_single_samples_and_500_year_means(truth_family, offset_family):
    """Simulation (per family of truth and of offset): a systematic calibration offset drawn
    once per core plus independent scatter. With the default split the 95 % bands of single
    samples and of 500-yr means (10 samples) both hold the truth 90-98 % of the time."""
    single, means = _coverage(truth_family, offset_family, SHARED)
    print(f"{truth_family}/{offset_family}: single {single:.3f}, 500-yr means {means:.3f}")
    assert 0.90 <= single <= 0.98
    assert 0.90 <= means <= 0.98


def test_independent_only_error_makes_means_too_precise():
    """The old model (all calibration error independent per sample) covers single samples
    but 500-yr means far less than 95 % (the offset does not average out)."""
    single, means = _coverage("random_walk", "normal", 0.0, n_cores=60)
    assert 0.90 <= single <= 0.98 and means < 0.80


def test_split_error_draws_variance_and_correlation():
    """Total variance sigma^2, correlation between two samples of a member = the shared
    fraction (exact by construction; Monte-Carlo tolerance 0.02)."""
    draws = split_error_draws(2, 40000, 2.0, 0.3, np.random.default_rng(1))
    assert draws.std(axis=1) == pytest.approx([2.0, 2.0], rel=0.02)
    assert np.corrcoef(draws)[0, 1] == pytest.approx(0.3, abs=0.02)


def _calibrate(column, values, table, ensemble=200):
    samples = pd.DataFrame({"depth_cm": np.arange(len(values)) + 1.0, column: values})
    cfg = CalibrationSettings.from_mapping({column: table}, "run.toml")
    return calibrate_core(StandInCore("AP-1", samples), None, cfg, {}, {}, ensemble,
                          np.random.default_rng(0))


def test_applicability_flags_and_companion():
    """UK'37 = 1.02 lies beyond the index's saturation and the 0-29 degC of Mueller et al.
    (1998); TEX86 = 0.30 gives about 2.8 degC with the warm-water TEX86H form (Kim et al.
    2010, calibrated above 15 degC): both flagged per sample, warned with the depth, and
    the cold-water TEX86L companion is named."""
    uk = _calibrate("uk37", [0.5, 1.02], {"method": "equation", "equation": "uk37_mueller1998"})
    assert list(uk.samples["outside_calibration_range"]) == [False, True]
    assert any("outside the range" in w and "2 cm" in w for w in uk.warnings)
    tex = _calibrate("tex86", [0.30, 0.6], {"method": "equation", "equation": "tex86_kim2010"})
    assert tex.samples["value_median"].iloc[0] == pytest.approx(2.83, abs=1.0)
    assert list(tex.samples["outside_calibration_range"]) == [True, False]
    assert any("tex86l_kim2010" in w for w in tex.warnings)
    low = _calibrate("tex86l", [-0.55], {"method": "equation", "equation": "tex86l_kim2010"})
    # Kim et al. 2010 TEX86L: 67.5 * (-0.55) + 46.9 = 9.775 degC (hand computation)
    assert low.samples["value_median"].iloc[0] == pytest.approx(9.775, abs=0.8)
    assert not low.samples["outside_calibration_range"].any()
    user = _calibrate("x", [1.0, 9.0], {"method": "linear", "slope": 1.0, "intercept": 0.0,
                                         "variable": "t", "climate_range": [0.0, 5.0]})
    assert list(user.samples["outside_calibration_range"]) == [False, True]


def test_stated_series_passes_through_with_its_errors():
    """method = "stated": values in climate units with an independent error and a shared
    offset error: member SD sqrt(0.3^2 + 0.4^2) = 0.5, correlation between samples
    0.4^2 / 0.5^2 = 0.64 (by construction)."""
    result = _calibrate("temp_c", [10.0, 12.0], {"method": "stated", "variable": "t",
                                                 "units": "degC", "error": 0.3,
                                                 "shared_error": 0.4}, ensemble=20000)
    values = result.records[0].values
    assert np.median(values, axis=1) == pytest.approx([10.0, 12.0], abs=0.02)
    assert values.std(axis=1) == pytest.approx([0.5, 0.5], rel=0.03)
    assert np.corrcoef(values)[0, 1] == pytest.approx(0.64, abs=0.03)


def test_coefficient_errors_and_shared_fraction_are_never_both():
    from proxies.problems import InputError
    with pytest.raises(InputError, match="twice"):
        CalibrationSettings.from_mapping({"x": {
            "method": "linear", "slope": 1.0, "intercept": 0.0, "variable": "t",
            "slope_error": 0.1, "shared_error_fraction": 0.5}}, "run.toml")


@pytest.mark.parametrize("form, key", [
    ({"method": "linear", "slope": 0.0, "intercept": 1.0}, "slope"),
    ({"method": "exponential", "prefactor": 2.0, "exponent": 0.0}, "exponent"),
])
def test_a_user_form_that_cannot_be_inverted_is_refused(form, key):
    """A zero climate coefficient leaves the proxy constant in climate: no inverse (the
    linear form's slope, the exponential form's exponent), named by its key."""
    from proxies.problems import InputError
    with pytest.raises(InputError, match=f"{key} must not be zero \\(not invertible\\)"):
        CalibrationSettings.from_mapping({"x": {**form, "variable": "t"}}, "run.toml")
