"""Simulated ensembles for the event tests: a red-noise climate with a planted change, seen
through uncertain ages and measurement noise (our own simulation).

Truth: AR(1) red noise of unit marginal SD with persistence ``tau_steps`` grid steps
(Mudelsee 2002, Eq. 1), plus a planted lasting step or a short excursion of ``size``
noise SD. Each ensemble member sees the truth at its own ages: grid age ``g`` of member
``m`` shows the truth at ``g + offset_m + drift_m(g)`` (a common age error of SD
``age_sd_yr`` plus a slow random walk), and adds independent measurement noise of SD
``noise_sd``. All draws come from the generator passed in.
"""

from __future__ import annotations

import numpy as np

STEP_YR = 50.0


def red_noise(n_points: int, tau_steps: float, n_series: int, rng: np.random.Generator) -> np.ndarray:
    """Unit-variance AR(1) series on an even grid, shape (n_points, n_series)."""
    a = np.exp(-1.0 / tau_steps) if tau_steps > 0 else 0.0
    e = rng.standard_normal((n_points, n_series))
    out = np.empty_like(e)
    out[0] = e[0]
    for i in range(1, n_points):
        out[i] = a * out[i - 1] + np.sqrt(1 - a * a) * e[i]
    return out


def planted_truth(ages: np.ndarray, kind: str, size: float, onset: float, length_yr: float) -> np.ndarray:
    """The planted change on the ages [cal BP]: ``step`` is ``size`` from ``onset`` onwards
    (younger ages), ``excursion`` is ``size`` during ``length_yr`` after ``onset``."""
    if kind == "none":
        return np.zeros_like(ages)
    after = ages <= onset
    if kind == "step":
        return np.where(after, size, 0.0)
    return np.where(after & (ages > onset - length_yr), size, 0.0)


