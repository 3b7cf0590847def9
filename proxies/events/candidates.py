"""Candidate events of each ensemble member.

- **shift** candidates (lasting changes of level) come from the moving-sum two-sample
  statistic (:mod:`proxies.events.mosum`) on the series itself: each member's largest peaks
  of ``|z|``, one per window half-width ``h``;
- **excursion** candidates (departure and return, e.g. a short cold event) come from the scan
  statistic of :mod:`proxies.events.scan` on the series with its slow background removed
  (:func:`remove_background`): the best few non-overlapping blocks of at most
  ``max_excursion_points`` of each member.

Why two detectors: each is the likelihood-ratio statistic of its own alternative (a lasting
change seen over ``h`` points on each side; a block that departs and returns). The
background that the scan needs (a running median) keeps edges, so a lasting step is not in
the scan's residuals -- which is why shifts are sought on the series, not on the residuals.
Both statistics are calibrated by the same red-noise surrogates
(:mod:`proxies.events.significance`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from proxies.events.mosum import mosum_peaks, mosum_profile
from proxies.events.scan import ScanProfile, excursion_scan, robust_scale, top_blocks

__all__ = ["SHIFT", "EXCURSION", "KIND_NAMES", "EXCURSION_BLOCKS", "Candidates", "detrend_members",
           "remove_background", "shift_candidates", "scan_candidates", "concat_candidates", "detect_candidates"]

SHIFT, EXCURSION = 0, 1
KIND_NAMES = {SHIFT: "shift", EXCURSION: "excursion"}
#: Non-overlapping excursion blocks kept per member (a member may hold more than one event).
EXCURSION_BLOCKS = 3


@dataclass(frozen=True)
class Candidates:
    """Candidate events of a batch of series, flattened (arrays of shape (K,)).

    ``first``/``second`` are the indices of the departure and return change points (equal for
    shifts); ``sign`` is the direction of the departure (+1 up, -1 down); ``window_*`` are
    index windows (inclusive) for the ramp fits: the departure
    ramp spans the segment before and the changed segment, the return ramp the changed
    segment and the one after.
    """

    member: np.ndarray
    kind: np.ndarray
    first: np.ndarray
    second: np.ndarray
    statistic: np.ndarray
    sign: np.ndarray
    window_start: np.ndarray
    window_mid: np.ndarray
    window_stop: np.ndarray

    def __len__(self) -> int:
        return int(self.member.size)

    def subset(self, keep: np.ndarray) -> "Candidates":
        return Candidates(*(getattr(self, f)[keep] for f in self.__dataclass_fields__))


def detrend_members(x: np.ndarray) -> np.ndarray:
    """Remove each column's least-squares straight line (on the index axis)."""
    x = np.asarray(x, dtype=float)
    idx = np.arange(x.shape[0], dtype=float)
    idx -= idx.mean()
    slope = (idx @ (x - x.mean(axis=0))) / (idx @ idx)
    return x - x.mean(axis=0) - np.outer(idx, slope)


def remove_background(x: np.ndarray, window_points: int) -> np.ndarray:
    """Remove the slow background of each column before the change-point search.

    Parameters
    ----------
    x : ndarray (T, M)
        Complete series (no NaN).
    window_points : int
        Width of the centred running median taken as background [points]; the series is
        extended at both ends by point reflection (:func:`_reflect_ends`) so that the window
        stays full. 0 or less removes each column's least-squares straight line instead.

    Returns
    -------
    ndarray (T, M)
        Departures from the background. A running median much wider than an excursion
        leaves the excursion intact while removing slow climate changes (common practice).
        It keeps edges, so a lasting step is *not* in the departures: shifts are sought on
        the series itself (:mod:`proxies.events.mosum`), and the departures are also the
        residuals about the fitted levels on which the null's persistence is estimated.
    """
    x = np.asarray(x, dtype=float)
    if window_points <= 0:
        return detrend_members(x)
    slow = x
    window = int(window_points) | 1  # odd, so that the median is centred
    half = window // 2
    padded = _reflect_ends(slow, half)
    background = pd.DataFrame(padded).rolling(window, center=True, min_periods=1).median().to_numpy()
    return x - background[half: half + x.shape[0]]


def _reflect_ends(x: np.ndarray, half: int) -> np.ndarray:
    """Pad ``half`` points at both ends by point reflection about the median of the first
    (last) ``half + 1`` points, placed at their centre: a straight line continues as itself,
    so a trend leaves no step where the running median would otherwise shrink at the ends
    (on a smooth ensemble-median series that step alone was 'significant')."""
    n_t = x.shape[0]
    k = min(half + 1, n_t)
    j = np.arange(1, half + 1)
    front = 2 * np.median(x[:k], axis=0) - x[np.clip(k - 1 + j, 0, n_t - 1)]
    back = 2 * np.median(x[n_t - k:], axis=0) - x[np.clip(n_t - k - j, 0, n_t - 1)]
    return np.concatenate([front[::-1], x, back])


