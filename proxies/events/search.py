"""The searches behind the event stage (:mod:`proxies.events.stage`): every member against
its red-noise null (:func:`search_members`), and the ensemble as a whole
(:func:`central_search`): excursions on the ensemble-median series against its own null,
shifts on the members' standardised mean against the members' null (:func:`mean_search`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from proxies.events.candidates import EXCURSION, Candidates, concat_candidates, detect_candidates, shift_candidates
from proxies.events.mosum import mosum_bandwidth
from proxies.events.scan import ScanProfile, robust_scale
from proxies.events.settings import EventSettings
from proxies.events.shiftnull import shift_null_tau
from proxies.events.significance import matched_null_tau, monte_carlo_p_values, null_maxima, prepare_series
from proxies.reconstruction.grid import fill_gaps
from proxies.warning_sinks import quiet_warnings

__all__ = ["Search", "search_members", "mean_search", "central_search"]


@dataclass(frozen=True)
class Search:
    """One searched ensemble (members, or the ensemble's standardised mean): its candidates,
    kind-adjusted p-values, scan profile and red-noise null; ``scale`` the noise scale of
    each member and ``h`` the MOSUM half-width [points]; ``tau_steps`` the persistence of the
    excursion null, ``tau_shift_steps`` that of the shift null [grid steps]."""

    cands: Candidates
    p: np.ndarray
    profile: ScanProfile
    null: dict
    null_profile: ScanProfile
    tau_steps: float
    scale: np.ndarray | None = None
    work: np.ndarray | None = None
    h: int = 0
    tau_shift_steps: float | None = None


def search_members(x: np.ndarray, observed: np.ndarray, background: int, max_exc: int, settings: EventSettings,
            rng: np.random.Generator, shifts: bool = True) -> Search:
    """Prepare the members, estimate the null, detect candidates and calibrate them.

    Excursions are tested against red noise matched at lag one on the residuals about the
    running median, the most prominent excursions left out (:func:`matched_null_tau`); shifts
    (with ``shifts``) against red noise matched on the window differences of the shift test
    itself, the best step left out (:func:`proxies.events.shiftnull.shift_null_tau`); without
    ``shifts`` both use the excursion null."""
    filled = fill_gaps(np.where(observed, x, np.nan))
    work = prepare_series(x, observed, background)
    # Persistence from each series' own (unevenly spaced) non-empty cells about its running
    # median (which follows steps), its most prominent excursion left out (Mudelsee 2002),
    # bias-corrected by simulation so that the null matches the data's treatment.
    tau_steps, _ = matched_null_tau(work, observed, background, rng, mask_points=max_exc)
    persistence = float(np.exp(-1.0 / tau_steps)) if tau_steps > 0 else 0.0
    support = settings.edge_support_points
    h = mosum_bandwidth(x.shape[0], background, support)
    # The shift null's draws come from a generator spawned from ``rng`` (spawning leaves
    # ``rng``'s stream as it was), so the excursion null and the median series' search draw
    # exactly what they drew without it.
    shift_rng = rng.spawn(1)[0] if shifts else None
    tau_shift = shift_null_tau(filled, observed, background, h, support, shift_rng) if shifts else tau_steps
    shift_persistence = float(np.exp(-1.0 / tau_shift)) if tau_shift > 0 else 0.0
    scale = robust_scale(work, observed)
    cands, profile = detect_candidates(work, max_exc, support, observed, persistence, return_profile=True,
                                       series=filled, shift_window_points=h, scale=scale,
                                       shift_persistence=shift_persistence)
    null, null_profile = null_maxima(x.shape[0], tau_steps, settings.n_surrogates, max_exc, support, rng,
                                     observed=observed, background_points=background, return_profile=True,
                                     shift_window_points=h, shift_tau_steps=tau_shift if shifts else None,
                                     shift_rng=shift_rng)
    return Search(cands, monte_carlo_p_values(cands, null), profile, null, null_profile, tau_steps,
                   scale, work, h, tau_shift)


def mean_search(x: np.ndarray, observed: np.ndarray, members: Search, max_exc: int,
                 settings: EventSettings, cells: np.ndarray) -> tuple[Candidates, np.ndarray]:
    """Shift candidates of the members' standardised mean and their p-values against the
    *members'* null (one red-noise series).

    The MOSUM statistic is linear in the series, so that of the mean (each member divided by
    its own noise scale, the mean searched with scale 1) is at any place the mean of the
    members' statistics there: identical members give exactly a member's test, and members
    whose ages or errors differ give a convex combination, whose variance under the null is
    never larger. The test keeps its level whatever the age errors do to the ensemble (they
    smooth it), without a model of that smoothing; the ensemble-median series with a red
    noise fitted to it was far too conservative for lasting shifts (the smoothing made its
    lag-one persistence 10-30 grid steps where the climate had 1.5).
    """
    filled = fill_gaps(np.where(observed, x, np.nan))
    with quiet_warnings(RuntimeWarning):  # all-NaN cells stay NaN
        mean = np.nanmean(np.where(observed, filled / members.scale[None, :], np.nan), axis=1)
    series = fill_gaps(np.where(cells[:, None], mean[:, None], np.nan))
    tau = members.tau_shift_steps if members.tau_shift_steps is not None else members.tau_steps
    persistence = float(np.exp(-1.0 / tau)) if tau > 0 else 0.0
    shifts = shift_candidates(series, cells[:, None], members.h, persistence, np.ones(1),
                              settings.edge_support_points)
    return shifts, monte_carlo_p_values(shifts, members.null)


def central_search(x: np.ndarray, observed: np.ndarray, members: Search, background: int, max_exc: int,
                    settings: EventSettings, rng: np.random.Generator) -> Search | None:
    """The ensemble-level search: excursions on the ensemble-median series against its own
    red-noise null (:func:`search_members`), shifts on the members' standardised mean against the
    members' null (:func:`mean_search`). Cells where fewer than half of the members have a
    value are gaps."""
    cells = observed.mean(axis=1) >= 0.5
    if cells.sum() < 3:
        return None
    with quiet_warnings(RuntimeWarning):  # all-NaN cells stay NaN
        med = np.nanmedian(np.where(observed, x, np.nan), axis=1)
    median = search_members(fill_gaps(np.where(cells[:, None], med[:, None], np.nan)), cells[:, None], background,
                     max_exc, settings, rng, shifts=False)
    shifts, p_shifts = mean_search(x, observed, members, max_exc, settings, cells)
    excursions = median.cands.kind == EXCURSION
    cands = concat_candidates([shifts, median.cands.subset(excursions)])
    return Search(cands, np.concatenate([p_shifts, median.p[excursions]]), median.profile, median.null,
                   median.null_profile, median.tau_steps)
