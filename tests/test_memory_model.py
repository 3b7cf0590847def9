"""The accumulation model with memory: exactness against brute-force enumeration.

Every (age, class) path of a tiny problem is enumerated (the definition of the discretised
model); the forward pass must give the same evidence to round-off, and sampled paths the same
node marginals and outlier probabilities within their Monte Carlo error.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from proxies.chronology.accumulation import AccumulationProblem
from proxies.chronology.memory import _Transitions, fit_memory, memory_forward, rate_classes


def _tiny(hiatus=False, seed=5):
    rng = np.random.default_rng(seed)
    size = 12
    mass = rng.random((3, size)) ** 3
    mass /= mass.sum(axis=1, keepdims=True)
    broad = 0.3 * rng.random((3, size)) / size
    return AccumulationProblem(np.array([0.0, 4.0, 9.0]), np.array([False, hiatus]), np.array([0, 2, 2]), mass,
                               np.array([0.1, 0.2, 0.05]), 0.0, 10.0, 10.0, outlier_mass=broad)


def _brute_force(problem, transitions, rate_row, memory):
    size, n_nodes = problem.n_grid, problem.n_nodes
    classes = transitions.rates.shape[1]
    per = problem.date_likelihoods()
    broad = problem.outlier_likelihoods()
    kernels = [transitions.kernel(k)[rate_row] for k in range(n_nodes - 1)]
    stays = [float(transitions.persistence(k, np.array([memory]))[0]) for k in range(n_nodes - 1)]
    total, post, outlier = 0.0, np.zeros((n_nodes, size)), np.zeros(len(problem.date_node))
    for ages in itertools.product(range(size), repeat=n_nodes):
        for cls in itertools.product(range(classes), repeat=n_nodes):
            w = 1.0 / (size * classes)
            for k in range(n_nodes - 1):
                t = ages[k + 1] - ages[k]
                w *= kernels[k][cls[k], t] if 0 <= t < kernels[k].shape[1] else 0.0
                w *= stays[k] * (cls[k] == cls[k + 1]) + (1 - stays[k]) / classes
            if w == 0.0:
                continue
            like = np.array([per[d, ages[k]] for d, k in enumerate(problem.date_node)])
            out = np.array([broad[d, ages[k]] for d, k in enumerate(problem.date_node)])
            w *= like.prod()
            total += w
            for k in range(n_nodes):
                post[k, ages[k]] += w
            outlier += w * problem.outlier_prior * out / like
    return np.log(total), post / total, outlier / total


@pytest.mark.parametrize("hiatus", [False, True])
def test_memory_evidence_equals_brute_force_enumeration(hiatus):
    problem = _tiny(hiatus)
    rates = np.stack([1.5 * rate_classes(0.8, 2), 3.0 * rate_classes(0.4, 2)])
    transitions = _Transitions(problem, rates, 6.0, 25.0)
    memories = np.array([0.7, 0.2])
    log_evidence, _, _ = memory_forward(problem, transitions, np.array([0, 1]), memories)
    for h in range(2):
        exact, _, _ = _brute_force(problem, transitions, h, memories[h])
        assert log_evidence[h] == pytest.approx(exact, abs=1e-10)


def test_memory_paths_follow_the_exact_marginals():
    problem = _tiny(True)
    fit = fit_memory(problem, [2.0], [0.8], [0.7], 25.0, 40000, np.random.default_rng(1), classes=2,
                     within_shape=6.0)
    rates = 2.0 * rate_classes(0.8, 2)[None, :]
    _, post, outlier = _brute_force(problem, _Transitions(problem, rates, 6.0, 25.0), 0, 0.7)
    cells = np.clip(np.round(fit.paths / 10.0).astype(int), 0, problem.n_grid - 1)
    for k in range(problem.n_nodes):
        freq = np.bincount(cells[k], minlength=problem.n_grid) / cells.shape[1]
        # multinomial sd <= 0.0025 at 40,000 paths, plus the within-cell jitter
        assert np.max(np.abs(freq - post[k])) < 0.02
    # Rao-Blackwell average over 40,000 exact paths: Monte Carlo error well below 0.01
    np.testing.assert_allclose(fit.outlier_posterior, outlier, atol=0.01)
    assert np.all(np.diff(fit.paths, axis=0) >= 0)


def test_rate_classes_are_equal_probability_slices_with_mean_one():
    q = rate_classes(1.0, 8)
    assert q.mean() == pytest.approx(1.0)
    assert np.all(np.diff(q) > 0)
    # v = 1 is an exponential: the slices span more than a factor of 20 (regime changes)
    assert q[-1] / q[0] > 20


def test_members_are_shared_among_points_by_their_evidence():
    """Weights proportional to exp(log evidence) (uniform prior over the points); points below
    min_weight draw no member; the members add up; no finite evidence is an error."""
    from proxies.chronology.evidence_weights import members_per_point

    log_z = np.log(np.array([0.6, 0.3, 0.0999, 0.0001])) + 1234.5  # offsets cancel
    weights, active, counts = members_per_point(log_z, 10_000, 1e-3, np.random.default_rng(3))
    np.testing.assert_allclose(weights, [0.6, 0.3, 0.0999, 0.0001], rtol=1e-12)
    assert list(active) == [0, 1, 2] and counts[3] == 0 and counts.sum() == 10_000
    np.testing.assert_allclose(counts[:3] / 10_000, np.array([0.6, 0.3, 0.0999]) / 0.9999, atol=0.02)
    with pytest.raises(ValueError, match="no age-depth path"):
        members_per_point(np.full(3, -np.inf), 10, 1e-3, np.random.default_rng(3))


def test_memory_prior_weights_equal_brute_force_posterior():
    """With a Beta(a, b) prior over the memory the posterior weight of each grid point is the
    beta density there times the brute-force evidence (Bayes' rule over the points, exact), and
    the sampled paths follow the prior-weighted mixture of the exact marginals."""
    from proxies.chronology.memory import memory_log_prior

    problem = _tiny(False, seed=8)
    memories = [0.2, 0.9]
    a, b = 6.0, 1.0
    fit = fit_memory(problem, [2.0], [0.8], memories, 25.0, 40000, np.random.default_rng(2), classes=2,
                     within_shape=6.0, memory_prior=(a, b))
    transitions = _Transitions(problem, 2.0 * rate_classes(0.8, 2)[None, :], 6.0, 25.0)
    exact = [_brute_force(problem, transitions, 0, w) for w in memories]
    # Beta(6, 1) density, by hand (from memory: 6 w^5), not through scipy
    prior = np.array([6 * w**5 for w in memories])
    posterior = prior * np.exp([e[0] for e in exact])
    posterior /= posterior.sum()
    np.testing.assert_allclose(fit.weights, posterior, rtol=1e-5)
    np.testing.assert_allclose(fit.log_evidence, [e[0] for e in exact], atol=1e-4)  # evidence, not prior x evidence
    mixed = sum(p * e[1] for p, e in zip(posterior, exact))
    cells = np.clip(np.round(fit.paths / 10.0).astype(int), 0, problem.n_grid - 1)
    for k in range(problem.n_nodes):
        freq = np.bincount(cells[k], minlength=problem.n_grid) / cells.shape[1]
        assert np.max(np.abs(freq - mixed[k])) < 0.02
    np.testing.assert_allclose(fit.outlier_posterior, sum(p * e[2] for p, e in zip(posterior, exact)), atol=0.01)
    # Beta(1, 1) is the uniform prior over the points: weights proportional to the evidence
    np.testing.assert_allclose(np.exp(memory_log_prior(np.array([0.1, 0.5, 0.9]), 1.0, 1.0)), 1 / 3)
    uniform = fit_memory(problem, [2.0], [0.8], memories, 25.0, 100, np.random.default_rng(2), classes=2,
                         within_shape=6.0)
    evidence = np.exp([e[0] for e in exact])
    np.testing.assert_allclose(uniform.weights, evidence / evidence.sum(), rtol=1e-5)
    with pytest.raises(ValueError, match="no weight"):
        memory_log_prior(np.array([0.0]), 6.0, 1.0)
