"""Benchmark of the transfer-function cross-validation; prints one JSON line.

- ``wapls_bootstrap_seconds``: WA-PLS, 3 components, 1,000 bootstrap cycles, 300 samples x
  100 taxa (target <= 10 s);
- ``mat_loo_seconds``: MAT leave-one-out, 2,000 samples x 150 taxa (target <= 5 s);
- ``random_tf_test_seconds``: the random-environmental-variable significance test (Telford
  & Birks 2011) with 99 random variables, WA-PLS with 3 components, 300 training samples x
  100 taxa, 200 fossil samples (target <= 20 s).

Training sets are simulated from Gaussian response curves (seeded, no files).
"""

from __future__ import annotations

import json
import time

import numpy as np

from proxies.calibration import MAT, WAPLS
from proxies.calibration.crossval import bootstrap_predictions, loo_predictions
from proxies.calibration.significance import random_variable_test


def simulate_training(n_samples, n_taxa, rng):
    """Percentages from Gaussian response curves along a 0-25 gradient, Poisson counts."""
    y = rng.uniform(0.0, 25.0, n_samples)
    optima = rng.uniform(-3.0, 28.0, n_taxa)
    tolerances = rng.uniform(1.5, 6.0, n_taxa)
    heights = rng.lognormal(0.0, 1.0, n_taxa)
    expected = heights * np.exp(-0.5 * ((y[:, None] - optima) / tolerances) ** 2)
    counts = rng.poisson(400 * expected / expected.sum(axis=1, keepdims=True)).astype(float)
    counts[counts.sum(axis=1) == 0, 0] = 1.0
    return 100.0 * counts / counts.sum(axis=1, keepdims=True), y


def main():
    rng = np.random.default_rng(20261201)
    x, y = simulate_training(300, 100, rng)
    start = time.perf_counter()
    bootstrap_predictions(WAPLS(n_components=3), x, y, 1000, rng)
    wapls_seconds = time.perf_counter() - start

    x, y = simulate_training(2000, 150, rng)
    start = time.perf_counter()
    loo_predictions(MAT(n_analogues=5), x, y)
    mat_seconds = time.perf_counter() - start

    x, y = simulate_training(300, 100, rng)
    fossil, _ = simulate_training(200, 100, rng)
    start = time.perf_counter()
    reconstruction = WAPLS(n_components=3).fit(x, y).predict(fossil)
    random_variable_test(WAPLS(n_components=3), x, fossil, reconstruction, 99, rng)
    random_seconds = time.perf_counter() - start
    print(json.dumps({"wapls_bootstrap_seconds": round(wapls_seconds, 3),
                      "mat_loo_seconds": round(mat_seconds, 3),
                      "random_tf_test_seconds": round(random_seconds, 3)}))


if __name__ == "__main__":
    main()
