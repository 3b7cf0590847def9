"""Candidate events of each ensemble member.

- **shift** candidates come from the member's change points in mean
  (:mod:`proxies.events.changepoints`): the series is cut into segments of constant mean, and
  every change point that is not the departure or return of a short excursion segment (an
  interior segment that departs from *both* neighbours in the same direction and lasts at
  most ``max_excursion_points``) is a shift, with the two-sample statistic
  ``z = |m_j - m_{j-1}| / (s sqrt(1/n_{j-1} + 1/n_j))`` (segment means ``m``, observed lengths
  ``n``, ``s`` the residual standard deviation of the piecewise-constant fit);
- **excursion** candidates (departure and return, e.g. a short cold event) come from the scan
  statistic of :mod:`proxies.events.scan`: the best few non-overlapping blocks of at most
  ``max_excursion_points`` of each member, whatever the segmentation found there.

Why two detectors: an excursion found by the segmentation must pay the BIC penalty twice
(departure and return) before it is even a candidate, so on the invented demo cores (a 300-yr
cold event of about 2.5 noise standard deviations) the segmentation missed it in most
members; the scan statistic is the likelihood-ratio test for exactly this alternative and
needs no penalty, its multiplicity being paid for by the red-noise null of the largest
value (:mod:`proxies.events.significance`). Both statistics are calibrated by the same
surrogates.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from proxies.events.changepoints import optimal_partitioning, robust_sigma, robust_sigma_observed
from proxies.events.scan import ScanProfile, excursion_scan, top_blocks

__all__ = ["SHIFT", "EXCURSION", "KIND_NAMES", "EXCURSION_BLOCKS", "Candidates", "detrend_members",
           "remove_background", "member_candidates", "scan_candidates", "detect_candidates"]

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
    """
    x = np.asarray(x, dtype=float)
    if window_points <= 0:
        return detrend_members(x)
    window = int(window_points) | 1  # odd, so that the median is centred
    half = window // 2
    padded = _reflect_ends(x, half)
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


def _one_member(x: np.ndarray, w: np.ndarray, changes: np.ndarray, max_excursion_points: int):
    bounds = np.concatenate([[0], changes, [x.size]])
    starts, stops = bounds[:-1], bounds[1:]
    length = stops - starts
    cw = np.concatenate([[0.0], np.cumsum(w)])
    csum = np.concatenate([[0.0], np.cumsum(w * x)])
    n = cw[stops] - cw[starts]  # observed points per segment
    with np.errstate(invalid="ignore", divide="ignore"):
        means = np.where(n > 0, (csum[stops] - csum[starts]) / np.where(n > 0, n, 1.0), np.nan)
    resid = np.where(w > 0, x - np.repeat(np.nan_to_num(means), length), 0.0)
    dof = max(float(w.sum()) - means.size, 1.0)
    s = np.sqrt(np.sum(resid ** 2) / dof) or 1.0
    rows = []
    in_excursion = np.zeros(changes.size, dtype=bool)
    for j in range(1, means.size - 1):
        if min(n[j - 1], n[j], n[j + 1]) < 1:
            continue
        up, down = means[j] - means[j - 1], means[j] - means[j + 1]
        if up * down > 0 and length[j] <= max_excursion_points:
            n_o = n[j - 1] + n[j + 1]
            m_o = (means[j - 1] * n[j - 1] + means[j + 1] * n[j + 1]) / n_o
            z = abs(means[j] - m_o) / (s * np.sqrt(1 / n[j] + 1 / n_o))
            rows.append((EXCURSION, starts[j], stops[j], z, np.sign(means[j] - m_o), starts[j - 1],
                         stops[j] - 1, stops[j + 1] - 1))
            in_excursion[j - 1] = in_excursion[j] = True
    for j in range(1, means.size):
        if in_excursion[j - 1] or min(n[j - 1], n[j]) < 1:
            continue
        z = abs(means[j] - means[j - 1]) / (s * np.sqrt(1 / n[j - 1] + 1 / n[j]))
        rows.append((SHIFT, starts[j], starts[j], z, np.sign(means[j] - means[j - 1]), starts[j - 1],
                     stops[j] - 1, stops[j] - 1))
    return rows


def member_candidates(x: np.ndarray, changes: list[np.ndarray], max_excursion_points: int,
                      observed: np.ndarray | None = None) -> Candidates:
    """Candidates of every member from its change points.

    Parameters
    ----------
    x : ndarray (T, M)
        Series in forward time (oldest first).
    changes : list of M int arrays
        Change points per member (first index of each new segment).
    max_excursion_points : int
        Longest excursion [points].
    observed : ndarray of bool (T, M), optional
        Points that were observed (not gap-filled); segment means, counts and the residual
        scale use these only. Default: all.

    Returns
    -------
    Candidates
    """
    weights = np.ones(x.shape) if observed is None else observed.astype(float)
    members, rows = [], []
    for m, cps in enumerate(changes):
        found = _one_member(x[:, m], weights[:, m], cps, max_excursion_points)
        rows.extend(found)
        members.extend([m] * len(found))
    if not rows:
        empty_i, empty_f = np.zeros(0, dtype=np.int64), np.zeros(0)
        return Candidates(empty_i, empty_i, empty_i, empty_i, empty_f, empty_f, empty_i, empty_i, empty_i)
    table = np.array(rows, dtype=float)
    as_int = lambda c: table[:, c].astype(np.int64)  # noqa: E731
    return Candidates(np.array(members, dtype=np.int64), as_int(0), as_int(1), as_int(2), table[:, 3],
                      table[:, 4], as_int(5), as_int(6), as_int(7))


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


def _concat(parts: list[Candidates]) -> Candidates:
    names = list(Candidates.__dataclass_fields__)
    return Candidates(*(np.concatenate([getattr(p, f) for p in parts]) for f in names))


def detect_candidates(work: np.ndarray, max_excursion_points: int, penalty: float,
                      observed: np.ndarray | None = None, persistence: float = 0.0,
                      return_profile: bool = False):
    """Shift candidates (change points in mean) and excursion candidates (scan statistic).

    Parameters
    ----------
    work : ndarray (T, M)
        Complete series with the background removed (:func:`remove_background`), oldest first.
    max_excursion_points : int
    penalty : float
        Penalty per added segment (see :func:`proxies.events.changepoints.bic_penalty`).
    observed : ndarray of bool (T, M), optional
        Observed (not gap-filled) points: only they enter the segment costs, means, block
        sums and the noise scales. Default: all points.
    persistence : float
        Lag-one AR(1) coefficient per grid step of the null, used to standardise the scan
        (:func:`proxies.events.scan.excursion_scan`). Default 0 (white).
    return_profile : bool
        Also return the scan profile (for event-level statistics).

    Returns
    -------
    Candidates, or (Candidates, ScanProfile) when ``return_profile``
    """
    work = np.asarray(work, dtype=float)
    if observed is None:
        observed = np.ones(work.shape, dtype=bool)
        changes = optimal_partitioning(work, "mean", penalty=penalty, sigma=robust_sigma(work))
    else:
        changes = optimal_partitioning(work, "mean", penalty=penalty,
                                       sigma=robust_sigma_observed(work, observed),
                                       weights=observed.astype(float))
    segmented = member_candidates(work, changes, max_excursion_points, observed)
    shifts = segmented.subset(segmented.kind == SHIFT)
    profile = excursion_scan(work, observed, max_excursion_points, persistence)
    cands = _concat([shifts, scan_candidates(profile, max_excursion_points)])
    return (cands, profile) if return_profile else cands
