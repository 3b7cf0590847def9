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
from proxies.events.scan import ScanProfile, excursion_scan, robust_scale, top_blocks

__all__ = ["SHIFT", "EXCURSION", "KIND_NAMES", "EXCURSION_BLOCKS", "Candidates", "detrend_members",
           "remove_background", "lasting_changes", "step_fit", "shift_candidates", "shift_search_depth", "member_candidates", "scan_candidates", "detect_candidates"]

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


def lasting_changes(x: np.ndarray, n_changes: int, min_support: int = 2) -> np.ndarray:
    """The ``n_changes`` most prominent lasting changes in mean of each column.

    Binary segmentation: each round splits, in every column, the segment and place with the
    largest two-sample statistic ``|m_2 - m_1| sqrt(n_1 n_2 / (n_1 + n_2))`` among splits
    leaving at least ``min_support`` points on each side (Scott & Knott 1974; common
    practice). No threshold: on pure noise the changes are spurious, which is harmless where
    they are used (kept out of the background and the persistence estimate, for data and
    red-noise surrogates alike).

    Parameters
    ----------
    x : ndarray (T, M)
        Complete series (no NaN), oldest first.
    n_changes : int
    min_support : int
        Points needed on each side of a change.

    Returns
    -------
    ndarray (T, M)
        The statistic at the first point of each new segment (when it was split off), 0
        elsewhere.
    """
    x = np.asarray(x, dtype=float)
    n_t, n_m = x.shape
    index = np.arange(n_t)[:, None]
    cs = np.concatenate([np.zeros((1, n_m)), np.cumsum(x, axis=0)])
    cols = np.arange(n_m)[None, :]
    change = np.zeros((n_t, n_m), dtype=bool)
    found_stat = np.zeros((n_t, n_m))
    for _ in range(int(n_changes)):
        seg = np.cumsum(change, axis=0)  # segment label of every point
        first = _segment_edge(seg, index, first=True)
        stop = _segment_edge(seg, index, first=False) + 1
        n1, n2 = (index - first).astype(float), (stop - index).astype(float)
        ok = (n1 >= min_support) & (n2 >= min_support)
        with np.errstate(invalid="ignore", divide="ignore"):
            m1 = (cs[index, cols] - cs[first, cols]) / n1
            m2 = (cs[stop, cols] - cs[index, cols]) / n2
            stat = np.where(ok, np.abs(m2 - m1) * np.sqrt(n1 * n2 / (n1 + n2)), -np.inf)
        k = np.argmax(stat, axis=0)
        best = stat[k, np.arange(n_m)]
        found = np.isfinite(best)
        change[k[found], np.flatnonzero(found)] = True
        found_stat[k[found], np.flatnonzero(found)] = best[found]
    return found_stat


def _segment_edge(seg: np.ndarray, index: np.ndarray, first: bool) -> np.ndarray:
    """First (or last) index of the segment each point belongs to."""
    n_t = seg.shape[0]
    idx = np.broadcast_to(index, seg.shape)
    if first:
        is_start = np.vstack([np.ones((1, seg.shape[1]), bool), seg[1:] != seg[:-1]])
        return np.maximum.accumulate(np.where(is_start, idx, 0), axis=0)
    is_end = np.vstack([seg[1:] != seg[:-1], np.ones((1, seg.shape[1]), bool)])
    rev = np.where(is_end, idx, n_t - 1)[::-1]
    return np.minimum.accumulate(rev, axis=0)[::-1]


