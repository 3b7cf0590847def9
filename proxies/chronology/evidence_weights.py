"""Hyper-parameter points of the accumulation models weighted by their exact evidence.

The accumulation models (:mod:`proxies.chronology.accumulation`, :mod:`proxies.chronology.memory`)
integrate their hyper-parameters over a small grid: each point's weight is its prior weight
times its exact marginal likelihood of the dates (by default a uniform prior over the points),
and the ensemble's members are shared among the points by that weight.
"""

from __future__ import annotations

import numpy as np

__all__ = ["members_per_point"]


def members_per_point(log_evidence: np.ndarray, members: int, min_weight: float,
                      rng: np.random.Generator, log_prior: np.ndarray | None = None,
                      ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Posterior weights of the hyper-parameter points and the members each one draws.

    The weight of point h is proportional to its prior weight times its exact evidence,
    ``w_h = exp(log pi_h + log Z_h - max)``, normalised (Bayes' rule over a discrete set of
    points); with no ``log_prior`` the prior is uniform over the points. The ``members`` paths
    are shared among the points with ``w_h >= min_weight`` by one multinomial draw.

    Parameters
    ----------
    log_evidence : ndarray, shape (H,)
        Log marginal likelihood of the dates at each point.
    members : int
        Paths to draw.
    min_weight : float
        Points below this weight draw none (the others renormalised).
    rng : numpy.random.Generator
    log_prior : ndarray, shape (H,), optional
        Log prior weight of each point (any constant offset; -inf excludes a point).

    Returns
    -------
    weights : ndarray, shape (H,)
    active : ndarray of int
        Points with ``weights >= min_weight``.
    counts : ndarray of int, shape (H,)
        Paths drawn by each point (sum ``members``).

    Raises
    ------
    ValueError
        When no point has a finite evidence (no path fits the dates on the grid).
    """
    if log_prior is not None:
        log_evidence = log_evidence + np.asarray(log_prior, dtype=float)
    if not np.any(np.isfinite(log_evidence)):
        raise ValueError("no age-depth path is compatible with the dates on the calendar grid; "
                         "check the dates, hiatuses and grid range")
    weights = np.exp(log_evidence - np.max(log_evidence))
    weights /= weights.sum()
    active = np.flatnonzero(weights >= min_weight)
    counts = np.zeros(weights.size, dtype=int)
    counts[active] = rng.multinomial(members, weights[active] / weights[active].sum())
    return weights, active, counts
