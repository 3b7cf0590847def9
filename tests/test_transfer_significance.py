"""Transfer-function refinements: N2-corrected tolerances, MAT distances under a transform,
the randomisation t-test for WA-PLS components and the random-variable significance test."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.base import clone

from calibration_simulation import gaussian_response_training, simulate_species
from proxies.calibration import MAT, WA, WAPLS
from proxies.calibration.assemblage import transform_abundances
from proxies.calibration.crossval import loo_predictions
from proxies.calibration.significance import (component_p_values, random_variable_test,
                                              randomisation_t_test, variance_explained)
from proxies.calibration.wa import hill_n2, n2_corrected_tolerances


def _rmsep(model, x, y):
    return float(np.sqrt(np.mean((loo_predictions(model, x, y)[:, 0] - y) ** 2)))


def test_tolerance_weighted_wa_resists_rare_noise_taxa():
    """Ten taxa present at two random sites each (noise, no response to the gradient):
    WA-Tol with N2-corrected tolerances and the default floor stays within 10 % of plain
    WA's leave-one-out RMSEP (Birks et al. 1990; ter Braak & van Dam 1989), per simulated
    training set."""
    for seed in (5, 6, 7):
        _noise_taxa_case(seed)


def _noise_taxa_case(seed):
    rng = np.random.default_rng(seed)
    x, y, _ = gaussian_response_training(150, 25, rng, 400, 0.5)
    noise = np.zeros((150, 10))
    for k in range(10):
        noise[rng.choice(150, 2, replace=False), k] = rng.uniform(5, 30, 2)
    data = np.hstack([x, noise])
    data = 100 * data / data.sum(axis=1, keepdims=True)
    plain = _rmsep(WA(), data, y)
    weighted = _rmsep(WA(tolerance_weighting=True), data, y)
    print(f"LOO RMSEP plain WA {plain:.3f}, WA-Tol {weighted:.3f}")
    assert weighted <= 1.10 * plain


def test_n2_correction_by_hand():
    """Two equal occurrences: N2 = 2, correction factor 1 / sqrt(1 - 1/2) = sqrt(2)
    (Hill 1973; hand computation); one occurrence: undefined."""
    X = np.array([[1.0, 0.0], [1.0, 2.0], [0.0, 0.0]])
    np.testing.assert_allclose(hill_n2(X), [2.0, 1.0])
    np.testing.assert_allclose(n2_corrected_tolerances([1.0, 1.0], [2.0, 1.0]),
                               [np.sqrt(2.0), np.nan])


def test_mat_distances_with_sqrt_transform_are_squared_chord():
    """With transform = "sqrt" the model input is sqrt(percent); the analogue distances are
    the squared-chord distances of the proportions, sum_k (sqrt(p_ik) - sqrt(q_jk))^2
    (Overpeck et al. 1985), computed here by hand in a loop."""
    rng = np.random.default_rng(2)
    percent = 100 * rng.dirichlet(np.ones(8) * 0.5, 12)
    model = MAT(n_analogues=3, input_transform="sqrt").fit(
        transform_abundances(percent[:9], "sqrt"), np.arange(9.0))
    distances, indices = model.kneighbors(transform_abundances(percent[9:], "sqrt"))
    for i, query in enumerate(percent[9:]):
        p = query / query.sum()
        by_hand = [np.sum((np.sqrt(p) - np.sqrt(t / t.sum())) ** 2) for t in percent[:9]]
        np.testing.assert_allclose(distances[i], np.sort(by_hand)[:3], atol=1e-12)
        np.testing.assert_array_equal(indices[i], np.argsort(by_hand)[:3])


def _loop_randomisation(a, b, n_permutations, rng):
    """Independent loop version of van der Voet's (1994) test: one permutation at a time,
    swapping the two models' squared residuals of a sample with probability 1/2."""
    d_observed = np.mean(a ** 2 - b ** 2)
    hits = 0
    for _ in range(n_permutations):
        swap = rng.random(a.size) < 0.5
        first = np.where(swap, b ** 2, a ** 2)
        second = np.where(swap, a ** 2, b ** 2)
        hits += np.mean(first - second) <= d_observed
    return (1 + hits) / (n_permutations + 1)


def test_randomisation_t_test_agrees_with_a_loop():
    rng = np.random.default_rng(9)
    x, y, _ = gaussian_response_training(80, 20, rng, 300, 1.0)
    predicted = loo_predictions(WAPLS(n_components=3), x, y)
    residuals = predicted - y[:, None]
    for a in (1, 2):
        fast = randomisation_t_test(residuals[:, a], residuals[:, a - 1], 499,
                                    np.random.default_rng(a))
        loop = _loop_randomisation(residuals[:, a], residuals[:, a - 1], 499,
                                   np.random.default_rng(a))
        assert fast == pytest.approx(loop, abs=1e-12)
    p = component_p_values(y, predicted, 499, np.random.default_rng(0))
    assert np.isnan(p[0]) and np.all((p[1:] > 0) & (p[1:] <= 1))


def test_second_component_is_significant_when_it_helps():
    """A clearly better model (residuals halved) gives a small p; identical models ~0.5+."""
    rng = np.random.default_rng(1)
    e = rng.normal(0, 1, 200)
    assert randomisation_t_test(e / 2, e, 999, rng) < 0.01
    assert randomisation_t_test(e, e, 999, rng) == 1.0


def _loop_random_variable_test(estimator, train_x, fossil_x, reconstruction, n, rng):
    """Telford & Birks (2011) with explicit loops: RDA with one constraint through
    numpy.linalg.lstsq, one random variable at a time."""
    y = fossil_x - fossil_x.mean(axis=0)

    def explained(z):
        design = np.column_stack([np.ones(len(z)), z])
        fitted = design @ np.linalg.lstsq(design, y, rcond=None)[0]
        return np.sum(fitted ** 2) / np.sum(y ** 2)

    random_y = rng.random((n, train_x.shape[0]))
    real = explained(reconstruction)
    random = [explained(clone(estimator).fit(train_x, r).predict(fossil_x)) for r in random_y]
    return real, np.array(random), (1 + sum(v >= real for v in random)) / (n + 1)


def test_random_variable_test_agrees_with_a_loop():
    rng = np.random.default_rng(4)
    species = simulate_species(30, rng)
    train, y, _ = gaussian_response_training(100, 30, rng, 400, 0.5, species=species)
    fossil, _, _ = gaussian_response_training(40, 30, rng, 400, 0.0, species=species)
    model = WAPLS(n_components=2).fit(train, y)
    recon = model.predict(fossil)
    fast = random_variable_test(WAPLS(n_components=2), train, fossil, recon, 49,
                                np.random.default_rng(3))
    real, random, p = _loop_random_variable_test(WAPLS(n_components=2), train, fossil, recon,
                                                 49, np.random.default_rng(3))
    assert fast.explained == pytest.approx(real, rel=1e-10)
    np.testing.assert_allclose(fast.random_explained, random, rtol=1e-10)
    assert fast.p_value == pytest.approx(p)
    assert fast.explained <= fast.first_axis + 1e-12   # no variable beats the first axis
    np.testing.assert_allclose(variance_explained(fossil, np.column_stack([recon, recon])),
                               [real, real], rtol=1e-10)
