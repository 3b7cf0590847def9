"""Candidate events of each ensemble member, from its change points in mean.

A member's series is cut into segments of constant mean (:mod:`proxies.events.changepoints`).
Every interior segment that departs from *both* neighbours in the same direction and lasts
at most ``max_excursion_points`` is an **excursion** candidate (departure and return, e.g. a
short cold event); every other change point is a **shift** candidate. Each candidate gets a
two-sample statistic (our choice, calibrated by red-noise surrogates in
:mod:`proxies.events.significance`):

- shift between segments ``j-1`` and ``j``: ``z = |m_j - m_{j-1}| / (s sqrt(1/n_{j-1} + 1/n_j))``;
- excursion in segment ``j``: ``z = |m_j - m_o| / (s sqrt(1/n_j + 1/n_o))`` where ``m_o`` and
  ``n_o`` pool both neighbours;

with segment means ``m``, lengths ``n`` and ``s`` the residual standard deviation of the
member's piecewise-constant fit.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from proxies.events.changepoints import optimal_partitioning, robust_sigma, robust_sigma_observed

__all__ = ["SHIFT", "EXCURSION", "KIND_NAMES", "Candidates", "detrend_members", "remove_background",
           "member_candidates", "detect_candidates"]

SHIFT, EXCURSION = 0, 1
KIND_NAMES = {SHIFT: "shift", EXCURSION: "excursion"}


@dataclass(frozen=True)
class Candidates:
    """Candidate events of a batch of series, flattened (arrays of shape (K,)).

    ``first``/``second`` are the indices of the departure and return change points (equal for
    shifts); ``sign`` is the direction of the departure (+1 up, -1 down); ``window_*`` are index windows (inclusive) for the ramp fits: the departure
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
        Width of the centred running median taken as background [points] (shrinking at the
        ends); 0 or less removes each column's least-squares straight line instead.

    Returns
    -------
    ndarray (T, M)
        Departures from the background. A running median much wider than an excursion
        leaves the excursion intact while removing slow climate changes (common practice).
    """
    if window_points <= 0:
        return detrend_members(x)
    window = int(window_points) | 1  # odd, so that the median is centred
    background = pd.DataFrame(x).rolling(window, center=True, min_periods=1).median().to_numpy()
    return np.asarray(x, dtype=float) - background


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


def detect_candidates(work: np.ndarray, max_excursion_points: int, penalty: float,
                      observed: np.ndarray | None = None) -> Candidates:
    """Change points in mean (optimal partitioning, BIC-type penalty) and candidates.

    Parameters
    ----------
    work : ndarray (T, M)
        Complete series with the background removed (:func:`remove_background`), oldest first.
    max_excursion_points : int
    penalty : float
        Penalty per added segment (see :func:`proxies.events.changepoints.bic_penalty`).
    observed : ndarray of bool (T, M), optional
        Observed (not gap-filled) points: only they enter the segment costs, means and the
        noise scale. Default: all points.

    Returns
    -------
    Candidates
    """
    work = np.asarray(work, dtype=float)
    if observed is None:
        changes = optimal_partitioning(work, "mean", penalty=penalty, sigma=robust_sigma(work))
    else:
        changes = optimal_partitioning(work, "mean", penalty=penalty,
                                       sigma=robust_sigma_observed(work, observed),
                                       weights=observed.astype(float))
    return member_candidates(work, changes, max_excursion_points, observed)
