"""Monte Carlo interpolation age-depth model with monotonic rejection.

The classical approach (e.g. Blaauw 2010): draw one calendar age from each date's calibrated
density, join the draws by a curve through depth and keep the draw only if ages increase
with depth. Here each date is also, independently and with its prior outlier probability,
left out of a draw; the accepted draws are then samples of the calibrated ages and outlier
flags conditioned on monotonicity, and a date's posterior outlier probability is the share
of accepted draws that left it out. Several dates at one depth all count: in each draw one of
those not left out is picked at random (each equally likely) to give that depth its age, so
the result does not depend on the order of the rows.

Two curves join the dates: straight lines (``linear``) or a monotone piecewise-cubic Hermite
curve (``smooth``; Fritsch & Carlson 1980, as scipy's PchipInterpolator). Beyond the first
and last date of a hiatus-free section, ages are extrapolated with the section's mean rate
(line through its end dates; the overall mean rate when a section holds one date). Ages do
not interpolate across a hiatus.

References
----------
Blaauw M (2010). Methods and code for 'classical' age-modelling of radiocarbon sequences.
Quaternary Geochronology 5(5), 512-518. doi:10.1016/j.quageo.2010.01.002
Fritsch FN, Carlson RE (1980). Monotone piecewise cubic interpolation. SIAM Journal on
Numerical Analysis 17(2), 238-246. doi:10.1137/0717021
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
from scipy.interpolate import PchipInterpolator

__all__ = ["InterpolationFit", "monotone_draws", "interpolate_paths", "fit_interpolation"]


@dataclass(frozen=True, eq=False)
class InterpolationFit:
    """Result of :func:`fit_interpolation`.

    Attributes
    ----------
    paths : ndarray, shape (k, M)
        Ages at the requested depths [cal BP].
    outlier_posterior : ndarray, shape (n,)
        Share of accepted draws that left each date out.
    acceptance : float
        Share of proposals accepted by the monotonic rejection.
    """

    paths: np.ndarray
    outlier_posterior: np.ndarray
    acceptance: float


def monotone_draws(date_depth_cm, draw_ages, members: int, outlier_prior, rng,
                   batch: int = 4096, max_batches: int = 200):
    """Monotone draws of date ages and outlier flags by rejection.

    Parameters
    ----------
    date_depth_cm : ndarray, shape (n,)
        Date depths [cm, event-free], sorted increasing.
    draw_ages : callable
        ``draw_ages(size) -> ndarray (n, size)`` of calibrated age draws [cal BP].
    members : int
        Number of accepted draws wanted.
    outlier_prior : ndarray, shape (n,)
        Prior probability of leaving each date out.
    rng : numpy.random.Generator

    Returns
    -------
    ages : ndarray, shape (n, members)
    left_out : ndarray of bool, shape (n, members)
        The outlier flags.
    unused : ndarray of bool, shape (n, members)
        Dates not giving their depth its age in a draw: left out, or not picked among several
        kept dates at the same depth.
    acceptance : float
    """
    depth = np.asarray(date_depth_cm, dtype=float)
    n = depth.size
    _, group = np.unique(depth, return_inverse=True)
    kept_ages, kept_out, kept_unused, accepted, proposed = [], [], [], 0, 0
    for _ in range(max_batches):
        ages = draw_ages(batch)
        out = rng.random((n, batch)) < np.asarray(outlier_prior)[:, None]
        out[:, out.all(axis=0)] = False  # keep at least one date in every draw
        unused = _pick_one_per_depth(group, out, rng)
        # monotone over the used dates: running maximum of used ages never exceeds the next
        masked = np.where(unused, -np.inf, ages)
        running = np.maximum.accumulate(masked, axis=0)
        previous = np.vstack([np.full((1, batch), -np.inf), running[:-1]])
        ok = np.all(unused | (ages >= previous), axis=0)
        proposed += batch
        kept_ages.append(ages[:, ok])
        kept_out.append(out[:, ok])
        kept_unused.append(unused[:, ok])
        accepted += int(ok.sum())
        if accepted >= members:
            break
    if accepted < members:
        raise ValueError(f"monotonic rejection accepted only {accepted} of {proposed} draws; the dates "
                         "are strongly reversed: use the accumulation model or mark outliers as excluded")
    ages = np.concatenate(kept_ages, axis=1)[:, :members]
    left_out = np.concatenate(kept_out, axis=1)[:, :members]
    unused = np.concatenate(kept_unused, axis=1)[:, :members]
    return ages, left_out, unused, accepted / proposed


def _pick_one_per_depth(group: np.ndarray, out: np.ndarray, rng) -> np.ndarray:
    """Mark all but one randomly picked kept date of each depth as unused, shape (n, B).

    ``group`` (n,) numbers the distinct depths; ``out`` (n, B) are the outlier flags. Among
    the kept dates of a depth each is picked with equal probability (a random key per date,
    the largest kept key wins); a depth whose dates are all left out stays unused.
    """
    key = np.where(out, -1.0, rng.random(out.shape))
    best = np.full((group.max() + 1, out.shape[1]), -1.0)
    np.maximum.at(best, group, key)
    return out | (key < best[group])


def interpolate_paths(date_depth_cm, ages, left_out, depth_cm, sections, smooth: bool,
                      fallback_rate: float) -> np.ndarray:
    """Join each draw's kept dates by a monotone curve and read it at ``depth_cm``.

    Parameters
    ----------
    date_depth_cm : ndarray, shape (n,)
    ages : ndarray, shape (n, M)
    left_out : ndarray of bool, shape (n, M)
        Dates not used by each draw (at most one date per depth is used).
    depth_cm : ndarray, shape (k,)
        Requested depths [cm, event-free].
    sections : ndarray of int
        Hiatus-free section of each date (shape (n,)) followed by that of each requested
        depth (shape (k,)), as ``(date_section, depth_section)``.
    smooth : bool
        Monotone cubic instead of straight lines.
    fallback_rate : float
        Rate for extrapolation in sections with fewer than two kept dates [yr/cm].

    Returns
    -------
    ndarray, shape (k, M)
    """
    date_section, depth_section = sections
    members = ages.shape[1]
    out = np.full((np.size(depth_cm), members), np.nan)
    for m in range(members):
        for s in np.unique(depth_section):
            rows = np.flatnonzero(depth_section == s)
            use = (date_section == s) & ~left_out[:, m]
            z, a = date_depth_cm[use], ages[use, m]
            if z.size == 0:
                continue
            target = depth_cm[rows]
            if z.size == 1:
                out[rows, m] = a[0] + fallback_rate * (target - z[0])
                continue
            rate_top = (a[1] - a[0]) / (z[1] - z[0])
            rate_bottom = (a[-1] - a[-2]) / (z[-1] - z[-2])
            if smooth and z.size > 2:
                inside = PchipInterpolator(z, a, extrapolate=False)(target)
            else:
                inside = np.interp(target, z, a)
            inside = np.where(target < z[0], a[0] + rate_top * (target - z[0]), inside)
            inside = np.where(target > z[-1], a[-1] + rate_bottom * (target - z[-1]), inside)
            out[rows, m] = inside
    return out


def fit_interpolation(date_depth_cm, draw_ages, depth_cm, hiatus_depths_cm, outlier_prior,
                      members: int, rng, smooth: bool = False, fallback_rate: float = 10.0):
    """Monte Carlo interpolation model: monotone draws joined by lines or monotone cubics.

    Parameters
    ----------
    date_depth_cm : ndarray, shape (n,)
        Date depths [cm, event-free], sorted increasing.
    draw_ages : callable
        ``draw_ages(size) -> (n, size)`` calibrated age draws [cal BP].
    depth_cm : ndarray, shape (k,)
        Requested depths [cm, event-free].
    hiatus_depths_cm : sequence of float
        Hiatus depths [cm, event-free]; sections are interpolated separately.
    outlier_prior : ndarray, shape (n,)
    members : int
    rng : numpy.random.Generator
    smooth : bool
        Monotone cubic (PCHIP) instead of straight lines.
    fallback_rate : float
        Extrapolation rate where a section holds a single date [yr/cm].

    Returns
    -------
    InterpolationFit
    """
    date_depth_cm = np.asarray(date_depth_cm, dtype=float)
    depth_cm = np.asarray(depth_cm, dtype=float)
    if np.any(np.diff(date_depth_cm) < 0):
        raise ValueError("date depths must be sorted increasing")
    ages, left_out, unused, acceptance = monotone_draws(date_depth_cm, draw_ages, members, outlier_prior, rng)
    if acceptance < 0.01:
        warnings.warn(f"monotonic rejection accepted only {acceptance:.1%} of the draws", stacklevel=2)
    edges = np.sort(np.asarray(hiatus_depths_cm, dtype=float))
    sections = (np.searchsorted(edges, date_depth_cm, side="left"),
                np.searchsorted(edges, depth_cm, side="left"))
    empty = set(np.unique(sections[1])) - set(np.unique(sections[0]))
    if empty:
        raise ValueError("a hiatus-bounded section of the core holds no date; the interpolation model "
                         "cannot date it (use the accumulation model)")
    paths = interpolate_paths(date_depth_cm, ages, unused, depth_cm, sections, smooth, fallback_rate)
    # a younger age below an older one can only come from extrapolation; keep paths monotone
    paths = np.maximum.accumulate(paths, axis=0)
    return InterpolationFit(paths, left_out.mean(axis=1), acceptance)
