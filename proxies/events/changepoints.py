"""Change points in mean and in slope by penalised least squares.

The segmentation minimises ``sum_segments C(segment) + beta * (number of segments)`` with
the Gaussian segment cost ``C = RSS / sigma^2`` (RSS about the segment mean for changes in
mean, about the segment's least-squares line for changes in slope). Optimal partitioning
(Jackson et al. 2005) solves it exactly by dynamic programming; PELT (Killick, Fearnhead &
Eckley 2012) gives the same optimum faster by pruning candidates that can never be optimal.
:func:`pelt` segments one series; :func:`optimal_partitioning` segments every member of an
ensemble at once (vectorised over members, exact, O(T^2 M)).

Penalty (our documented choice): the Schwarz/BIC penalty ``beta = p * ln(T)`` per added
segment, with ``p = 2`` for a change in mean (location and level) and ``p = 3`` for a change
in slope (location, intercept, slope) -- the "SIC" penalty of Killick et al. (2012, Sect. 4).
``sigma`` defaults to the robust noise scale ``MAD(diff x) / (0.6745 sqrt 2)``.

References
----------
Killick, R., Fearnhead, P., Eckley, I. A. (2012). Optimal detection of changepoints with a
linear computational cost. JASA 107, 1590-1598. doi:10.1080/01621459.2012.737745
Jackson, B. et al. (2005). An algorithm for optimal partitioning of data on an interval.
IEEE Signal Processing Letters 12, 105-108. doi:10.1109/LSP.2001.838216
Schwarz, G. (1978). Estimating the dimension of a model. Ann. Stat. 6, 461-464.
"""

from __future__ import annotations


import numpy as np
from proxies.warning_sinks import quiet_warnings

__all__ = ["MODELS", "bic_penalty", "robust_sigma", "robust_sigma_observed", "pelt",
           "optimal_partitioning"]

#: Parameters added per extra segment, by model.
MODELS = {"mean": 2, "slope": 3}
_MIN_SIZE = {"mean": 2, "slope": 3}


def bic_penalty(n_points: int, model: str = "mean", factor: float = 1.0) -> float:
    """Schwarz/BIC penalty per added segment: ``factor * p * ln(n)``."""
    if model not in MODELS:
        raise ValueError(f"model must be one of {sorted(MODELS)}, got {model!r}")
    return float(factor * MODELS[model] * np.log(n_points))


def robust_sigma(x: np.ndarray) -> np.ndarray:
    """Noise scale from first differences: ``MAD(diff x) / (0.6745 * sqrt(2))`` per column.

    Insensitive to level shifts (common practice in change-point analysis).
    """
    d = np.diff(np.asarray(x, dtype=float), axis=0)
    mad = np.median(np.abs(d - np.median(d, axis=0)), axis=0)
    sigma = mad / (0.6745 * np.sqrt(2.0))
    fallback = np.std(d, axis=0) / np.sqrt(2.0)
    sigma = np.where(sigma > 0, sigma, fallback)
    return np.where(sigma > 0, sigma, 1.0)


def robust_sigma_observed(x: np.ndarray, observed: np.ndarray) -> np.ndarray:
    """:func:`robust_sigma` from differences of neighbouring points that are both observed.

    Differences involving gap-filled (interpolated) points are too smooth and would
    understate the noise.

    Parameters
    ----------
    x : ndarray (T, M)
        Gap-filled series, one column per member [series units].
    observed : ndarray of bool (T, M)
        True where the point was observed (not gap-filled).

    Returns
    -------
    ndarray (M,)
        Noise standard deviation of each member [series units].
    """
    x = np.asarray(x, dtype=float)
    both = observed[1:] & observed[:-1]
    d = np.where(both, np.diff(x, axis=0), np.nan)
    with quiet_warnings(RuntimeWarning):
        med = np.nanmedian(d, axis=0)
        mad = np.nanmedian(np.abs(d - med), axis=0)
    sigma = mad / (0.6745 * np.sqrt(2.0))
    fallback = robust_sigma(x)
    return np.where(np.isfinite(sigma) & (sigma > 0), sigma, fallback)


class _Cumulants:
    """Cumulative sums giving any segment's RSS in O(1); segment = x[s:t] (half open).

    Optional weights (0 or 1) let gap-filled points take no part in the cost (mean model).
    """

    def __init__(self, x: np.ndarray, weights: np.ndarray | None = None):
        x = np.asarray(x, dtype=float)
        w = np.ones_like(x) if weights is None else np.asarray(weights, dtype=float)
        self.weighted = weights is not None
        x = x - np.sum(w * x, axis=0) / np.maximum(np.sum(w, axis=0), 1e-300)
        idx = np.arange(x.shape[0], dtype=float).reshape((-1,) + (1,) * (x.ndim - 1))
        zero = np.zeros((1,) + x.shape[1:])
        self.sw = np.concatenate([zero, np.cumsum(w, axis=0)])
        self.sx = np.concatenate([zero, np.cumsum(w * x, axis=0)])
        self.sxx = np.concatenate([zero, np.cumsum(w * x * x, axis=0)])
        self.six = np.concatenate([zero, np.cumsum(idx * x, axis=0)])

    def rss(self, s, t, model: str):
        sx = self.sx[t] - self.sx[s]
        sxx = self.sxx[t] - self.sxx[s]
        if model == "mean":
            sw = self.sw[t] - self.sw[s]
            with np.errstate(invalid="ignore", divide="ignore"):
                return np.where(sw > 0, sxx - sx * sx / np.where(sw > 0, sw, 1.0), 0.0)
        if self.weighted:
            raise ValueError("weights are supported for the mean model only")
        n = (t - s).astype(float) if isinstance(t - s, np.ndarray) else float(t - s)
        if np.ndim(n) and np.ndim(sx) > np.ndim(n):
            n = n.reshape(n.shape + (1,) * (np.ndim(sx) - np.ndim(n)))
        centred = sxx - sx * sx / n
        # Index sums over s..t-1 in closed form.
        s_f = np.asarray(s, dtype=float).reshape(np.shape(n)) if np.ndim(n) else float(s)
        si = n * (2 * s_f + n - 1) / 2
        sii = ((t - 1) * t * (2 * t - 1) - (s - 1) * s * (2 * s - 1)) / 6.0
        sii = np.asarray(sii, dtype=float).reshape(np.shape(n)) if np.ndim(n) else float(sii)
        six = self.six[t] - self.six[s]
        sii_c = sii - si * si / n
        six_c = six - si * sx / n
        with np.errstate(invalid="ignore", divide="ignore"):
            return centred - np.where(sii_c > 0, six_c * six_c / sii_c, 0.0)