def simulated_ensemble(rng: np.random.Generator, kind: str = "step", size: float = 3.0,
                       n_points: int = 120, n_members: int = 40, tau_steps: float = 1.5,
                       noise_sd: float = 0.3, age_sd_yr: float = 60.0, onset: float | None = None,
                       length_yr: float = 300.0, young: float = 1000.0, model_error: bool = True):
    """One ensemble: ``(grid ages [cal BP, increasing], values (T, M), true onset)``.

    With ``model_error`` the record's own age model is off by one draw of the age error
    (SD ``age_sd_yr``), common to all members: the ensemble describes the uncertainty of the
    ages, it is not centred on the truth."""
    fine = 5  # truth on a 10-yr grid, so that age errors move the change smoothly
    ages = young + STEP_YR * np.arange(n_points)
    fine_ages = young - 500 + (STEP_YR / fine) * np.arange((n_points + 20) * fine)
    if onset is None:
        onset = float(young + STEP_YR * rng.integers(n_points // 3, 2 * n_points // 3) + STEP_YR / 2)
    climate = red_noise(n_points + 20, tau_steps, 1, rng)[:, 0]
    coarse = young - 500 + STEP_YR * np.arange(n_points + 20)
    truth = np.interp(fine_ages, coarse, climate) + planted_truth(fine_ages, kind, size, onset, length_yr)
    offset = age_sd_yr * rng.standard_normal(n_members)
    if model_error:
        offset = offset + age_sd_yr * rng.standard_normal()
    drift = np.cumsum(rng.standard_normal((n_points, n_members)), axis=0) * (age_sd_yr / np.sqrt(4 * n_points))
    seen = ages[:, None] + offset[None, :] + drift
    values = np.interp(seen, fine_ages, truth) + noise_sd * rng.standard_normal((n_points, n_members))
    return ages, values, onset


def case_outcomes(kind: str, n_ensembles: int, seed: int, settings, window_yr: float = 300.0, **kwargs):
    """Detect events in ``n_ensembles`` simulated ensembles of one case.

    Returns
    -------
    dict
        ``found`` (share with a significant event of the planted kind within ``window_yr``
        of the true onset), ``covered`` (share of those whose onset 95 % range holds the true
        onset), ``false`` (share with any significant event elsewhere), ``p_values`` (the
        smallest event p-value of each ensemble, 1 if none), ``events`` (each ensemble's
        events table) and ``onsets`` (each ensemble's true onset).
    """
    from proxies.events import detect_series_events
    from proxies.seeding import rng_for

    p_values, tables, onsets = [], [], []
    for i in range(n_ensembles):
        ages, values, onset = simulated_ensemble(rng_for(seed, "truth", kind, i), kind=kind, **kwargs)
        events, _, _, _ = detect_series_events(ages, values, settings, rng_for(seed, "events", kind, i))
        p_values.append(float(events["p_value"].min()) if len(events) else 1.0)
        tables.append(events)
        onsets.append(onset)
    out = {"p_values": np.array(p_values), "events": tables, "onsets": onsets}
    return out | case_shares(out, kind, n_ensembles, window_yr)


def case_shares(outcomes: dict, kind: str, n: int, window_yr: float = 300.0) -> dict:
    """``found``, ``covered`` and ``false`` (see :func:`case_outcomes`) over the first ``n``
    ensembles of a :func:`case_outcomes` result."""
    want = {"step": "shift", "excursion": "excursion"}.get(kind)
    found = covered = false = 0
    for events, onset in zip(outcomes["events"][:n], outcomes["onsets"][:n]):
        sig = events[events["significant"]] if len(events) else events
        near = (abs(sig["onset_median"] - onset) <= window_yr).to_numpy() if len(sig) else np.zeros(0, bool)
        hit = sig[near & (sig["kind"] == want).to_numpy()] if want and len(sig) else sig.iloc[0:0]
        if len(hit):
            found += 1
            covered += bool(hit.iloc[0]["onset_q025"] <= onset <= hit.iloc[0]["onset_q975"])
        false += bool(len(sig) - (near.sum() if want else 0) > 0)
    return {"found": found / n, "covered": covered / max(found, 1), "false": false / n}


def archive_false_share(pools: dict, members: dict, alpha: float = 0.05, length_yr: float = 300.0) -> dict:
    """One simulated archive: the events of the listed ensembles of each case pool
    (:func:`case_outcomes` results), under Benjamini-Hochberg control at ``alpha``.

    Parameters
    ----------
    pools : dict
        case kind -> :func:`case_outcomes` result (planted changes positive, ``length_yr``
        long for excursions).
    members : dict
        case kind -> indices of that pool's ensembles in this archive.

    Returns
    -------
    dict
        ``called`` (events surviving FDR control), ``false`` (of those, events in a series
        without a planted change, or of the wrong direction, or whose span from onset to end
        misses the planted change by more than 300 yr) and ``false_strict`` (as ``false``,
        also counting events of the planted change whose onset is more than 300 yr off).
    """
    from proxies.events.fdr import archive_event_table

    frames, real, strict = {}, {}, {}
    for kind, indices in members.items():
        for i in indices:
            events = pools[kind]["events"][i]
            if not len(events):
                continue
            core = f"{kind}-{i:03d}"
            onset = pools[kind]["onsets"][i]
            frames[core] = events.assign(core_id=core, event_id=[f"t-E{k:02d}" for k in range(len(events))],
                                         variable="t")
            planted = (kind != "none") & (events["direction"] == "positive").to_numpy()
            near = np.abs(events["onset_median"].to_numpy() - onset) <= 300
            end = onset - (length_yr if kind == "excursion" else 0.0)
            spans = (events["end_median"].to_numpy() <= onset + 300) & (events["onset_median"].to_numpy() >= end - 300)
            real[core], strict[core] = planted & (near | spans), planted & near
    searched = sum(len(indices) for indices in members.values())
    table = archive_event_table(frames, alpha, searched)  # rows in sorted core order, in order
    cores = sorted(frames)
    is_real = np.concatenate([real[c] for c in cores]) if cores else np.zeros(0, bool)
    is_strict = np.concatenate([strict[c] for c in cores]) if cores else np.zeros(0, bool)
    called = table["survives_fdr"].to_numpy(dtype=bool)
    return {"called": int(called.sum()), "false": int((called & ~is_real).sum()),
            "false_strict": int((called & ~is_strict).sum())}


def core_onsets(ages, values, settings, rng, core_id: str = "SIM"):
    """Events and all-member onsets of one simulated ensemble, through the core-level stage
    (:func:`proxies.events.detect_core_events`) on a one-variable stand-in reconstruction."""
    from types import SimpleNamespace

    from proxies.events import detect_core_events

    series = SimpleNamespace(age_cal_bp=ages, values=values)
    result = detect_core_events(SimpleNamespace(core_id=core_id, series={"t": series}), settings, rng)
    return result.events, result.onsets.assign(core_id=core_id)


def lag_trial(seed: int, trial: int, lag_yr: float, settings, size: float = 5.0, **kwargs):
    """Two cores sharing one lasting step, core B's ``lag_yr`` later (younger) than core A's.

    Returns
    -------
    dict or None
        The lead/lag row of the two cores' matched events (``lead_lag_table``), ``None`` when
        the step is not found significantly in both cores.
    """
    import pandas as pd

    from proxies.events.leadlag import lead_lag_table
    from proxies.seeding import rng_for

    onset_a = 1000.0 + STEP_YR * 60 + 25.0
    found, onsets = [], []
    for core, onset in (("A", onset_a), ("B", onset_a - lag_yr)):
        ages, values, _ = simulated_ensemble(rng_for(seed, "lag", core, trial), kind="step", size=size,
                                             onset=onset, **kwargs)
        events, member_onsets = core_onsets(ages, values, settings, rng_for(seed, "lag-events", core, trial), core)
        hit = events[events["significant"] & (events["kind"] == "shift")
                     & (abs(events["onset_median"] - onset) <= 400)] if len(events) else events
        if not len(hit):
            return None
        found.append(hit.iloc[[0]])
        onsets.append(member_onsets[member_onsets["event_id"] == hit.iloc[0]["event_id"]])
    table = lead_lag_table(pd.concat(found, ignore_index=True), pd.concat(onsets, ignore_index=True), 1000.0)
    return table.iloc[0].to_dict() if len(table) else None


def ramp_onsets(ages, values, near_age: float, settings):
    """Member onsets [cal BP] of the change near ``near_age`` by the detection's own onset
    estimate: the least-squares ramp (Mudelsee 2000, :func:`proxies.events.ramp.fit_ramps`)
    of each member in the window a detection there gets (``ramp_window_points`` centred on
    the change; the window is placed at ``near_age``, the fitted onset is each member's own)."""
    from proxies.events.ramp import fit_ramps

    ages_fwd, x = ages[::-1], values[::-1]
    centre = int(np.argmin(np.abs(ages_fwd - near_age)))
    half = settings.ramp_window_points // 2
    start = np.full(x.shape[1], max(centre - half, 0))
    stop = np.full(x.shape[1], min(centre + half - 1, ages.size - 1))
    fit = fit_ramps(ages_fwd, x, start, stop, settings.ramp_window_points)
    return ages_fwd[fit.i1]


def ramp_lag_trial(seed: int, trial: int, lag_yr: float, settings, size: float = 5.0, **kwargs) -> dict:
    """As :func:`lag_trial`, with each core's member onsets from :func:`ramp_onsets` at the
    ensemble-median's largest change (no significance test: fast enough for 50 trials)."""
    from proxies.events.leadlag import lag_summary
    from proxies.seeding import rng_for

    onset_a = 1000.0 + STEP_YR * 60 + 25.0
    onsets = []
    for core, onset in (("A", onset_a), ("B", onset_a - lag_yr)):
        ages, values, _ = simulated_ensemble(rng_for(seed, "lag", core, trial), kind="step", size=size,
                                             onset=onset, **kwargs)
        median = np.nanmedian(values, axis=1)
        jump = np.abs(np.convolve(median, np.r_[np.ones(5), -np.ones(5)] / 5, mode="same"))
        jump[:5] = jump[-5:] = 0.0
        onsets.append(ramp_onsets(ages, values, float(ages[int(np.argmax(jump))]), settings))
    return lag_summary(*onsets)
