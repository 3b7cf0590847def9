"""Abrupt events on every ensemble member: recovery of a known event, coverage of the
reported ranges, and the false-event rate on pure AR(1) red noise."""

from __future__ import annotations

import numpy as np
import pytest

from proxies.events import EVENT_COLUMNS, EventSettings, detect_core_events, detect_series_events
from proxies.events.persistence import ar1_surrogates
from proxies.problems import InputError
from proxies.reconstruction import ReconstructionSettings, reconstruct_core
from proxies.reconstruction.anomalies import window_mean_per_member
from proxies.reconstruction.grid import bin_means
from synthetic_cores import make_synthetic_core

TRUE_ONSET, TRUE_END, TRUE_AMPLITUDE = 9400.0, 9150.0, -2.8


def _record_detections(detections):
    """Member detections of the whole-record search (not the local tests of established events)."""
    return detections[detections["test"] == "record"]


@pytest.fixture(scope="module")
def synthetic_run():
    """A synthetic core with a known cold event (synthetic_cores.truth_with_cold_event):
    onset 9,400 cal BP, recovery complete 9,150 cal BP, -2.8 degC, on a 50-yr grid."""
    rng = np.random.default_rng(20261201)
    core, chron, cal, true_age, true_values = make_synthetic_core(rng, n_members=300)
    # A stated 2,000-yr reference window: a 30-yr normal rests on one or two samples here, and
    # its error (common to every time step) would dominate the coverage check below.
    settings = ReconstructionSettings(reference="window", reference_young_cal_bp=1000.0,
                                      reference_old_cal_bp=3000.0)
    recon = reconstruct_core(core, chron, cal, settings, rng)
    events = detect_core_events(recon, EventSettings(), np.random.default_rng(7))
    return recon, events, true_age, true_values


def test_the_known_event_is_found_with_its_onset_in_the_95_range(synthetic_run):
    _, result, _, _ = synthetic_run
    table = result.events
    assert list(table.columns) == EVENT_COLUMNS
    cold = table[(table["kind"] == "excursion") & (table["direction"] == "negative")]
    assert len(cold) >= 1
    event = cold.sort_values("probability", ascending=False).iloc[0]
    assert event["probability"] >= 0.8 and bool(event["significant"])
    assert event["onset_q025"] <= TRUE_ONSET <= event["onset_q975"]
    assert event["end_q025"] <= TRUE_END <= event["end_q975"]
    assert event["amplitude_q025"] <= TRUE_AMPLITUDE <= event["amplitude_q975"]
    assert 100 <= event["duration_median"] <= 500
    # Nothing else is reported as a likely significant event.
    others = table.drop(index=event.name)
    assert not ((others["probability"] >= 0.5) & others["significant"]).any()


def test_event_probability_through_time_peaks_at_the_event(synthetic_run):
    _, result, _, _ = synthetic_run
    prob = result.probability
    assert list(prob.columns) == ["age_cal_bp", "variable", "probability"]
    peak = prob.loc[prob["probability"].idxmax()]
    assert TRUE_END <= peak["age_cal_bp"] <= TRUE_ONSET and peak["probability"] >= 0.8
    far = prob[(prob["age_cal_bp"] < 8000) | (prob["age_cal_bp"] > 10500)]
    assert far["probability"].max() < 0.3


def test_anomaly_band_covers_the_true_series(synthetic_run):
    """The 95 % anomaly band covers the true anomaly (true cell mean minus the true mean over
    the 1,000-3,000 cal BP reference window) at least 90 % of the time (issue requirement;
    nominal 95 %)."""
    recon, _, true_age, true_values = synthetic_run
    s = recon.series["temperature"]
    true_cells, counts = bin_means(true_age[:, None], true_values[:, None], s.age_cal_bp)
    true_ref = window_mean_per_member(true_age[:, None], true_values[:, None], (1000.0, 3000.0))
    truth = true_cells[:, 0] - true_ref[0]
    table = recon.table
    ok = np.isfinite(truth) & table["anomaly_q025"].notna().to_numpy()
    inside = (table["anomaly_q025"].to_numpy()[ok] <= truth[ok]) & (truth[ok] <= table["anomaly_q975"].to_numpy()[ok])
    assert ok.sum() > 200
    assert inside.mean() >= 0.90


