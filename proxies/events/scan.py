"""Scan statistic for excursions (departure and return) in red noise.

An excursion is a block of ``L`` consecutive grid points whose mean departs from the local
background (the series has its background removed first,
:func:`proxies.events.candidates.remove_background`). For a block starting at ``s`` with
``n`` observed points, the statistic is the standardised block sum

``z(s, L) = sum_{i in block, observed} x_i / (sigma * sqrt(v_a(n)))``,

``v_a(n) = n (1 + a)/(1 - a) - 2 a (1 - a^n)/(1 - a)^2`` the variance of a sum of ``n``
consecutive unit-variance AR(1) values with lag-one coefficient ``a`` (e.g. Mudelsee 2014,
Sect. 2.5; from memory), and ``sigma`` a robust marginal scale of the member (1.4826 times
the median absolute deviation of its observed values, common practice), which a short
event barely moves. For Gaussian noise of known persistence, ``max_{s, L} |z(s, L)|`` is the
generalised likelihood-ratio statistic of the "epidemic" (square-wave) change-point
alternative, i.e. the scan statistic (Levin & Kline 1985; Siegmund & Venkatraman 1995): the
matched filter for a departure that returns, searched over every start and every length from
``min_points`` to ``max_points``. It is more powerful for a short event than a penalised
segmentation, which must pay its penalty twice (departure and return) before the event is
even a candidate. Its null distribution (largest value in a whole red-noise series) is
obtained by simulation in :mod:`proxies.events.significance`, so ``v_a`` only balances the
block lengths against each other; it need not be exact for the test to hold its level.

References
----------
(from memory; check before quoting)
Levin, B., Kline, J. (1985). The cusum test of homogeneity with an application in
spontaneous abortion epidemiology. Statistics in Medicine 4, 469-488.
Siegmund, D., Venkatraman, E. S. (1995). Using the generalized likelihood ratio statistic for
sequential detection of a change-point. Ann. Stat. 23, 255-271.
Mudelsee, M. (2014). Climate Time Series Analysis, 2nd ed. Springer.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from proxies.warning_sinks import quiet_warnings

__all__ = ["MIN_BLOCK_POINTS", "ScanProfile", "ar1_sum_variance", "robust_scale", "excursion_scan",
           "top_blocks"]

#: Shortest block searched [grid points]: one point alone is an outlier, not an event.
MIN_BLOCK_POINTS = 2


@dataclass(frozen=True)
class ScanProfile:
    """Best block of each start index and direction, for a batch of series.

    Attributes
    ----------
    up, down : ndarray (T, M)
        Largest ``z`` (``up``) and largest ``-z`` (``down``) over block lengths of blocks
        starting at each index; ``-inf`` where no block of at least two observed points starts.
    up_length, down_length : ndarray of int (T, M)
        Length [points] of that block.
    """

    up: np.ndarray
    down: np.ndarray
    up_length: np.ndarray
    down_length: np.ndarray

    def best(self, sign: int) -> tuple[np.ndarray, np.ndarray]:
        """(score, length) arrays of the direction ``sign`` (+1 up, -1 down)."""
        return (self.up, self.up_length) if sign > 0 else (self.down, self.down_length)


def ar1_sum_variance(n: np.ndarray, a: float) -> np.ndarray:
    """Variance of the sum of ``n`` consecutive unit-variance AR(1) values, coefficient ``a``.

    ``n + 2 sum_{k=1}^{n-1} (n - k) a^k = n (1 + a)/(1 - a) - 2 a (1 - a^n)/(1 - a)^2``
    (geometric series; ``a = 0`` gives ``n``, white noise).
    """
    n = np.asarray(n, dtype=float)
    a = float(np.clip(a, 0.0, 1.0 - 1e-9))
    if a == 0.0:
        return n
    return n * (1 + a) / (1 - a) - 2 * a * (1 - a ** n) / (1 - a) ** 2


def robust_scale(work: np.ndarray, observed: np.ndarray) -> np.ndarray:
    """1.4826 x median absolute deviation of each column's observed values (common practice).

    Parameters
    ----------
    work : ndarray (T, M)
    observed : ndarray of bool (T, M)

    Returns
    -------
    ndarray (M,)
        Positive scale [units of work]; the standard deviation where the MAD is 0, else 1.
    """
    values = np.where(observed, work, np.nan)
    with quiet_warnings(RuntimeWarning):
        centre = np.nanmedian(values, axis=0)
        mad = np.nanmedian(np.abs(values - centre), axis=0)
        sd = np.nanstd(values, axis=0)
    scale = 1.4826 * mad
    scale = np.where(np.isfinite(scale) & (scale > 0), scale, sd)
    return np.where(np.isfinite(scale) & (scale > 0), scale, 1.0)


def excursion_scan(work: np.ndarray, observed: np.ndarray, max_points: int, a: float = 0.0,
                   min_points: int = MIN_BLOCK_POINTS, support: int = 0,
                   scale: np.ndarray | None = None) -> ScanProfile:
    """Scan every block (start, length) of every column for a departure from zero.

    Parameters
    ----------
    work : ndarray (T, M)
        Series with the background removed, oldest first (gap-filled; gaps are ignored).
    observed : ndarray of bool (T, M)
        Observed (not gap-filled) points; only they enter block sums and counts.
    max_points : int
        Longest block [points].
    a : float
        Lag-one AR(1) coefficient of the null (per grid step) used to standardise sums.
    min_points : int
        Shortest block [points]; a block also needs at least ``min_points`` observed points.
    support : int
        Points of record a block needs before and after it (a departure at the record's end
        has no return to show, nor a level before it): blocks closer to an end score -inf.
    scale : ndarray (M,), optional
        Noise scale of each column; default :func:`robust_scale` of the column.

    Returns
    -------
    ScanProfile
    """
    work = np.asarray(work, dtype=float)
    n_t, n_m = work.shape
    scale = robust_scale(work, observed) if scale is None else np.asarray(scale, dtype=float)
    values = np.where(observed, work, 0.0) / scale
    c_x = np.concatenate([np.zeros((1, n_m)), np.cumsum(values, axis=0)])
    c_n = np.concatenate([np.zeros((1, n_m), dtype=np.int64),
                          np.cumsum(np.asarray(observed, dtype=bool), axis=0, dtype=np.int64)])
    max_count = max(int(max_points), 1)
    sd = np.sqrt(ar1_sum_variance(np.arange(max_count + 1), a))
    sd[0] = 1.0
    up = np.full((n_t, n_m), -np.inf)
    down = np.full((n_t, n_m), -np.inf)
    up_len = np.zeros((n_t, n_m), dtype=np.int64)
    down_len = np.zeros((n_t, n_m), dtype=np.int64)
    for length in range(max(int(min_points), 1), min(int(max_points), n_t) + 1):
        starts = n_t - length + 1
        total = c_x[length:length + starts] - c_x[:starts]
        count = c_n[length:length + starts] - c_n[:starts]
        inside = (np.arange(starts) >= support) & (np.arange(starts) + length <= n_t - support)
        count = np.where(inside[:, None], count, 0)
        z = np.where(count >= min_points, total / sd[count], 0.0)
        z_up = np.where(count >= min_points, z, -np.inf)
        z_down = np.where(count >= min_points, -z, -np.inf)
        better = z_up > up[:starts]
        up[:starts] = np.where(better, z_up, up[:starts])
        up_len[:starts] = np.where(better, length, up_len[:starts])
        better = z_down > down[:starts]
        down[:starts] = np.where(better, z_down, down[:starts])
        down_len[:starts] = np.where(better, length, down_len[:starts])
    return ScanProfile(up, down, up_len, down_len)


def top_blocks(profile: ScanProfile, n_blocks: int) -> tuple[np.ndarray, ...]:
    """The ``n_blocks`` best non-overlapping blocks of each column, best first.

    Greedy: take the block with the largest score (either direction), discard every block
    overlapping it, repeat.

    Returns
    -------
    (column, start, length, sign, score) : ndarrays (K,)
        Only blocks with a finite score; ``sign`` is +1 (up) or -1 (down).
    """
    n_t, n_m = profile.up.shape
    up_better = profile.up >= profile.down
    score = np.where(up_better, profile.up, profile.down).copy()
    length = np.where(up_better, profile.up_length, profile.down_length)
    sign = np.where(up_better, 1, -1)
    index = np.arange(n_t)[:, None]
    ends = index + length
    cols = np.arange(n_m)
    out = []
    for _ in range(int(n_blocks)):
        k = np.argmax(score, axis=0)
        best = score[k, cols]
        found = np.isfinite(best)
        if not found.any():
            break
        start, size = k, length[k, cols]
        out.append((cols[found], start[found], size[found], sign[k, cols][found], best[found]))
        overlap = (index < (start + size)[None, :]) & (ends > start[None, :])
        score[overlap] = -np.inf
    if not out:
        empty = np.zeros(0, dtype=np.int64)
        return empty, empty, empty, empty, np.zeros(0)
    return tuple(np.concatenate([part[j] for part in out]) for j in range(5))
