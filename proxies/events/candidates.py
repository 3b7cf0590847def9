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

from proxies.events.changepoints import optimal_partitioning, robust_sigma

__all__ = ["SHIFT", "EXCURSION", "KIND_NAMES", "Candidates", "detrend_members",
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


def _one_member(x: np.ndarray, changes: np.ndarray, max_excursion_points: int):
    bounds = np.concatenate([[0], changes, [x.size]])
    starts, stops = bounds[:-1], bounds[1:]
    n = (stops - starts).astype(float)
    csum = np.concatenate([[0.0], np.cumsum(x)])
    means = (csum[stops] - csum[starts]) / n
    resid = x - np.repeat(means, (stops - starts))
    dof = max(x.size - means.size, 1)
    s = np.sqrt(np.sum(resid ** 2) / dof) or 1.0
    rows = []
    in_excursion = np.zeros(changes.size, dtype=bool)
    for j in range(1, means.size - 1):
        up, down = means[j] - means[j - 1], means[j] - means[j + 1]
        if up * down > 0 and n[j] <= max_excursion_points:
            n_o = n[j - 1] + n[j + 1]
            m_o = (means[j - 1] * n[j - 1] + means[j + 1] * n[j + 1]) / n_o
            z = abs(means[j] - m_o) / (s * np.sqrt(1 / n[j] + 1 / n_o))
            rows.append((EXCURSION, starts[j], stops[j], z, np.sign(means[j] - m_o), starts[j - 1], stops[j] - 1, stops[j + 1] - 1))
            in_excursion[j - 1] = in_excursion[j] = True
    for j in range(1, means.size):
        if in_excursion[j - 1]:
            continue
        z = abs(means[j] - means[j - 1]) / (s * np.sqrt(1 / n[j - 1] + 1 / n[j]))
        rows.append((SHIFT, starts[j], starts[j], z, np.sign(means[j] - means[j - 1]), starts[j - 1], stops[j] - 1, stops[j] - 1))
    return rows


def member_candidates(x: np.ndarray, changes: list[np.ndarray], max_excursion_points: int) -> Candidates:
    """Candidates of every member from its change points.

    Parameters
    ----------
    x : ndarray (T, M)
        Series in forward time (oldest first).
    changes : list of M int arrays
        Change points per member (first index of each new segment).
    max_excursion_points : int
        Longest excursion [points].

    Returns
    -------
    Candidates
    """
    members, rows = [], []
    for m, cps in enumerate(changes):
        found = _one_member(x[:, m], cps, max_excursion_points)
        rows.extend(found)
        members.extend([m] * len(found))
    if not rows:
        empty_i, empty_f = np.zeros(0, dtype=np.int64), np.zeros(0)
        return Candidates(empty_i, empty_i, empty_i, empty_i, empty_f, empty_f, empty_i, empty_i, empty_i)
    table = np.array(rows, dtype=float)
    as_int = lambda c: table[:, c].astype(np.int64)  # noqa: E731
    return Candidates(np.array(members, dtype=np.int64), as_int(0), as_int(1), as_int(2), table[:, 3],
                      table[:, 4], as_int(5), as_int(6), as_int(7))


def detect_candidates(x: np.ndarray, max_excursion_points: int, penalty: float,
                      detrend: bool = True) -> Candidates:
    """Change points in mean (optimal partitioning, BIC-type penalty) and candidates.

    Parameters
    ----------
    x : ndarray (T, M)
        Complete series (no NaN), oldest first.
    max_excursion_points : int
    penalty : float
        Penalty per added segment (see :func:`proxies.events.changepoints.bic_penalty`).
    detrend : bool
        Remove each member's straight line first.

    Returns
    -------
    Candidates
    """
    work = detrend_members(x) if detrend else np.asarray(x, dtype=float)
    changes = optimal_partitioning(work, "mean", penalty=penalty, sigma=robust_sigma(work))
    return member_candidates(work, changes, max_excursion_points)