def pelt(x: np.ndarray, model: str = "mean", penalty: float | None = None,
         sigma: float | None = None, min_size: int | None = None) -> np.ndarray:
    """Pruned Exact Linear Time segmentation of one series (Killick et al. 2012, Algorithm 2).

    Parameters
    ----------
    x : ndarray (T,)
    model : {"mean", "slope"}
    penalty : float, optional
        Penalty per added segment; default :func:`bic_penalty`.
    sigma : float, optional
        Noise scale [units of x]; default :func:`robust_sigma`.
    min_size : int, optional
        Minimum segment length [points]; default 2 (mean) or 3 (slope).

    Returns
    -------
    ndarray of int
        Change points: index of the first point of each new segment, increasing.
    """
    x = np.asarray(x, dtype=float)
    n = x.size
    if model not in MODELS:
        raise ValueError(f"model must be one of {sorted(MODELS)}, got {model!r}")
    beta = bic_penalty(n, model) if penalty is None else float(penalty)
    scale2 = float(robust_sigma(x) if sigma is None else sigma) ** 2
    size = _MIN_SIZE[model] if min_size is None else int(min_size)
    cum = _Cumulants(x)
    best = np.full(n + 1, np.inf)
    best[0] = -beta
    last = np.zeros(n + 1, dtype=np.int64)
    candidates: list[int] = []
    prune_at: dict[int, int] = {}
    for t in range(size, n + 1):
        new = t - size
        if new == 0 or new >= size:
            candidates.append(new)
        cand = np.array(candidates)
        total = best[cand] + cum.rss(cand, t, model) / scale2 + beta
        k = int(np.argmin(total))
        best[t], last[t] = total[k], cand[k]
        # A candidate whose cost already exceeds the optimum can never be optimal for any
        # later end point t' >= t + min_size (Killick et al. 2012, Theorem 3.1, K = 0);
        # it is removed once that is the case.
        for s, value in zip(cand, total - beta):
            if value > best[t] and s not in prune_at:
                prune_at[int(s)] = t + size
        candidates = [s for s in candidates if prune_at.get(s, n + 2) > t]
    changes = []
    t = n
    while t > 0:
        t = int(last[t])
        if t > 0:
            changes.append(t)
    return np.array(sorted(changes), dtype=np.int64)


def optimal_partitioning(x: np.ndarray, model: str = "mean", penalty: float | None = None,
                         sigma: np.ndarray | None = None, min_size: int | None = None,
                         weights: np.ndarray | None = None) -> list[np.ndarray]:
    """Exact optimal partitioning of every member (column) of an ensemble at once.

    Same objective and result as :func:`pelt` member by member; the dynamic programme runs
    over time with all members as a vector, which is faster in numpy than pruning member by
    member.

    Parameters
    ----------
    x : ndarray (T, M)
    model, penalty, min_size : see :func:`pelt`
    sigma : ndarray (M,), optional
        Noise scale per member; default :func:`robust_sigma` per column.
    weights : ndarray (T, M) of 0/1, optional
        Mean model only: points with weight 0 (e.g. filled gaps) do not enter the cost, so
        segments are placed on the grid but fitted to observed points only.

    Returns
    -------
    list of M ndarray of int
        Change points per member (first index of each new segment).
    """
    x = np.asarray(x, dtype=float)
    n, m = x.shape
    beta = bic_penalty(n, model) if penalty is None else float(penalty)
    inv_scale2 = 1.0 / (robust_sigma(x) if sigma is None else np.asarray(sigma, dtype=float)) ** 2
    size = _MIN_SIZE[model] if min_size is None else int(min_size)
    cum = _Cumulants(x, weights)
    best = np.full((n + 1, m), np.inf)
    best[0] = -beta
    last = np.zeros((n + 1, m), dtype=np.int64)
    columns = np.arange(m)
    for t in range(size, n + 1):
        # Candidates s = 0..t-size; those with 0 < s < size have best[s] = inf (no valid
        # segmentation ends there), so a contiguous slice is exact and avoids gathers.
        hi = t - size + 1
        if model == "mean":
            sw = np.maximum(cum.sw[t] - cum.sw[:hi], 1e-12)  # sx = 0 where sw = 0
            sx = cum.sx[t] - cum.sx[:hi]
            cost = (cum.sxx[t] - cum.sxx[:hi]) - sx * sx / sw
        else:
            cost = cum.rss(np.arange(hi), t, model)
        total = best[:hi] + cost * inv_scale2
        k = np.argmin(total, axis=0)
        best[t] = total[k, columns] + beta
        last[t] = k
    out = []
    for j in range(m):
        changes = []
        t = n
        while t > 0:
            t = int(last[t, j])
            if t > 0:
                changes.append(t)
        out.append(np.array(changes[::-1], dtype=np.int64))
    return out
