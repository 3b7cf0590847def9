"""Lasting shifts by the moving-sum (MOSUM) two-sample statistic in red noise.

A lasting shift at grid index ``k`` (oldest first) is a change of level between the ``h``
points before ``k`` and the ``h`` points from ``k`` on. The statistic compares the two window
means directly, on the series *as it is* (no background removed):

``D(k) = mean(x[k : k+h]) - mean(x[k-h : k])``,  ``z(k) = D(k) / (sigma sqrt(V_a(p, q)))``,

with ``p, q`` the observed points in the two windows (truncated at the record's ends, at
least ``support`` each), ``sigma`` a robust noise scale of the member and ``V_a`` the variance
of a difference of means of two adjacent blocks of unit-variance AR(1) noise with lag-one
coefficient ``a``:

``V_a = v_a(p)/p^2 + v_a(q)/q^2 - 2 a (1 - a^p)(1 - a^q) / ((1 - a)^2 p q)``

(``v_a`` from :func:`proxies.events.scan.ar1_sum_variance`; the last term is the covariance
of the two block sums). ``max_k |z(k)|`` is the MOSUM statistic for changes in mean (Hušková
& Slabý 2001; Eichinger & Kirch 2018; from memory). Why not a background-removed series: an
edge-keeping running median follows a clean step, so the step vanished from the residuals
(issue 16: a 3-SD step was found 2 % of the time). The local windows themselves are what
keeps slow change from being cut into steps: a trend of slope ``b`` per point moves ``D``
by only ``b h``. The null (largest ``|z|`` in a red-noise series of the data's persistence)
is obtained by simulation (:mod:`proxies.events.significance`), so ``V_a`` only makes the
positions comparable (near the ends the windows are shorter).

References
----------
(from memory; check before quoting)
Hušková, M., Slabý, A. (2001). Permutation tests for multiple changes. Kybernetika 37, 605-622.
Eichinger, B., Kirch, C. (2018). A MOSUM procedure for the estimation of multiple random
change points. Bernoulli 24, 526-564.
"""

from __future__ import annotations

import numpy as np

from proxies.events.scan import ar1_sum_variance

__all__ = ["mosum_bandwidth", "mosum_profile", "mosum_peaks", "mean_difference_variance"]


def mosum_bandwidth(n_points: int, background_points: int, min_support: int) -> int:
    """Half-width ``h`` of the MOSUM windows [points]: half the background window (changes
    slower than that are not sought), a quarter of the record when the background is a
    straight line (``background_points <= 0``); at least ``2 * min_support``."""
    h = background_points // 2 if background_points > 0 else n_points // 4
    return int(max(h, 2 * max(int(min_support), 1), 2))


def mean_difference_variance(p: np.ndarray, q: np.ndarray, a: float) -> np.ndarray:
    """Variance of ``mean(right block of q) - mean(left block of p)`` for adjacent blocks of
    unit-variance AR(1) noise with lag-one coefficient ``a`` (see the module docstring)."""
    p = np.asarray(p, dtype=float)
    q = np.asarray(q, dtype=float)
    a = float(np.clip(a, 0.0, 1.0 - 1e-9))
    with np.errstate(invalid="ignore", divide="ignore"):
        var = ar1_sum_variance(p, a) / p ** 2 + ar1_sum_variance(q, a) / q ** 2
        if a > 0:
            var = var - 2 * a * (1 - a ** p) * (1 - a ** q) / ((1 - a) ** 2 * p * q)
    return var


def mosum_profile(x: np.ndarray, observed: np.ndarray, h: int, a: float, scale: np.ndarray,
                  support: int) -> np.ndarray:
    """Signed MOSUM statistic ``z(k)`` of every column at every index.

    Parameters
    ----------
    x : ndarray (T, M)
        Complete (gap-filled) series, oldest first.
    observed : ndarray of bool (T, M)
        Observed points: only they enter window sums and counts.
    h : int
        Window half-width [points] (:func:`mosum_bandwidth`).
    a : float
        Lag-one AR(1) coefficient of the null per grid step.
    scale : ndarray (M,)
        Noise scale of each column [units of x].
    support : int
        Observed points each window needs; indices closer to a record's end score 0.

    Returns
    -------
    ndarray (T, M)
        ``z`` (positive: a rise in forward time), 0 where not defined.
    """
    x = np.asarray(x, dtype=float)
    n_t, n_m = x.shape
    obs = np.asarray(observed, dtype=bool)
    c_x = np.concatenate([np.zeros((1, n_m)), np.cumsum(np.where(obs, x, 0.0), axis=0)])
    c_n = np.concatenate([np.zeros((1, n_m)), np.cumsum(obs, axis=0, dtype=float)])
    k = np.arange(n_t)
    lo, hi = np.maximum(k - h, 0), np.minimum(k + h, n_t)
    p = c_n[k] - c_n[lo]
    q = c_n[hi] - c_n[k]
    ok = (p >= support) & (q >= support) & (k >= support)[:, None] & (k <= n_t - support)[:, None]
    with np.errstate(invalid="ignore", divide="ignore"):
        diff = (c_x[hi] - c_x[k]) / q - (c_x[k] - c_x[lo]) / p
        z = diff / (np.asarray(scale, dtype=float)[None, :] * np.sqrt(mean_difference_variance(p, q, a)))
    return np.where(ok & np.isfinite(z), z, 0.0)


def mosum_peaks(z: np.ndarray, h: int, n_peaks: int) -> tuple[np.ndarray, ...]:
    """The ``n_peaks`` largest local maxima of ``|z|`` of each column, at least ``h`` apart.

    Greedy: take the largest ``|z|``, discard every index within ``h`` of it, repeat (one
    change per window, the MOSUM rule of Eichinger & Kirch 2018).

    Returns
    -------
    (column, index, statistic, sign) : ndarrays (K,)
        Only peaks with ``|z| > 0``.
    """
    score = np.abs(z).copy()
    n_t, n_m = score.shape
    cols = np.arange(n_m)
    index = np.arange(n_t)[:, None]
    out = []
    for _ in range(int(n_peaks)):
        k = np.argmax(score, axis=0)
        best = score[k, cols]
        found = best > 0
        if not found.any():
            break
        out.append((cols[found], k[found], best[found], np.sign(z[k, cols])[found]))
        score[np.abs(index - k[None, :]) < h] = 0.0
    if not out:
        empty = np.zeros(0, dtype=np.int64)
        return empty, empty, np.zeros(0), np.zeros(0)
    return tuple(np.concatenate([part[j] for part in out]) for j in range(4))