def test_false_event_rate_on_pure_red_noise_is_near_alpha():
    """Simulation: members that are pure AR(1) red noise (tau = 2 grid steps) should show a
    significant event in about alpha = 5 % of members (binomial band for 400 members and
    sampling error of the 200-surrogate null: accept 1.5-10 %)."""
    rng = np.random.default_rng(11)
    ages = np.arange(200) * 50.0
    values = ar1_surrogates(ages, 100.0, 400, rng)
    events, _, detections, tau_yr = detect_series_events(ages, values, EventSettings(), rng)
    rate = _record_detections(detections)["member"].nunique() / 400
    assert 0.015 <= rate <= 0.10
    assert tau_yr == pytest.approx(100.0, rel=0.35)


@pytest.mark.slow
@pytest.mark.parametrize("tau_yr", [0.0, 50.0, 150.0])
def test_false_event_rate_across_persistence(tau_yr):
    """As above for white noise and for stronger persistence, 3 x 400 members."""
    rates = []
    for seed in range(3):
        rng = np.random.default_rng(100 + seed)
        ages = np.arange(300) * 50.0
        values = ar1_surrogates(ages, tau_yr, 400, rng)
        _, _, detections, _ = detect_series_events(ages, values, EventSettings(), rng)
        rates.append(_record_detections(detections)["member"].nunique() / 400)
    assert 0.01 <= np.mean(rates) <= 0.09


@pytest.mark.slow
def test_false_significant_events_at_the_ensemble_level_stay_near_alpha():
    """Simulation of the event-level test (``significant``, decided on the ensemble-median
    series): ensembles of 40 members that are a common AR(1) climate (tau = 100 yr) plus
    independent member errors, from identical members to independent ones, 20 % empty
    cells, no event. An ensemble with any significant event is a false alarm; over 3 x 40
    ensembles the rate must stay near alpha = 0.05 (accept <= 0.09: the binomial 97.5 %
    bound for 120 trials at 0.05 is about 0.09)."""
    ages = np.arange(200) * 50.0
    false_alarms, trials = 0, 0
    for k, (common_sd, member_sd) in enumerate([(1.0, 0.0), (1.0, 1.0), (0.0, 1.0)]):
        for e in range(40):
            rng = np.random.default_rng(1000 * k + e)
            values = (common_sd * ar1_surrogates(ages, 100.0, 1, rng)
                      + member_sd * ar1_surrogates(ages, 50.0, 40, rng))
            values[rng.random(values.shape) < 0.2] = np.nan
            events, _, _, _ = detect_series_events(ages, values, EventSettings(n_surrogates=99), rng)
            false_alarms += bool(len(events) and events["significant"].any())
            trials += 1
    assert false_alarms / trials <= 0.09


def test_gaps_in_members_are_tolerated_and_settings_respected():
    rng = np.random.default_rng(5)
    ages = np.arange(150) * 50.0
    values = 0.5 * rng.standard_normal((150, 100))
    values[60:65] -= 3.0
    values[rng.random(values.shape) < 0.1] = np.nan
    events, prob, _, _ = detect_series_events(ages, values, EventSettings(n_surrogates=99), rng)
    assert prob.shape == (150,)
    best = events.sort_values("probability").iloc[-1]
    assert best["kind"] == "excursion" and best["probability"] > 0.9
    # The step lies between the grid ages 3,250 (last undisturbed) and 3,200 cal BP.
    assert best["onset_q025"] <= 3250 and best["onset_q975"] >= 3200


def test_event_settings_validation():
    with pytest.raises(InputError) as info:
        EventSettings.from_mapping({"alpha": 0.7, "n_surrogates": 5, "background_yr": -5, "colour": 1})
    assert {p.column for p in info.value.problems} == {"alpha", "n_surrogates", "background_yr", "colour"}
    ok = EventSettings.from_mapping({"alpha": 0.1, "variables": ["temperature"], "n_surrogates": 99})
    assert ok.alpha == 0.1 and ok.variables == ("temperature",)


def test_disabled_or_too_short_gives_empty_tables(synthetic_run):
    recon, _, _, _ = synthetic_run
    result = detect_core_events(recon, EventSettings(enabled=False), np.random.default_rng(0))
    assert result.events.empty and list(result.events.columns) == EVENT_COLUMNS
    assert result.probability.empty


