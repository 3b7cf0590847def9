"""The event stage: abrupt events detected on every ensemble member of every variable.

Per variable of a reconstruction, oldest first:

1. each member's empty grid cells are filled by linear interpolation and its slow background
   (running median over ``background_yr``) is removed;
2. shift candidates come from the moving-sum two-sample statistic on each member's series
   itself (windows of ``background_yr / 2`` on each side, :mod:`proxies.events.mosum`), so
   that the background cannot absorb a lasting step; excursion candidates from the scan
   statistic of every block of at most ``max_excursion_yr`` on the background-removed series
   (:mod:`proxies.events.scan`, :mod:`proxies.events.candidates`);
3. both are tested against AR(1) red noise whose persistence is estimated from the members
   with their most prominent excursion left out (Mudelsee 2002) and matched by simulation
   (:mod:`proxies.events.significance`): a member's p-value is that of the largest statistic
   in a whole red-noise series, so each member has a false event anywhere with probability
   about ``alpha``;
4. each significant candidate gets onset, end and amplitude from ramp fits (Mudelsee 2000) on
   the member's gridded values, onset (and a shift's end) as one parametric AR(1) bootstrap
   draw about the fit (:func:`proxies.events.ramp.ramp_location_draws`), so that the spread
   over members holds the change's location uncertainty beside the age error;
5. member detections of the same kind and direction are grouped by their change times
   (``cluster_gap_yr``) into events; a group found by fewer than ``min_probability`` of the
   members is not reported.

Whether an event exists (``p_value``, ``significant``) is decided once, on the ensemble as a
whole. Excursions: the ensemble-median series (cells where at least half of the members have
a value) is searched by the same detector against its own red-noise null (persistence
estimated from it, surrogates treated alike). Shifts: the members' standardised mean is
searched against the members' null (:func:`proxies.events.search.mean_search`: the median series, smoothed by the
age errors, looked far more persistent than its climate, which hid lasting steps). The
event's ``p_value`` is that series' whole-record,
kind-adjusted p-value of its best candidate of the event's kind and direction inside the
event's age range (change times of its members +- ``cluster_gap_yr / 2``); it is
``significant`` when below ``alpha``. This is the standard single-series test applied to the
ensemble's central estimate, so it holds its level whenever that series is AR(1) red noise
-- in particular when the members are pure red noise, identical or not, or a red-noise
climate plus independent member errors (simulated in ``tests/test_event_detection.py``). Why
not the members: each member carries its own calibration error (on the demo cores about five
times the error of the median), so a member-by-member whole-record test found the demo event
in only 20-60 % of the members, and a rule built on member p-values (median p < alpha) could
not be significant while a majority missed it.

How sure the ensemble is of an established event (``probability``, ``n_members``, and the
onset/end/duration/amplitude distributions) is then asked member by member *at the event's
place*: a member shows a significant excursion when its best block starting in the event's
age range exceeds the ``1 - alpha`` quantile of the best block over a stretch of that many
starts in the members' red-noise surrogates (:func:`proxies.events.significance.local_null`).
Testing the local hypotheses only after the global one has been rejected is hierarchical
(gatekeeping) testing (e.g. Meinshausen 2008, Biometrika 95:265; from memory):
the chance of a false *event* stays that of the ensemble test, while the probability no
longer depends on how long the record is. For events that are not significant, and for
shifts, the probability stays the share of members whose whole-record search found the event.
``event_probability`` gives, at each grid age, the share of members inside (between ramp onset
and end of) a reported event.

"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from proxies.events.candidates import EXCURSION, KIND_NAMES, Candidates
from proxies.events.ramp import fit_ramps, ramp_location_draws
from proxies.events.scan import ScanProfile
from proxies.events.search import Search as _Search
from proxies.events.search import central_search as _central_search
from proxies.events.search import search_members as _search
from proxies.events.settings import EventSettings
from proxies.events.significance import adjusted_p_values, local_null, local_p_values
from proxies.reconstruction.grid import fill_gaps

__all__ = ["EventResult", "detect_core_events", "detect_series_events", "EVENT_COLUMNS", "ONSET_COLUMNS"]

_SUMMARY = ("onset", "end", "duration", "amplitude")
EVENT_COLUMNS = (["core_id", "event_id", "variable", "kind", "direction"]
                 + [f"{q}_{s}" for q in _SUMMARY for s in ("median", "q025", "q975")]
                 + ["probability", "p_value", "significant", "n_members", "tau_yr", "note"])
_MIN_POINTS = 12


@dataclass
class EventResult:
    """Output of :func:`detect_core_events`.

    ``events`` is ``events.parquet``, ``probability`` is ``event_probability.parquet``;
    ``detections`` lists every significant member detection (diagnostics; ``test`` is
    ``record`` for the whole-record search and ``local`` for the member tests at an
    established event's place; ``event_id`` names the reported event it belongs to, empty if
    none); ``onsets`` has one row per reported event and member (``event_id, member,
    onset_cal_bp, end_cal_bp, amplitude, detected``): members that detect the event give their
    detection's ramp fit, the others (``detected`` false) their ramp fit at the event's place;
    these are the member values behind ``onset_*`` and ``amplitude_*``
    (``<core>/event_onsets.parquet``).
    """

    core_id: str
    events: pd.DataFrame
    probability: pd.DataFrame
    detections: pd.DataFrame
    warnings: list[str] = field(default_factory=list)
    onsets: pd.DataFrame = field(default_factory=lambda: _empty_onsets())


ONSET_COLUMNS = ["event_id", "member", "onset_cal_bp", "end_cal_bp", "amplitude", "detected"]


def _empty_onsets() -> pd.DataFrame:
    return pd.DataFrame({"event_id": pd.Series(dtype=object), "member": pd.Series(dtype=np.int64),
                         "onset_cal_bp": pd.Series(dtype=float), "end_cal_bp": pd.Series(dtype=float),
                         "amplitude": pd.Series(dtype=float), "detected": pd.Series(dtype=bool)})


def _onset_rows(fits: pd.DataFrame, detected: bool) -> pd.DataFrame:
    return pd.DataFrame({"event_id": fits["event_id"].to_numpy(dtype=object),
                         "member": fits["member"].to_numpy(dtype=np.int64),
                         "onset_cal_bp": fits["onset"].to_numpy(dtype=float),
                         "end_cal_bp": fits["end"].to_numpy(dtype=float),
                         "amplitude": fits["amplitude"].to_numpy(dtype=float),
                         "detected": np.full(len(fits), detected)})


def _ramp_windows(cp: np.ndarray, lo: np.ndarray, hi: np.ndarray, half: int):
    return np.maximum(lo, cp - half), np.minimum(hi, cp + half - 1)


def _member_detections(x: np.ndarray, ages_fwd: np.ndarray, cands: Candidates, p: np.ndarray,
                       settings: EventSettings, boot: tuple | None = None) -> pd.DataFrame:
    """Ramp-fitted onset, end and amplitude of every significant candidate; with ``boot =
    (rng, persistence)`` onset (and a shift's end) are one parametric AR(1) bootstrap draw
    about the fit (:func:`proxies.events.ramp.ramp_location_draws`), so that the members'
    spread holds the change's location uncertainty beside the age error."""
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
    if boot is not None:
        onset, drawn_end = ramp_location_draws(ages_fwd, series, down, start, stop, boot[1], boot[0],
                                               settings.ramp_window_points)
        end = np.minimum(np.where(is_exc, end, drawn_end), onset)
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


def _member_event_p(kind: int, sign: float, young: float, old: float, cands: Candidates, p: np.ndarray,
                    profile: ScanProfile, null: dict, ages_fwd: np.ndarray, n_members: int) -> np.ndarray:
    """Each member's smallest p-value of this kind and direction with its change in
    [young, old] cal BP (1 where it has none)."""
    if kind == EXCURSION:
        score, _ = profile.best(int(sign))
        inside = (ages_fwd >= young) & (ages_fwd <= old)
        best = score[inside].max(axis=0) if inside.any() else np.full(n_members, -np.inf)
        return adjusted_p_values(best, EXCURSION, null)
    change_age = ages_fwd[cands.first]
    match = ((cands.kind == kind) & (cands.sign == sign) & (change_age >= young) & (change_age <= old))
    member_p = np.ones(n_members)
    np.minimum.at(member_p, cands.member[match], p[match])
    return member_p


def _local_detections(sign: float, young: float, old: float, x: np.ndarray, ages_fwd: np.ndarray,
                      members: _Search, max_exc: int, settings: EventSettings, boot=None) -> pd.DataFrame:
    """Members whose best excursion block starting in [young, old] cal BP stands out against
    the red-noise null of the best block in a stretch of that many starts (local test)."""
    score, length = members.profile.best(int(sign))
    starts = np.flatnonzero((ages_fwd >= young) & (ages_fwd <= old))
    if starts.size == 0:
        return _member_detections(x, ages_fwd, members.cands.subset(np.zeros(len(members.cands), bool)),
                                  np.zeros(0), settings)
    cols = np.arange(score.shape[1])
    k = np.argmax(score[starts], axis=0)
    first = starts[k]
    z = score[first, cols]
    p = local_p_values(z, local_null(members.null_profile, starts.size))
    keep = np.isfinite(z) & (p < settings.alpha)
    first, stop = first[keep], first[keep] + length[first[keep], cols[keep]]
    n_t = x.shape[0]
    local = Candidates(cols[keep], np.full(keep.sum(), EXCURSION, dtype=np.int64), first, stop, z[keep],
                       np.full(keep.sum(), float(sign)), np.maximum(first - max_exc, 0), stop - 1,
                       np.minimum(stop - 1 + max_exc, n_t - 1))
    return _member_detections(x, ages_fwd, local, p[keep], settings, boot)


def _event_p_value(kind: int, sign: float, young: float, old: float, central: _Search | None,
                   ages_fwd: np.ndarray) -> float:
    """Ensemble-level p-value: the ensemble-median series' best candidate of this kind and
    direction changing in [young, old] cal BP (1 without a median series)."""
    if central is None:
        return 1.0
    return float(_member_event_p(kind, sign, young, old, central.cands, central.p, central.profile,
                                 central.null, ages_fwd, 1)[0])


def _index_of(ages_fwd: np.ndarray, age: float) -> int:
    return int(np.argmin(np.abs(ages_fwd - age)))


def _fits_elsewhere(kind: int, sign: float, showing: pd.DataFrame, x: np.ndarray, ages_fwd: np.ndarray,
                    max_exc: int, settings: EventSettings, boot=None) -> pd.DataFrame:
    """Ramp fits at the event's place for the members that do not show it, so that onset and
    amplitude are summarised over all members (a summary over detecting members only is
    biased towards large changes). The place is the detecting members' median change (and,
    for an excursion, median end); the windows are those a detection there would get."""
    missing = np.setdiff1d(np.arange(x.shape[1]), showing["member"].to_numpy(dtype=np.int64))
    if missing.size == 0 or len(showing) == 0:
        return showing.iloc[0:0]
    n_t, k = x.shape[0], missing.size
    first = _index_of(ages_fwd, float(np.median(showing["change_age"])))
    if int(kind) == EXCURSION:
        second = max(_index_of(ages_fwd, float(np.median(showing["end"]))), first + 1)
        lo, mid, hi = max(first - max_exc, 0), second - 1, min(second - 1 + max_exc, n_t - 1)
    else:
        second = first
        lo = max(first - settings.ramp_window_points, 0)
        mid = hi = min(first + settings.ramp_window_points, n_t - 1)
    full = lambda v: np.full(k, v, dtype=np.int64)  # noqa: E731
    pseudo = Candidates(missing.astype(np.int64), full(kind), full(first), full(second), np.zeros(k),
                        np.full(k, float(sign)), full(lo), full(mid), full(hi))
    return _member_detections(x, ages_fwd, pseudo, np.zeros(k), settings, boot)


def _event_row(kind: int, sign: float, showing: pd.DataFrame, p_value: float, n_members: int,
               settings: EventSettings, elsewhere: pd.DataFrame | None = None) -> dict:
    """One event: summaries over all members (``showing`` plus ``elsewhere``), probability
    from the members showing it; significant when ``p_value < alpha`` *and* the amplitude's
    95 % range excludes zero (otherwise ``note`` says why not)."""
    row = {"kind": KIND_NAMES[int(kind)], "direction": "positive" if sign > 0 else "negative"}
    every = showing if elsewhere is None or len(elsewhere) == 0 else pd.concat([showing, elsewhere])
    for name in _SUMMARY:
        row[f"{name}_median"], row[f"{name}_q025"], row[f"{name}_q975"] = _quantiles(every[name].to_numpy())
    n_showing = int(showing["member"].nunique())
    spans_zero = row["amplitude_q025"] <= 0.0 <= row["amplitude_q975"]
    passes = bool(p_value < settings.alpha)
    note = ("amplitude 95 % range spans zero: not called significant" if passes and spans_zero else "")
    row.update(probability=n_showing / n_members, p_value=p_value, significant=passes and not spans_zero,
               n_members=n_showing, note=note)
    return row


def _events_from_detections(det: pd.DataFrame, x: np.ndarray, ages_fwd: np.ndarray, members: _Search,
                            central: _Search | None, max_exc: int, settings: EventSettings, boot=None):
    """Events: groups of member detections, plus significant excursions of the
    ensemble-median series that no group covers; each tested on the ensemble-median series;
    members showing an established excursion counted by the local test."""
    n_members = x.shape[1]
    rows, spans, local_frames, ranges, fitted_elsewhere = [], [], [], [], []
    det["event"] = -1
    det["test"] = "record"

    def add(kind, sign, young, old, record, p_value):
        showing = record
        if int(kind) == EXCURSION and p_value < settings.alpha:
            local = _local_detections(float(sign), young, old, x, ages_fwd, members, max_exc, settings, boot)
            if len(local):
                showing = local.assign(event=len(rows), test="local")
                local_frames.append(showing)
        if showing is None or len(showing) == 0:
            return
        if showing is record:
            det.loc[record.index, "event"] = len(rows)
        elsewhere = _fits_elsewhere(kind, sign, showing, x, ages_fwd, max_exc, settings, boot)
        rows.append(_event_row(kind, sign, showing, p_value, n_members, settings, elsewhere))
        fitted_elsewhere.append(elsewhere.assign(event=len(rows) - 1, test="fitted"))
        spans.append(showing[["member", "onset", "end"]].to_numpy())
        ranges.append((int(kind), float(sign), young, old))

    for (kind, sign), group in det.groupby(["kind", "sign"], sort=True):
        labels = _clusters(group["change_age"].to_numpy(), settings.cluster_gap_yr)
        for label in np.unique(labels):
            cluster = group[labels == label]
            best = cluster.sort_values("statistic", ascending=False).drop_duplicates("member")
            if best["member"].nunique() / n_members < settings.min_probability:
                continue
            young = cluster["change_age"].min() - settings.cluster_gap_yr / 2
            old = cluster["change_age"].max() + settings.cluster_gap_yr / 2
            add(kind, sign, young, old, best, _event_p_value(int(kind), float(sign), young, old, central, ages_fwd))
    if central is not None:
        # Significant excursions of the ensemble-median series that too few members found in
        # their whole-record search: established events all the same.
        found = (central.cands.kind == EXCURSION) & (central.p < settings.alpha)
        for first, sign, p_value in zip(central.cands.first[found], central.cands.sign[found], central.p[found]):
            age = ages_fwd[first]
            if any(k == EXCURSION and g == sign and lo <= age <= hi for k, g, lo, hi in ranges):
                continue
            add(EXCURSION, float(sign), age - settings.cluster_gap_yr / 2, age + settings.cluster_gap_yr / 2,
                None, float(p_value))
    if local_frames:
        det = pd.concat([det] + local_frames, ignore_index=True)
    return rows, spans, det, fitted_elsewhere


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
        Significant member detections; ``test`` is ``record`` (whole-record search) or
        ``local`` (member test at an established event's place); ``event`` is the row of
        ``events`` a detection belongs to (its member's detection of that event), -1 if none.
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
    max_exc = max(int(np.floor(settings.max_excursion_yr / step)), 2)
    members = _search(x, observed, background, max_exc, settings, rng)
    tau_yr = members.tau_steps * step
    central = _central_search(x, observed, members, background, max_exc, settings, rng)
    boot = (rng, float(np.exp(-1.0 / members.tau_steps)) if members.tau_steps > 0 else 0.0)
    det = _member_detections(x, ages_fwd, members.cands, members.p, settings, boot)
    rows, spans, det, elsewhere = _events_from_detections(det, x, ages_fwd, members, central, max_exc, settings,
                                                          boot)
    events = pd.DataFrame(rows)
    det.attrs["elsewhere"] = elsewhere
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
        ``events`` (columns ``EVENT_COLUMNS``, oldest event first per variable),
        ``probability`` (``age_cal_bp, variable, probability``) and ``onsets``
        (``event_id, member, onset_cal_bp``: member ``m`` is column ``m`` of the variable's
        ensemble among members with any value).
    """
    core_id = str(getattr(reconstruction, "core_id", ""))
    notes: list[str] = []
    event_frames, prob_frames, det_frames, onset_frames = [], [], [], []
    names = sorted(reconstruction.series)
    if not settings.enabled:
        notes.append("event detection is off ([events] enabled = false); events not searched")
        names = []
    if settings.variables is not None:
        listed = [n for n in names if n in settings.variables]
        notes += [f"{n}: not listed in [events] variables; events not searched"
                  for n in names if n not in listed]
        names = listed
    for name in names:
        s = reconstruction.series[name]
        # Grid points where at least half of the members have a value (as in the table).
        rows = np.flatnonzero(np.isfinite(s.values).mean(axis=1) >= 0.5) if s.values.size else np.zeros(0, int)
        if rows.size < _MIN_POINTS:
            notes.append(f"{name}: only {rows.size} grid points with values (at least {_MIN_POINTS} "
                         "are needed); events not searched")
            continue
        span = slice(rows[0], rows[-1] + 1)
        values = s.values[span]
        values = values[:, np.isfinite(values).any(axis=0)]
        events, probability, det, tau_yr = detect_series_events(s.age_cal_bp[span], values, settings, rng)
        elsewhere = det.attrs.pop("elsewhere", [])
        prob_frames.append(pd.DataFrame({"age_cal_bp": s.age_cal_bp[span], "variable": name,
                                         "probability": probability}))
        det.insert(0, "variable", name)
        det["event_id"] = ""
        if len(events):
            events["_row"] = np.arange(len(events))
            events = events.sort_values("onset_median", ascending=False, ignore_index=True)
            events.insert(0, "variable", name)
            events.insert(0, "event_id", [f"{name}-E{k + 1:02d}" for k in range(len(events))])
            events.insert(0, "core_id", core_id)
            events["tau_yr"] = tau_yr
            event_frames.append(events)
            ids = dict(zip(events["_row"], events["event_id"]))
            det["event_id"] = [ids.get(int(r), "") for r in det["event"]]
            taken = det[det["event_id"] != ""].drop_duplicates(["event_id", "member"])
            onset_frames.append(_onset_rows(taken, True))
            for frame in elsewhere:
                if len(frame):
                    onset_frames.append(_onset_rows(frame.assign(event_id=[ids.get(int(r), "") for r in frame["event"]]),
                                                    False))
        det_frames.append(det.drop(columns="event"))
    events = (pd.concat(event_frames, ignore_index=True)[EVENT_COLUMNS] if event_frames
              else pd.DataFrame({c: pd.Series(dtype=object if c in ("core_id", "event_id", "variable", "kind", "direction")
                                              else float) for c in EVENT_COLUMNS}))
    probability = (pd.concat(prob_frames, ignore_index=True) if prob_frames
                   else pd.DataFrame({"age_cal_bp": pd.Series(dtype=float), "variable": pd.Series(dtype=object),
                                      "probability": pd.Series(dtype=float)}))
    detections = pd.concat(det_frames, ignore_index=True) if det_frames else pd.DataFrame()
    onsets = (pd.concat(onset_frames, ignore_index=True).sort_values(["event_id", "member"], ignore_index=True)
              if onset_frames else _empty_onsets())
    return EventResult(core_id, events, probability, detections, notes, onsets)
