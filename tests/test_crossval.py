"""Cross-validation schemes, skill tables and the choice of WA-PLS components."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from calibration_simulation import gaussian_response_training, simulate_species
from proxies.calibration import MAT, WA, WAPLS
from proxies.calibration.crossval import (bootstrap_predictions, choose_n_components,
                                          great_circle_km, hblock_predictions,
                                          kfold_predictions, loo_predictions, largest_segment_bias,
                                          skill_by_components)

NOISE_SD = 1.5


@pytest.fixture(scope="module")
def simulated():
    """Training and fossil sets from the same Gaussian response curves, with recorded-target
    noise of NOISE_SD."""
    rng = np.random.default_rng(2024)
    species = simulate_species(60, rng)
    x, y, _ = gaussian_response_training(300, 60, rng, 500, NOISE_SD, species=species)
    x_new, y_new, _ = gaussian_response_training(200, 60, rng, 500, NOISE_SD, species=species)
    keep = x.sum(axis=0) > 0
    return x[:, keep], y, x_new[:, keep], y_new


@pytest.mark.parametrize("estimator", [WA(), WAPLS(2), MAT(5)], ids=["WA", "WAPLS", "MAT"])
def test_rmsep_close_to_simulated_noise(simulated, estimator):
    """On a training set simulated from Gaussian response curves the leave-one-out RMSEP is
    close to the noise put into the recorded target: at least the noise (it cannot beat
    it) and within 25 % above it (model error on top; our tolerance)."""
    x, y, _, _ = simulated
    pred = loo_predictions(estimator, x, y)[:, -1]
    rmsep = np.sqrt(np.mean((pred - y) ** 2))
    assert 0.95 * NOISE_SD <= rmsep <= 1.25 * NOISE_SD


def test_loo_equals_explicit_refits(simulated):
    """Leave-one-out equals refitting without each sample, written out by hand."""
    x, y, _, _ = simulated
    ours = loo_predictions(WAPLS(2), x[:40], y[:40])
    for i in (0, 17, 39):
        keep = np.arange(40) != i
        model = WAPLS(2).fit(x[:40][keep], y[:40][keep])
        np.testing.assert_allclose(ours[i], model.predict_components(x[i:i + 1])[0])
    mat = loo_predictions(MAT(3), x[:40], y[:40])[:, 0]
    for i in (0, 17, 39):
        keep = np.arange(40) != i
        assert mat[i] == pytest.approx(MAT(3).fit(x[:40][keep], y[:40][keep])
                                       .predict(x[i:i + 1])[0])


def test_kfold_predicts_every_sample_once_and_is_seeded(simulated):
    """k-fold gives one finite prediction per sample, reproducible from the seed, and close
    to leave-one-out RMSEP (within 10 %, common practice)."""
    x, y, _, _ = simulated
    a = kfold_predictions(WA(), x, y, 10, np.random.default_rng(1))
    b = kfold_predictions(WA(), x, y, 10, np.random.default_rng(1))
    assert np.all(np.isfinite(a)) and np.array_equal(a, b)
    loo = loo_predictions(WA(), x, y)
    r_k, r_l = (np.sqrt(np.mean((p[:, 0] - y) ** 2)) for p in (a, loo))
    assert abs(r_k - r_l) / r_l < 0.10


def test_bootstrap_errors_cover_new_samples(simulated):
    """Bootstrap RMSEP (Birks et al. 1990: sqrt(s1^2 + s2^2)) is near LOO RMSEP, and the
    sample-specific errors give 95 % intervals that cover about 95 % of new samples
    simulated from the same curves (simulation check; accepted 90-99 %)."""
    x, y, x_new, y_new = simulated
    boot = bootstrap_predictions(WAPLS(2), x, y, 200, np.random.default_rng(3), X_new=x_new)
    loo = np.sqrt(np.mean((loo_predictions(WAPLS(2), x, y) - y[:, None]) ** 2, axis=0))
    np.testing.assert_allclose(boot.rmsep, loo, rtol=0.15)
    assert np.all(boot.s2 > boot.s1)
    assert np.all(boot.new_errors >= boot.s2[None, :] - 1e-12)
    model = WAPLS(2).fit(x, y)
    pred = model.predict(x_new)
    inside = np.abs(pred - y_new) <= 1.96 * boot.new_errors[:, -1]
    assert 0.90 <= inside.mean() <= 0.99


def test_great_circle_distance():
    """One degree of latitude is 111.19 km on a sphere of radius 6371 km (2 pi R / 360)."""
    d = great_circle_km(np.array([0.0, 1.0, 0.0]), np.array([0.0, 0.0, 90.0]))
    assert d[0, 1] == pytest.approx(2 * np.pi * 6371 / 360, rel=1e-9)
    assert d[0, 2] == pytest.approx(np.pi / 2 * 6371, rel=1e-9)


def test_hblock_is_pessimistic_on_spatially_structured_data():
    """With the target a smooth function of position (spatial autocorrelation), h-block
    cross-validation (Telford & Birks 2009) gives a larger RMSEP than leave-one-out, and
    with h = 0 km it is leave-one-out."""
    rng = np.random.default_rng(8)
    species = simulate_species(40, rng)
    n = 150
    lat = np.sort(rng.uniform(50, 70, n))
    lon = rng.uniform(10, 12, n)
    x, _, _ = gaussian_response_training(n, 40, rng, 300, species=species)
    true = (lat - 50) * 1.25  # 0..25 along the transect
    # re-simulate assemblages at those gradient values
    opt, tol, h = species["optima"], species["tolerances"], species["heights"]
    share = h * np.exp(-0.5 * ((true[:, None] - opt) / tol) ** 2)
    x = rng.poisson(300 * share / share.sum(1, keepdims=True)).astype(float) + 1e-9
    y = true + 2.0 * np.sin(lat)  # spatially structured "noise"
    for estimator in (MAT(5), WA()):
        loo = loo_predictions(estimator, x, y)[:, 0]
        h0 = hblock_predictions(estimator, x, y, lat, lon, 0.0)[:, 0]
        np.testing.assert_allclose(h0, loo)
        hb = hblock_predictions(estimator, x, y, lat, lon, 300.0)[:, 0]
        assert np.sqrt(np.mean((hb - y) ** 2)) > np.sqrt(np.mean((loo - y) ** 2))


def test_skill_table_and_component_rule():
    """Birks (1998): keep a component only if it cuts RMSEP by >= 5 %; maximum bias is the
    largest mean residual over 10 equal segments of the gradient."""
    perf = pd.DataFrame({"rmsep": [2.0, 1.80, 1.75, 1.5]})
    assert choose_n_components(perf) == 2          # 1.75 > 0.95 * 1.80: stop at 2
    assert choose_n_components(pd.DataFrame({"rmsep": [2.0, 1.95]})) == 1
    observed = np.linspace(0, 10, 101)
    predicted = observed.copy()
    predicted[observed >= 9.0] += 3.0              # only the top segment is biased
    assert largest_segment_bias(observed, predicted) == pytest.approx(3.0)
    table = skill_by_components(observed, predicted[:, None], predicted[:, None])
    row = table.iloc[0]
    assert row["mean_bias_cv"] == pytest.approx(3.0 * np.mean(observed >= 9.0))
    assert row["rmsep"] == pytest.approx(np.sqrt(np.mean((predicted - observed) ** 2)))
    assert row["r2_apparent"] == pytest.approx(np.corrcoef(observed, predicted)[0, 1] ** 2)


def test_settings_name_every_validation_scheme():
    """The settings list the schemes without importing crossval (and scikit-learn)."""
    from proxies.calibration import crossval, settings

    assert settings.SCHEMES == crossval.SCHEMES