def step_fit(x: np.ndarray, n_changes: int, min_support: int = 2) -> np.ndarray:
    """The ``n_changes`` most prominent steps of each column, fitted jointly with a line.

    Greedy: each round adds, in every column, the step ``H_k`` (0 before index ``k``, 1 from
    it) that most reduces the residual sum of squares of the least-squares fit of
    ``1, t`` and the steps found so far; for a new step the reduction is
    ``(H_k . r)^2 / |H_k - P H_k|^2`` (``r`` the current residuals, ``P`` the projection on
    the current design; Frisch-Waugh-Lovell), evaluated for every ``k`` at once. The line is
    fitted jointly so that a slow trend is not cut into a step, and a step not taken by a
    line fitted through it.

    Parameters
    ----------
    x : ndarray (T, M)
    n_changes : int
    min_support : int
        Points a step needs on each side.

    Returns
    -------
    ndarray (T, M)
        The fitted steps, centred (the line not included).
    """
    x = np.asarray(x, dtype=float)
    n_t, n_m = x.shape
    t = np.linspace(-1.0, 1.0, n_t)
    k_ok = np.zeros(n_t, dtype=bool)
    k_ok[min_support: n_t - min_support + 1] = True
    steps_at = np.zeros((0, n_m), dtype=np.int64)
    design = np.broadcast_to(np.stack([np.ones(n_t), t], axis=1), (n_m, n_t, 2))
    coef = _batched_lstsq(design, x)
    for _ in range(int(n_changes)):
        resid = x - np.einsum("mtp,mp->tm", design, coef)
        # H_k . r = sum_{t >= k} r_t; |H_k - P H_k|^2 from the projection of every H_k
        tail_r = np.cumsum(resid[::-1], axis=0)[::-1]
        tails = np.cumsum(design[:, ::-1, :], axis=1)[:, ::-1, :]           # (M, T, p): D^T H_k
        gram_inv = np.linalg.inv(np.einsum("mtp,mtq->mpq", design, design))
        proj = np.einsum("mkp,mpq,mkq->km", tails, gram_inv, tails)
        denom = (n_t - np.arange(n_t))[:, None] - proj
        with np.errstate(invalid="ignore", divide="ignore"):
            gain = np.where(k_ok[:, None] & (denom > 1e-9), tail_r ** 2 / denom, -np.inf)
        for m_taken, row in enumerate(steps_at):
            gain[row, np.arange(n_m)] = -np.inf
        k = np.argmax(gain, axis=0)
        if not np.isfinite(gain[k, np.arange(n_m)]).any():
            break
        steps_at = np.vstack([steps_at, k[None, :]])
        step_cols = (np.arange(n_t)[None, :, None] >= steps_at.T[:, None, :]).astype(float)
        design = np.concatenate([np.broadcast_to(np.stack([np.ones(n_t), t], axis=1), (n_m, n_t, 2)),
                                 step_cols], axis=2)
        coef = _batched_lstsq(design, x)
    if steps_at.shape[0] == 0:
        return np.zeros_like(x)
    steps = np.einsum("mtp,mp->tm", design[:, :, 2:], coef[:, 2:])
    return steps - steps.mean(axis=0)