def test_background_removal_keeps_a_short_excursion_and_removes_a_slow_swing():
    from proxies.events.candidates import remove_background

    t = np.arange(300.0)
    slow = 3 * np.sin(t / 60.0)
    event = np.where((t >= 150) & (t < 155), -2.5, 0.0)
    out = remove_background((slow + event)[:, None], 41)[:, 0]
    assert np.abs(out[20:140]).max() < 0.4          # the ends, where the window shrinks, are weaker
    assert out[150:155].mean() == pytest.approx(-2.5, abs=0.3)


def _demo_reconstruction(core_id: str, n_members: int):
    """Reconstruction of an invented demo core (demo_cores/, truth in demo_cores/truth/),
    built by calling the stage functions the way pipelines/flows/stages.py does, with a small
    ensemble and the demo run's seed and settings."""
    from pipelines.auxiliary import read_instrumental, read_training_set
    from pipelines.config import load_run_config, stage_settings
    from pipelines.curvefiles import read_curve_file
    from pipelines.ingest import load_core
    from proxies.calibration import calibrate_core, fit_transfer_function
    from proxies.chronology import build_chronology
    from proxies.seeding import rng_for

    from conftest import DEMO_CORES

    config = load_run_config(DEMO_CORES / "run.toml")
    curves = {name: read_curve_file(path, name=name) for name, path in config.curves.items()}
    loaded = load_core(DEMO_CORES / "cores" / core_id)
    core = loaded[0] if isinstance(loaded, tuple) else loaded
    chron = build_chronology(core, curves, stage_settings(config, "chronology"), n_members,
                             rng_for(config.seed, "chronology", core_id))
    got = read_training_set(config, "midges")
    training, spec = got if isinstance(got, tuple) else (got, None)
    transfers = {"midges": fit_transfer_function(training, spec, rng_for(config.seed, "calibration", "training:midges"))}
    instrumental = {"station": read_instrumental(config, "station")}
    cal = calibrate_core(core, chron, stage_settings(config, "calibration"), transfers, instrumental, n_members,
                         rng_for(config.seed, "calibration", core_id))
    recon = reconstruct_core(core, chron, cal, stage_settings(config, "reconstruction"),
                             rng_for(config.seed, "reconstruction", core_id))
    return recon, stage_settings(config, "events"), config.seed


@pytest.mark.slow
@pytest.mark.parametrize("core_id, variable, min_probability", [("ULLA-1", "air_temperature", 0.7),
                                                                  ("TEL-07", "sst", 0.3)])
def test_demo_event_recovered(core_id, variable, min_probability):
    """The invented demo's one abrupt cold event (demo_cores/truth/event.toml: onset
    9,300 cal BP, 300 yr, -2.8 degC air / -2.0 degC SST) is found in a 120-member
    reconstruction of each core: a significant negative excursion whose 95 % onset range holds
    the true onset and whose share of members is at least ``min_probability`` (ULLA-1: the
    issue's aim of 0.7; TEL-07, noisier Mg/Ca with a smaller amplitude: 0.3). Before the scan
    statistic and the ensemble-level test the demo run gave about 0.2-0.45 and 0.1, never
    significant."""
    import tomllib

    from conftest import DEMO_CORES
    from proxies.seeding import rng_for

    truth = tomllib.loads((DEMO_CORES / "truth" / "event.toml").read_text())["event"]
    recon, settings, seed = _demo_reconstruction(core_id, 120)
    result = detect_core_events(recon, settings, rng_for(seed, "events", core_id))
    table = result.events[(result.events["variable"] == variable) & (result.events["kind"] == "excursion")
                          & (result.events["direction"] == "negative")]
    near = table[(table["onset_q025"] <= truth["onset_cal_bp"]) & (truth["onset_cal_bp"] <= table["onset_q975"])]
    assert len(near) == 1, table
    event = near.iloc[0]
    assert bool(event["significant"]) and event["probability"] >= min_probability
    assert event["end_q025"] <= truth["end_cal_bp"] + 100
    # The per-member onsets behind the summary (event_onsets.parquet), one per detecting member.
    onsets = result.onsets[result.onsets["event_id"] == event["event_id"]]
    assert list(result.onsets.columns) == ["event_id", "member", "onset_cal_bp", "end_cal_bp", "amplitude", "detected"]
    # every member contributes (detecting members their detection, the others their fitted
    # change at the event's place), so the summaries are over all members
    assert len(onsets) == onsets["member"].nunique() == recon.series[variable].values.shape[1]
    assert onsets["detected"].sum() == event["n_members"]
    assert onsets["onset_cal_bp"].median() == pytest.approx(event["onset_median"])
