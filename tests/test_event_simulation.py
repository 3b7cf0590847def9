"""Abrupt events on our own simulation (tests/event_simulation.py): AR(1) red-noise climate
plus measurement noise, seen through uncertain ages (each member's own age error, and the
record's age model itself off by one draw), with a planted lasting step or a short excursion.

Each case is reported on its own (not pooled). The issue's targets are stated beside each
check; where the code does not reach a target yet, the assertion guards the level it
reaches today (measured on this simulation, 2 shared cores) and the docstring says so.
"""

from __future__ import annotations


import numpy as np
import pytest

from event_simulation import archive_false_share, case_outcomes, case_shares, lag_trial
from proxies.events import EventSettings

pytestmark = pytest.mark.slow
N = 100  # ensembles per case
SMALL = dict(n_points=100, n_members=24)  # keeps the suite to a few minutes on 2 cores
KEEP = EventSettings()  # shifts no longer depend on the background (the old step-keeping key is gone)
ARCHIVES = 5  # disjoint simulated archives of 100 series (80 red noise, 20 with an excursion)


@pytest.fixture(scope="module")
def pools():
    """Each case's ensembles, detected once with default settings: the per-case tests use
    the first ``N`` of each, the archive test ``ARCHIVES`` disjoint sets of them."""
    return {"none": case_outcomes("none", 80 * ARCHIVES, 21, EventSettings(), **SMALL),
            "excursion": case_outcomes("excursion", N, 22, EventSettings(), **SMALL),
            "step": case_outcomes("step", N, 23, EventSettings(), **SMALL)}


def test_false_significant_events_on_pure_red_noise(pools):
    """Target (issue 16): <= 5 % of pure red-noise series with a false significant event.
    Measured with default settings: 3 % of 100 ensembles (shifts tested on the members'
    standardised mean against a null estimated about each member's best step, excursions on
    the median series; 4 % with the shift null matched like the excursions')."""
    r = case_shares(pools["none"], "none", N)
    print("red noise: false", r["false"])
    assert r["false"] <= 0.05


def test_excursion_power_and_onset_coverage_default_settings(pools):
    """A 3-SD excursion of 300 yr (6 grid points). Target: power >= 80 %, onset 95 % range
    holding the truth 85-99 %. Coverage met: 97 % (onsets carry one parametric AR(1)
    bootstrap draw per member beside the age spread; 89 % before). Power NOT reached:
    measured 38 % of 100 ensembles, asserted at the level reached (>= 30 %)."""
    r = case_shares(pools["excursion"], "excursion", N)
    print("excursion: found", r["found"], "covered", r["covered"], "false", r["false"])
    assert r["found"] >= 0.30
    assert 0.85 <= r["covered"] <= 0.99


def test_step_power_and_onset_coverage_default_settings(pools):
    """A lasting 3-SD step (>= 33 grid points each side), default settings. Target: power >=
    80 %, onset coverage 85-99 %. Coverage met: 93 % of the found steps (63 % before the
    onsets carried the change's location uncertainty and lost the ramp start's old bias).
    Coverage 91 % with the shift null estimated about each member's best step
    (proxies/events/shiftnull.py). Power NOT reached: 78 % of 100 ensembles (69 % with the
    shift null matched like the excursions', which came out 2-4 grid steps where the
    climate has 1.5), asserted >= 70 % (raised from 60 % on that measurement)."""
    r = case_shares(pools["step"], "step", N)
    print("step: found", r["found"], "covered", r["covered"], "false", r["false"])
    assert r["found"] >= 0.70
    assert 0.85 <= r["covered"] <= 0.99


def test_fdr_keeps_the_share_of_false_discoveries_of_an_archive_low(pools):
    """``ARCHIVES`` disjoint archives of 100 series each: 80 pure red noise, 20 with a 3-SD
    excursion. Target: with the Benjamini-Hochberg q-value at 0.05 over every searched series
    (a series without events counts as one hypothesis with p = 1), the share of false
    discoveries among the events that survive is at most 10 %, reported as mean and spread
    over the archives (one archive says little: a handful of events survive). An event of a
    planted excursion's direction whose span from onset to end comes within 300 yr of the
    planted one is a true discovery (its onset error is the coverage tests' business); the
    strict count (onset within 300 yr) is printed beside. Measured: 0 false of 10 survivors
    in 5 archives (strict: 1 of 10); with the family of reported events only: 2 false of 14
    (archive shares 0.25, 0, 0, 0, 0.25). Beyond the surrogates' range the p-value comes
    from a Gumbel tail (tests/test_event_significance.py), so true events can survive."""
    shares, strict, called_real = [], [], 0
    for k in range(ARCHIVES):
        r = archive_false_share(pools, {"none": range(80 * k, 80 * (k + 1)), "excursion": range(20 * k, 20 * (k + 1))})
        shares.append(r["false"] / max(r["called"], 1))
        strict.append(r["false_strict"] / max(r["called"], 1))
        called_real += r["called"] - r["false"]
        print(f"archive {k}: {r}")
    print("false share: mean", np.mean(shares), "range", np.min(shares), "-", np.max(shares),
          "| strict: mean", np.mean(strict), "range", np.min(strict), "-", np.max(strict))
    assert np.mean(shares) <= 0.10
    assert called_real >= ARCHIVES


@pytest.mark.parametrize("lag_yr", [0.0, 200.0])
def test_lead_lag_range_holds_the_true_lag(lag_yr):
    """Two cores sharing one lasting 5-SD step, the second ``lag_yr`` later, through the whole
    detection (significance, all-member onsets, lead/lag table). Target: the 95 % lag range
    holds the true lag in >= 90 % of the trials. Measured (small ensembles,
    ``background_keeps_changes = 1``, 50 trials per lag): 45 of 45 and 45 of 46 trials where
    both cores find the step (before lag quantiles were snapped to attained differences,
    about 89 %: a range ending at an attained lag of exactly 0 came out as -2e-13).
    25 trials here (the detection is the slow part); guarded at >= 85 %."""
    rows = [lag_trial(26, i, lag_yr, KEEP, **SMALL) for i in range(25)]
    rows = [r for r in rows if r is not None]
    assert len(rows) >= 20
    held = np.mean([r["lag_q025_yr"] <= lag_yr <= r["lag_q975_yr"] for r in rows])
    assert held >= 0.85
    if lag_yr > 0:
        assert np.median([r["probability_a_leads"] for r in rows]) > 0.8
