"""The event stage: abrupt events detected on every ensemble member of every variable.

Per variable of a reconstruction, oldest first:

1. each member's empty grid cells are filled by linear interpolation and its slow background
   (running median over ``background_yr``) is removed;
2. change points in mean are found in every member by exact optimal partitioning with a
   BIC-type penalty (Killick, Fearnhead & Eckley 2012), fitted to observed cells only;
3. candidate shifts and excursions (:mod:`proxies.events.candidates`) are tested against AR(1)
   red noise whose persistence is estimated from the members (Mudelsee 2002) and matched by
   simulation (:mod:`proxies.events.significance`);
4. each significant candidate gets onset, end and amplitude from ramp fits (Mudelsee 2000) on
   the member's gridded values;
5. member detections of the same kind and direction are grouped by their change times
   (``cluster_gap_yr``) into events. An event's onset, end, duration and amplitude are
   distributions over the members that detect it; its ``probability`` is the share of all
   members in which it is detected and significant; its ``p_value`` is the median over all
   members of the smallest p-value of a matching candidate (1 where none), and it is
   ``significant`` when that median is below ``alpha`` (i.e. significant in at least half of
   the members).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from proxies.events.candidates import EXCURSION, KIND_NAMES, Candidates, detect_candidates
from proxies.events.changepoints import bic_penalty
from proxies.events.ramp import fit_ramps
from proxies.events.settings import EventSettings
from proxies.events.significance import matched_null_tau, monte_carlo_p_values, null_maxima, prepare_series
from proxies.reconstruction.grid import fill_gaps

__all__ = ["EventResult", "detect_core_events", "detect_series_events", "EVENT_COLUMNS"]

_SUMMARY = ("onset", "end", "duration", "amplitude")
EVENT_COLUMNS = (["core_id", "event_id", "variable", "kind", "direction"]
                 + [f"{q}_{s}" for q in _SUMMARY for s in ("median", "q025", "q975")]
                 + ["probability", "p_value", "significant", "n_members", "tau_yr"])
_MIN_POINTS = 12


@dataclass
class EventResult:
    """Output of :func:`detect_core_events`.

    ``events`` is ``events.parquet``, ``probability`` is ``event_probability.parquet``;
    ``detections`` lists every significant member detection (diagnostics).
    """

    core_id: str
    events: pd.DataFrame
    probability: pd.DataFrame
    detections: pd.DataFrame
    warnings: list[str] = field(default_factory=list)


def _ramp_windows(cp: np.ndarray, lo: np.ndarray, hi: np.ndarray, half: int):
    return np.maximum(lo, cp - half), np.minimum(hi, cp + half - 1)


def _member_detections(x: np.ndarray, ages_fwd: np.ndarray, cands: Candidates, p: np.ndarray,
                       settings: EventSettings) -> pd.DataFrame:
    """Ramp-fitted onset, end and amplitude of every significant candidate."""
    sig = cands.subset(p < settings.alpha)
    p_sig = p[p < settings.alpha]
    if len(sig) == 0:
        return pd.DataFrame(columns=["member", "kind", "sign", "change_age", "onset", "end",
                                     "duration", "amplitude", "p_value", "statistic"])
    half = settings.ramp_window_points // 2
    series = x[:, sig.member]
    is_exc = sig.kind == EXCURSION
    # Excursions: the return ramp is fitted first, from the start of the changed segment to the
    # end of the next one; the departure ramp then ends where the return starts, so that the
    # level of the changed segment is not diluted by the return (Mudelsee 2000 fits one
    # transition per window).
    down_stop = sig.window_mid.copy()
    end_index = np.zeros(len(sig), dtype=np.int64)
    if is_exc.any():
        start2, stop2 = _ramp_windows(sig.second[is_exc], sig.first[is_exc], sig.window_stop[is_exc], half)
        back = fit_ramps(ages_fwd, series[:, is_exc], start2, stop2, settings.ramp_window_points)
        down_stop[is_exc] = np.maximum(back.i1, sig.first[is_exc])
        end_index[is_exc] = back.i2
    start, stop = _ramp_windows(sig.first, sig.window_start, down_stop, half)
    stop = np.maximum(stop, start + 1)
    down = fit_ramps(ages_fwd, series, start, stop, settings.ramp_window_points)
    end_index[~is_exc] = down.i2[~is_exc]
    end_index = np.maximum(end_index, down.i2)
    onset = ages_fwd[down.i1]
    end = ages_fwd[end_index]
    return pd.DataFrame({"member": sig.member, "kind": sig.kind, "sign": sig.sign,
                         "change_age": ages_fwd[sig.first], "onset": onset, "end": end,
                         "duration": onset - end, "amplitude": down.x2 - down.x1,
                         "p_value": p_sig, "statistic": sig.statistic})


def _clusters(change_age: np.ndarray, gap: float) -> np.ndarray:
    """Greedy mode seeking: the age with most detections within +-gap/2 becomes a centre and
    takes every detection within +-gap of it; repeat on the rest. Unlike single linkage,
    scattered false detections cannot chain two events together."""
    labels = np.full(change_age.size, -1, dtype=np.int64)
    label = 0
    while np.any(labels < 0):
        free = np.flatnonzero(labels < 0)
        ages = np.sort(change_age[free])
        counts = (np.searchsorted(ages, ages + gap / 2, side="right")
                  - np.searchsorted(ages, ages - gap / 2, side="left"))
        centre = ages[int(np.argmax(counts))]
        labels[free[np.abs(change_age[free] - centre) <= gap]] = label
        label += 1
    return labels


def _quantiles(values: np.ndarray) -> tuple[float, float, float]:
    q = np.quantile(values, [0.5, 0.025, 0.975])
    return float(q[0]), float(q[1]), float(q[2])


def _events_from_detections(det: pd.DataFrame, cands: Candidates, p: np.ndarray,
                            ages_fwd: np.ndarray, n_members: int, settings: EventSettings):
    rows, spans = [], []
    for (kind, sign), group in det.groupby(["kind", "sign"], sort=True):
        labels = _clusters(group["change_age"].to_numpy(), settings.cluster_gap_yr)
        for label in np.unique(labels):
            members = group[labels == label]
            best = members.sort_values("statistic", ascending=False).drop_duplicates("member")
            probability = best["member"].nunique() / n_members
            if probability < settings.min_probability:
                continue
            young = members["change_age"].min() - settings.cluster_gap_yr / 2
            old = members["change_age"].max() + settings.cluster_gap_yr / 2
            change_age = ages_fwd[cands.first]
            match = ((cands.kind == kind) & (cands.sign == sign)
                     & (change_age >= young) & (change_age <= old))
            member_p = np.ones(n_members)
            np.minimum.at(member_p, cands.member[match], p[match])
            row = {"kind": KIND_NAMES[int(kind)], "direction": "positive" if sign > 0 else "negative"}
            for name in _SUMMARY:
                row[f"{name}_median"], row[f"{name}_q025"], row[f"{name}_q975"] = _quantiles(best[name].to_numpy())
            p_value = float(np.median(member_p))
            row.update(probability=probability, p_value=p_value,
                       significant=bool(p_value < settings.alpha), n_members=int(best["member"].nunique()))
            rows.append(row)
            spans.append(best[["member", "onset", "end"]].to_numpy())
    return rows, spans


def _probability_through_time(ages: np.ndarray, spans: list[np.ndarray], n_members: int) -> np.ndarray:
    inside = np.zeros((ages.size, n_members), dtype=bool)
    for span in spans:
        member = span[:, 0].astype(np.int64)
        covered = (ages[:, None] <= span[None, :, 1]) & (ages[:, None] >= span[None, :, 2])
        for j, m in enumerate(member):
            inside[:, m] |= covered[:, j]
    return inside.mean(axis=1)


def detect_series_events(age_cal_bp: np.ndarray, values: np.ndarray, settings: EventSettings,
                         rng: np.random.Generator) -> tuple[pd.DataFrame, np.ndarray, pd.DataFrame, float]:
    """Detect events in one gridded ensemble.

    Parameters
    ----------
    age_cal_bp : ndarray (T,)
        Regular grid [cal BP], increasing.
    values : ndarray (T, M)
        Member values; NaN gaps are filled by linear interpolation, members without any
        value are ignored.
    settings : EventSettings
    rng : numpy.random.Generator
        Draws the AR(1) surrogates.

    Returns
    -------
    events : DataFrame
        One row per event (columns of ``events.parquet`` except ``core_id``, ``event_id``,
        ``variable``, ``tau_yr``).
    probability : ndarray (T,)
        Share of members inside a reported event at each grid age.
    detections : DataFrame
        Significant member detections.
    tau_yr : float
        AR(1) persistence time of the null [yr].
    """
    age_cal_bp = np.asarray(age_cal_bp, dtype=float)
    n_members = values.shape[1]
    observed = np.isfinite(values)[::-1]
    ages_fwd = age_cal_bp[::-1]
    x = fill_gaps(values)[::-1]
    step = float(np.abs(np.diff(age_cal_bp)).mean())
    background = int(round(settings.background_yr / step)) if settings.background_yr > 0 else 0
    work = prepare_series(x, observed, background)
    # Persistence from each member's own (unevenly spaced) non-empty cells (Mudelsee 2002),
    # bias-corrected by simulation so that the null matches the data's treatment.
    tau_steps, _ = matched_null_tau(work, observed, background, rng)
    tau_yr = tau_steps * step
    max_exc = max(int(np.floor(settings.max_excursion_yr / step)), 1)
    penalty = bic_penalty(x.shape[0], "mean", settings.penalty_factor)
    cands = detect_candidates(work, max_exc, penalty, observed)
    null = null_maxima(x.shape[0], tau_steps, settings.n_surrogates, max_exc, penalty, rng,
                       observed=observed, background_points=background)
    p = monte_carlo_p_values(cands, null)
    det = _member_detections(x, ages_fwd, cands, p, settings)
    rows, spans = _events_from_detections(det, cands, p, ages_fwd, n_members, settings)
    events = pd.DataFrame(rows)
    probability = _probability_through_time(age_cal_bp, spans, n_members)
    return events, probability, det, tau_yr


def detect_core_events(reconstruction, settings: EventSettings, rng: np.random.Generator) -> EventResult:
    """Abrupt events in every variable of a core's reconstruction.

    Parameters
    ----------
    reconstruction : ReconstructionResult
        Uses ``core_id`` and ``series`` (variable -> GridSeries).
    settings : EventSettings
    rng : numpy.random.Generator
        Make it with ``rng_for(seed, "events", core_id)``.

    Returns
    -------
    EventResult
        ``events`` (columns ``EVENT_COLUMNS``, oldest event first per variable) and
        ``probability`` (``age_cal_bp, variable, probability``).
    """
    core_id = str(getattr(reconstruction, "core_id", ""))
    notes: list[str] = []
    event_frames, prob_frames, det_frames = [], [], []
    names = sorted(reconstruction.series)
    if settings.variables is not None:
        names = [n for n in names if n in settings.variables]
    for name in names if settings.enabled else []:
        s = reconstruction.series[name]
        # Grid points where at least half of the members have a value (as in the table).
        rows = np.flatnonzero(np.isfinite(s.values).mean(axis=1) >= 0.5) if s.values.size else np.zeros(0, int)
        if rows.size < _MIN_POINTS:
            notes.append(f"{name}: only {rows.size} grid points with values; events not searched")
            continue
        span = slice(rows[0], rows[-1] + 1)
        values = s.values[span]
        values = values[:, np.isfinite(values).any(axis=0)]
        events, probability, det, tau_yr = detect_series_events(s.age_cal_bp[span], values, settings, rng)
        prob_frames.append(pd.DataFrame({"age_cal_bp": s.age_cal_bp[span], "variable": name,
                                         "probability": probability}))
        if len(events):
            events = events.sort_values("onset_median", ascending=False, ignore_index=True)
            events.insert(0, "variable", name)
            events.insert(0, "event_id", [f"{name}-E{k + 1:02d}" for k in range(len(events))])
            events.insert(0, "core_id", core_id)
            events["tau_yr"] = tau_yr
            event_frames.append(events)
        det.insert(0, "variable", name)
        det_frames.append(det)
    events = (pd.concat(event_frames, ignore_index=True)[EVENT_COLUMNS] if event_frames
              else pd.DataFrame({c: pd.Series(dtype=object if c in ("core_id", "event_id", "variable", "kind", "direction")
                                              else float) for c in EVENT_COLUMNS}))
    probability = (pd.concat(prob_frames, ignore_index=True) if prob_frames
                   else pd.DataFrame({"age_cal_bp": pd.Series(dtype=float), "variable": pd.Series(dtype=object),
                                      "probability": pd.Series(dtype=float)}))
    detections = pd.concat(det_frames, ignore_index=True) if det_frames else pd.DataFrame()
    return EventResult(core_id, events, probability, detections, notes)
