"""Significance tests of transfer functions: components and reconstructions.

- :func:`randomisation_t_test`: is a model's cross-validated prediction error smaller than
  another's (van der Voet 1994)? Used for the number of WA-PLS components.
- :func:`random_variable_test`: does a fossil reconstruction explain more of the fossil
  assemblages' variance than reconstructions by transfer functions trained on random
  environmental variables (Telford & Birks 2011)?
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from sklearn.base import clone

__all__ = ["randomisation_t_test", "component_p_values", "variance_explained",
           "RandomVariableTest", "random_variable_test", "choose_by_randomisation"]


def randomisation_t_test(residuals_model, residuals_reference, n_permutations,
                         rng: np.random.Generator) -> float:
    """One-sided randomisation t-test of equal prediction error (van der Voet 1994).

    The statistic is the mean difference of squared cross-validated residuals,
    ``T = mean(e_model^2 - e_reference^2)``; under the null hypothesis the two residuals of a
    sample are exchangeable, so each difference's sign is flipped at random. The p-value is
    ``(1 + #{T_perm <= T}) / (n_permutations + 1)``: small when the model predicts better
    than the reference.

    Parameters
    ----------
    residuals_model, residuals_reference : ndarray (n,)
        Cross-validated residuals of the same samples (NaN pairs are left out).
    n_permutations : int
    rng : numpy.random.Generator
        Signs are drawn as ``rng.random((n_permutations, n)) < 0.5``.

    References
    ----------
    van der Voet, H. (1994). Comparing the predictive accuracy of models using a simple
    randomization test. Chemometrics and Intelligent Laboratory Systems 25, 313-323.
    doi:10.1016/0169-7439(94)85050-X
    """
    a = np.asarray(residuals_model, dtype=float)
    b = np.asarray(residuals_reference, dtype=float)
    ok = np.isfinite(a) & np.isfinite(b)
    d = a[ok] ** 2 - b[ok] ** 2
    observed = d.mean()
    signs = np.where(rng.random((int(n_permutations), d.size)) < 0.5, -1.0, 1.0)
    permuted = (signs * d).mean(axis=1)
    return float((1 + np.sum(permuted <= observed)) / (n_permutations + 1))


def component_p_values(observed, predicted, n_permutations, rng) -> np.ndarray:
    """p-value of each number of components against one component fewer (NaN for one).

    ``predicted`` is (n, A) cross-validated predictions; see :func:`randomisation_t_test`.
    """
    residuals = np.asarray(predicted, dtype=float) - np.asarray(observed, dtype=float)[:, None]
    p = np.full(residuals.shape[1], np.nan)
    for a in range(1, residuals.shape[1]):
        p[a] = randomisation_t_test(residuals[:, a], residuals[:, a - 1], n_permutations, rng)
    return p


def variance_explained(assemblages, reconstructions) -> np.ndarray:
    """Share of the assemblages' variance explained by each reconstruction as the only
    constraint of a redundancy analysis.

    With ``Y`` the column-centred assemblages (n, p) and ``z`` a centred reconstruction
    (n,), the fitted values of the RDA are ``z (z'z)^-1 z'Y`` and the share explained is
    ``|Y'z|^2 / (|z|^2 |Y|_F^2)``.

    Parameters
    ----------
    assemblages : ndarray (n, p)
    reconstructions : ndarray (n,) or (n, k)

    Returns
    -------
    ndarray (k,)
    """
    y = np.asarray(assemblages, dtype=float)
    y = y - y.mean(axis=0)
    z = np.asarray(reconstructions, dtype=float)
    z = (z[:, None] if z.ndim == 1 else z) - np.mean(z if z.ndim > 1 else z[:, None], axis=0)
    total = np.sum(y * y)
    projected = np.sum((y.T @ z) ** 2, axis=0)
    norms = np.sum(z * z, axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where((norms > 0) & (total > 0), projected / (norms * total), np.nan)


@dataclass(frozen=True)
class RandomVariableTest:
    """Result of :func:`random_variable_test`.

    Attributes
    ----------
    explained : float
        Variance share of the fossil assemblages explained by the reconstruction.
    random_explained : ndarray (k,)
        The same for each reconstruction from a random environmental variable.
    first_axis : float
        Share explained by the first principal component (the most any single variable
        can explain).
    p_value : float
        ``(1 + #{random >= explained}) / (k + 1)``.
    """

    explained: float
    random_explained: np.ndarray
    first_axis: float
    p_value: float


def random_variable_test(estimator, training_x, fossil_x, reconstruction, n_random,
                         rng: np.random.Generator, assemblages=None) -> RandomVariableTest:
    """Significance of a reconstruction against transfer functions trained on random
    environmental variables (Telford & Birks 2011).

    Each of ``n_random`` variables is drawn uniformly on [0, 1) per training site (as
    ``rng.random((n_random, n_train))``); a copy of ``estimator`` is fitted to it, the fossil
    samples are reconstructed, and the variance of the fossil assemblages each reconstruction
    explains (:func:`variance_explained`) is compared with that of the real one.

    Parameters
    ----------
    estimator : unfitted scikit-learn estimator (WA, WAPLS, MAT)
    training_x : ndarray (n_train, p)
    fossil_x : ndarray (n_fossil, p)
        Model inputs of the fossil samples.
    reconstruction : ndarray (n_fossil,)
    n_random : int
    rng : numpy.random.Generator
    assemblages : ndarray (n_fossil, q) or None
        What the explained variance is of (default ``fossil_x``).

    References
    ----------
    Telford, R. J. & Birks, H. J. B. (2011). A novel method for assessing the statistical
    significance of quantitative reconstructions inferred from biotic assemblages.
    Quaternary Science Reviews 30, 1272-1278. doi:10.1016/j.quascirev.2011.03.002
    """
    fossil_x = np.asarray(fossil_x, dtype=float)
    data = fossil_x if assemblages is None else np.asarray(assemblages, dtype=float)
    random_y = rng.random((int(n_random), np.asarray(training_x).shape[0]))
    random_recon = np.column_stack([clone(estimator).fit(training_x, y).predict(fossil_x)
                                    for y in random_y]) if n_random else np.zeros((len(data), 0))
    explained = float(variance_explained(data, reconstruction)[0])
    random_explained = variance_explained(data, random_recon)
    centred = data - data.mean(axis=0)
    singular = np.linalg.svd(centred, compute_uv=False)
    first_axis = float(singular[0] ** 2 / np.sum(singular ** 2)) if singular.size and \
        np.sum(singular ** 2) > 0 else float("nan")
    p = (1 + np.sum(random_explained >= explained)) / (random_explained.size + 1)
    return RandomVariableTest(explained, random_explained, first_axis, float(p))


def choose_by_randomisation(p_values, alpha: float = 0.05) -> int:
    """Fewest components after which one more is not significantly better (p >= alpha).

    ``p_values[a]`` compares a + 1 components with a (``p_values[0]`` unused).
    """
    chosen = 1
    for a in range(1, len(p_values)):
        if np.isfinite(p_values[a]) and p_values[a] < alpha:
            chosen = a + 1
        else:
            break
    return chosen