def _batched_lstsq(design: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Least-squares coefficients (M, p) of every column of ``x`` (T, M) on its own design
    (M, T, p), by the normal equations (small p)."""
    gram = np.einsum("mtp,mtq->mpq", design, design)
    rhs = np.einsum("mtp,tm->mp", design, x)
    return np.linalg.solve(gram + 1e-12 * np.eye(gram.shape[1]), rhs[..., None])[..., 0]


def _piecewise_means(x: np.ndarray, change: np.ndarray) -> np.ndarray:
    seg = np.cumsum(change, axis=0)
    out = np.empty_like(x)
    for m in range(x.shape[1]):
        n = np.bincount(seg[:, m])
        out[:, m] = (np.bincount(seg[:, m], x[:, m]) / np.where(n > 0, n, 1))[seg[:, m]]
    return out


def shift_candidates(work: np.ndarray, n_changes: int, min_support: int,
                     max_excursion_points: int) -> Candidates:
    """Shift candidates: each column's most prominent lasting changes in mean.

    :func:`lasting_changes` on the prepared series, the statistic divided by the column's
    robust noise scale (:func:`proxies.events.scan.robust_scale` of the residuals about the
    fitted steps) so that it is scale-free. Two neighbouring changes of opposite sign at
    most ``max_excursion_points`` apart, the second undoing at least half of the first, are
    the departure and return of an excursion (sought by the scan) and are not shifts.

    Parameters
    ----------
    work : ndarray (T, M)
        Prepared series, oldest first.
    n_changes : int
        Changes sought per column.
    min_support : int
        Points each change needs on both sides.
    max_excursion_points : int

    Returns
    -------
    Candidates
        Kind ``SHIFT``; ramp windows reach from the previous change to the next one.
    """
    work = np.asarray(work, dtype=float)
    n_t, n_m = work.shape
    stat = lasting_changes(work, n_changes, min_support)
    change = stat > 0
    fit = _piecewise_means(work, change)
    scale = robust_scale(work - fit, np.ones(work.shape, dtype=bool))
    jump = np.vstack([np.zeros((1, n_m)), np.diff(fit, axis=0)])
    rows = []
    for m in range(n_m):
        at = np.flatnonzero(change[:, m])
        if at.size == 0:
            continue
        signs = np.sign(jump[at, m])
        bounds = np.concatenate([[0], at, [n_t]])
        paired = np.zeros(at.size, dtype=bool)
        size = jump[at, m]
        # a departure and a return: opposite jumps, close together, the return undoing most
        # of the departure
        close = ((np.diff(at) <= max_excursion_points) & (signs[1:] * signs[:-1] < 0)
                 & (np.abs(size[1:] + size[:-1]) < 0.5 * np.minimum(np.abs(size[1:]), np.abs(size[:-1]))))
        paired[:-1] |= close
        paired[1:] |= close
        for j in np.flatnonzero(~paired):
            rows.append((m, at[j], stat[at[j], m] / scale[m], signs[j], bounds[j], bounds[j + 2] - 1))
    if not rows:
        empty_i, empty_f = np.zeros(0, dtype=np.int64), np.zeros(0)
        return Candidates(empty_i, empty_i, empty_i, empty_i, empty_f, empty_f, empty_i, empty_i, empty_i)
    t = np.array(rows, dtype=float)
    i = lambda c: t[:, c].astype(np.int64)  # noqa: E731
    return Candidates(i(0), np.full(len(rows), SHIFT, dtype=np.int64), i(1), i(1), t[:, 2], t[:, 3], i(4),
                      i(5), i(5))


def remove_background(x: np.ndarray, window_points: int, keep_steps: int = 0,
                      min_support: int = 2) -> np.ndarray:
    """Remove the slow background of each column before the change-point search.

    Parameters
    ----------
    x : ndarray (T, M)
        Complete series (no NaN).
    window_points : int
        Width of the centred running median taken as background [points]; the series is
        extended at both ends by point reflection (:func:`_reflect_ends`) so that the window
        stays full. 0 or less removes each column's least-squares straight line instead.
    keep_steps : int
        When > 0, the running median is taken of the series *without* its this many most
        prominent lasting changes (:func:`step_fit`), so that a step is not absorbed into
        the background: a running median keeps edges, and on a clean step the residual was
        exactly zero. 0: plain running median.
    min_support : int
        Points a kept change needs on each side.

    Returns
    -------
    ndarray (T, M)
        Departures from the background. A running median much wider than an excursion
        leaves the excursion intact while removing slow climate changes (common practice).
    """
    x = np.asarray(x, dtype=float)
    if window_points <= 0:
        return detrend_members(x)
    steps = step_fit(x, keep_steps, min_support) if keep_steps > 0 else 0.0
    slow = x - steps
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


def shift_search_depth(n_points: int, min_support: int) -> int:
    """Lasting changes sought per series: one per ``4 * min_support`` points, at least 2."""
    return max(2, int(n_points) // (4 * max(int(min_support), 1)))


def detect_candidates(work: np.ndarray, max_excursion_points: int, min_support: int,
                      observed: np.ndarray | None = None, persistence: float = 0.0,
                      return_profile: bool = False):
    """Shift candidates (lasting changes in mean) and excursion candidates (scan statistic).

    Parameters
    ----------
    work : ndarray (T, M)
        Complete series with the background removed (:func:`remove_background`), oldest first.
    max_excursion_points : int
    min_support : int
        Points of record an event needs beyond it on each side: shifts need this many on
        each side of the change, excursion blocks this many before and after.
    observed : ndarray of bool (T, M), optional
        Observed (not gap-filled) points: only they enter block sums and the scan's noise
        scale. Default: all points.
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
    shifts = shift_candidates(work, shift_search_depth(work.shape[0], min_support), min_support,
                              max_excursion_points)
    profile = excursion_scan(work, observed, max_excursion_points, persistence, support=min_support)
    cands = _concat([shifts, scan_candidates(profile, max_excursion_points)])
    return (cands, profile) if return_profile else cands
