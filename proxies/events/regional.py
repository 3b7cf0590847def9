"""Regional onsets: abrupt events found in the regional stack, with the onset distribution
of the composite's members.

The stack keeps every member (:func:`proxies.reconstruction.stack.stack_ensembles`):
composite member ``m`` is the mean over the records of each record's member ``m``, so it is a
joint draw of all records' age models and calibrations. An event found in the stack by the
same detection as a core's (:func:`proxies.events.detect_core_events` on the composite)
therefore has an onset distribution over the composite's members: the **regional onset**,
reported with its median and 95 % range, and its **midpoint** ``(onset + end) / 2`` per
member. Records whose changes are spread by their age errors make the composite change
gradually, from the earliest record's change to the latest: the composite's ramp starts with
the earliest one, so its onset is biased old (by about 0.85 sigma of one record's age error for
three records with one common event); the midpoint, by when half of the average change has
happened, is not, and is the number to compare with a single record's timing. It answers "when did the region, as these records
see it together, change?"; it is not the onset of any one record, and a record that changed
earlier or later shifts and widens it (use ``lead_lag.parquet`` for the timing of one record
against another).
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pandas as pd

from proxies.events.settings import EventSettings

__all__ = ["REGIONAL_COLUMNS", "regional_events"]

REGIONAL_COLUMNS = ["variable", "event_id", "kind", "direction", "onset_median", "onset_q025", "onset_q975",
                    "midpoint_median", "midpoint_q025", "midpoint_q975",
                    "duration_median", "duration_q025", "duration_q975", "amplitude_median", "amplitude_q025",
                    "amplitude_q975", "probability", "p_value", "significant", "n_members", "n_records",
                    "records", "note"]


def _empty() -> pd.DataFrame:
    text = {"variable", "event_id", "kind", "direction", "records", "note"}
    return pd.DataFrame({c: pd.Series(dtype=object if c in text else bool if c == "significant" else float)
                         for c in REGIONAL_COLUMNS})


def regional_events(stacks: dict, settings: EventSettings, rng_for_variable) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Events of every stacked variable, with the regional onset over composite members.

    Parameters
    ----------
    stacks : dict
        variable -> :class:`proxies.reconstruction.stack.StackEnsemble`.
    settings : EventSettings
        As for a core (the same detection and significance test).
    rng_for_variable : callable
        ``variable -> numpy.random.Generator`` (the pipeline passes
        ``rng_for(run_seed, "stack-events", variable)``).

    Returns
    -------
    (events, onsets) : DataFrame, DataFrame
        ``events``: :data:`REGIONAL_COLUMNS` (``midpoint_*``: quantiles of each member's
        ``(onset + end) / 2`` [cal BP]; ``n_records``: records in the composite at the onset
        median; ``records``: which, comma separated); ``onsets``: ``variable, event_id,
        member, onset_cal_bp, end_cal_bp, amplitude, detected`` (the regional onset
        distribution).
    """
    from proxies.events import detect_core_events

    frames, onset_frames = [], []
    for variable, stack in sorted(stacks.items()):
        series = SimpleNamespace(age_cal_bp=stack.age_cal_bp, values=stack.values)
        result = detect_core_events(SimpleNamespace(core_id="stack", series={variable: series}), settings,
                                    rng_for_variable(variable))
        if not len(result.events):
            continue
        events = result.events.drop(columns=["core_id", "end_median", "end_q025", "end_q975", "tau_yr"],
                                    errors="ignore")
        at = np.searchsorted(stack.age_cal_bp, events["onset_median"].to_numpy(dtype=float))
        at = np.clip(at, 0, stack.age_cal_bp.size - 1)
        events["n_records"] = stack.n_records[at].astype(np.int64)
        mid = result.onsets.assign(mid=(result.onsets["onset_cal_bp"] + result.onsets["end_cal_bp"]) / 2)
        quantiles = mid.groupby("event_id")["mid"].quantile([0.5, 0.025, 0.975]).unstack()
        for column, level in (("midpoint_median", 0.5), ("midpoint_q025", 0.025), ("midpoint_q975", 0.975)):
            events[column] = events["event_id"].map(quantiles[level]).to_numpy(dtype=float)
        events["records"] = ", ".join(stack.records)
        frames.append(events)
        onset_frames.append(result.onsets.assign(variable=variable))
    if not frames:
        onsets = pd.DataFrame({"variable": pd.Series(dtype=object), "event_id": pd.Series(dtype=object),
                               "member": pd.Series(dtype=np.int64), "onset_cal_bp": pd.Series(dtype=float),
                               "end_cal_bp": pd.Series(dtype=float), "amplitude": pd.Series(dtype=float), "detected": pd.Series(dtype=bool)})
        return _empty(), onsets
    events = pd.concat(frames, ignore_index=True)[REGIONAL_COLUMNS]
    onsets = pd.concat(onset_frames, ignore_index=True)
    return events, onsets[["variable", "event_id", "member", "onset_cal_bp", "end_cal_bp", "amplitude", "detected"]]
