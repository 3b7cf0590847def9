"""Simulated training sets shared by the calibration tests (Gaussian response curves)."""

from __future__ import annotations

import numpy as np


def simulate_species(n_taxa, rng, gradient=(0.0, 25.0)):
    """Optima, tolerances and heights of Gaussian response curves."""
    lo, hi = gradient
    return {"optima": rng.uniform(lo - 3, hi + 3, n_taxa),
            "tolerances": rng.uniform(1.5, 5.0, n_taxa),
            "heights": rng.lognormal(0.0, 1.0, n_taxa)}


def gaussian_response_training(n_samples, n_taxa, rng, count_total=400, noise_sd=0.0,
                               gradient=(0.0, 25.0), species=None):
    """Percentages and targets simulated from Gaussian species response curves.

    Expected abundance of taxon k at gradient value y is
    ``h_k exp(-(y - u_k)^2 / (2 t_k^2))``; counts are Poisson around the expected share of
    ``count_total`` individuals. ``noise_sd`` adds Gaussian noise to the *recorded* target
    (the climate measured at the site differs from what the assemblage responds to).

    Returns
    -------
    percent : ndarray (n_samples, n_taxa)
    observed : ndarray (n_samples,)
        True gradient + noise.
    true : ndarray (n_samples,)
    """
    lo, hi = gradient
    species = species or simulate_species(n_taxa, rng, gradient)
    optima, tolerances, heights = species["optima"], species["tolerances"], species["heights"]
    true = rng.uniform(lo, hi, n_samples)
    expected = heights * np.exp(-0.5 * ((true[:, None] - optima) / tolerances) ** 2)
    share = expected / expected.sum(axis=1, keepdims=True)
    counts = rng.poisson(count_total * share).astype(float)
    empty = counts.sum(axis=1) == 0
    counts[empty, np.argmax(share[empty], axis=1)] = 1.0
    percent = 100.0 * counts / counts.sum(axis=1, keepdims=True)
    observed = true + noise_sd * rng.standard_normal(n_samples)
    return percent, observed, true