def scan_candidates(profile: ScanProfile, max_excursion_points: int,
                    n_blocks: int = EXCURSION_BLOCKS) -> Candidates:
    """Excursion candidates: each member's best non-overlapping scan blocks.

    Parameters
    ----------
    profile : ScanProfile
        From :func:`proxies.events.scan.excursion_scan`.
    max_excursion_points : int
        Longest excursion [points]; also the flank width allowed to the ramp fits.
    n_blocks : int
        Blocks kept per member.

    Returns
    -------
    Candidates
        Kind ``EXCURSION``; ``first`` = first point of the block, ``second`` = first point
        after it; ramp windows reach ``max_excursion_points`` beyond the block on both sides.
    """
    n_t = profile.up.shape[0]
    member, start, length, sign, score = top_blocks(profile, n_blocks)
    stop = start + length
    return Candidates(member.astype(np.int64), np.full(member.size, EXCURSION, dtype=np.int64),
                      start.astype(np.int64), stop.astype(np.int64), score.astype(float),
                      sign.astype(float), np.maximum(start - max_excursion_points, 0).astype(np.int64),
                      (stop - 1).astype(np.int64),
                      np.minimum(stop - 1 + max_excursion_points, n_t - 1).astype(np.int64))


def concat_candidates(parts: list[Candidates]) -> Candidates:
    names = list(Candidates.__dataclass_fields__)
    return Candidates(*(np.concatenate([getattr(p, f) for p in parts]) for f in names))


def shift_candidates(series: np.ndarray, observed: np.ndarray, h: int, persistence: float,
                     scale: np.ndarray, min_support: int) -> Candidates:
    """Shift candidates: each column's largest MOSUM peaks (:mod:`proxies.events.mosum`).

    Parameters
    ----------
    series : ndarray (T, M)
        Gap-filled series (background *not* removed), oldest first.
    observed : ndarray of bool (T, M)
    h : int
        Window half-width [points]; peaks are at least ``h`` apart, ``max(2, T // h)`` kept.
    persistence : float
        Lag-one AR(1) coefficient of the null per grid step.
    scale : ndarray (M,)
        Noise scale of each column (of the background-removed series).
    min_support : int

    Returns
    -------
    Candidates
        Kind ``SHIFT``; ``first = second`` the first index of the new level; ramp windows the
        two MOSUM windows.
    """
    n_t = series.shape[0]
    z = mosum_profile(series, observed, h, persistence, scale, min_support)
    member, index, stat, sign = mosum_peaks(z, h, max(2, n_t // h))
    index = index.astype(np.int64)
    lo = np.maximum(index - h, 0)
    hi = np.minimum(index + h - 1, n_t - 1)
    return Candidates(member.astype(np.int64), np.full(member.size, SHIFT, dtype=np.int64), index, index,
                      stat.astype(float), sign.astype(float), lo, hi, hi)


def detect_candidates(work: np.ndarray, max_excursion_points: int, min_support: int,
                      observed: np.ndarray | None = None, persistence: float = 0.0,
                      return_profile: bool = False, series: np.ndarray | None = None,
                      shift_window_points: int | None = None, scale: np.ndarray | None = None,
                      shift_persistence: float | None = None):
    """Shift candidates (MOSUM peaks) and excursion candidates (scan statistic).

    Parameters
    ----------
    work : ndarray (T, M)
        Complete series with the background removed (:func:`remove_background`), oldest first.
    max_excursion_points : int
    min_support : int
        Points of record an event needs beyond it on each side: shifts need this many in
        each window, excursion blocks this many before and after.
    observed : ndarray of bool (T, M), optional
        Observed (not gap-filled) points: only they enter block and window sums and the
        noise scale. Default: all points.
    persistence : float
        Lag-one AR(1) coefficient per grid step of the null, used to standardise both
        statistics. Default 0 (white).
    return_profile : bool
        Also return the scan profile (for event-level statistics).
    series : ndarray (T, M), optional
        The gap-filled series before background removal, searched for shifts. Default:
        ``work`` (then a lasting step is only seen where the background did not follow it).
    shift_window_points : int, optional
        MOSUM half-width [points]; default a quarter of the record.
    scale : ndarray (M,), optional
        Noise scale of each column for both statistics; default the robust scale of ``work``.
    shift_persistence : float, optional
        Lag-one coefficient standardising the shift statistic; default ``persistence``.

    Returns
    -------
    Candidates, or (Candidates, ScanProfile) when ``return_profile``
    """
    work = np.asarray(work, dtype=float)
    if observed is None:
        observed = np.ones(work.shape, dtype=bool)
    series = work if series is None else np.asarray(series, dtype=float)
    h = shift_window_points or max(work.shape[0] // 4, 2 * min_support)
    scale = robust_scale(work, observed) if scale is None else np.asarray(scale, dtype=float)
    a_shift = persistence if shift_persistence is None else shift_persistence
    shifts = shift_candidates(series, observed, h, a_shift, scale, min_support)
    profile = excursion_scan(work, observed, max_excursion_points, persistence, support=min_support, scale=scale)
    cands = concat_candidates([shifts, scan_candidates(profile, max_excursion_points)])
    return (cands, profile) if return_profile else cands
