"""Regional onset from the stack: the composite keeps every member (member m = mean of the
records' members m), member draws are seeded by stable names, memory stays small for 100
cores x 500 members, and an event found in the stack has an onset distribution whose 95 %
range holds the true regional onset (our own simulation, tests/event_simulation.py).
"""

from __future__ import annotations

import dataclasses
import tracemalloc

import numpy as np
import pytest

from event_simulation import simulated_ensemble
from proxies.events import EventSettings
from proxies.events.regional import REGIONAL_COLUMNS, regional_events
from proxies.reconstruction import GridSeries, ReconstructionSettings
from proxies.reconstruction.stack import stack_ensembles, stack_records
from proxies.seeding import rng_for


class _Result:
    def __init__(self, series):
        self.series = series


def _series(ages, values, variable="temperature"):
    n = np.ones(ages.size, dtype=int)
    return GridSeries(variable, "degC", ages, values, values, n, (float(ages[0]), float(ages[-1])))


def test_stack_keeps_every_member_as_the_mean_of_the_records_members():
    rng = np.random.default_rng(1)
    ages = np.arange(0.0, 1001.0, 50.0)
    a, b = rng.normal(size=(ages.size, 30)), rng.normal(size=(ages.size, 30)) + 2.0
    results = {"A": _Result({"t": _series(ages, a)}), "B": _Result({"t": _series(ages, b)})}
    settings = ReconstructionSettings(stack_young_cal_bp=0.0, stack_old_cal_bp=1000.0)
    stack = stack_ensembles(results, settings, seed=4)["t"]
    expected = ((a - a.mean(axis=0)) + (b - b.mean(axis=0))) / 2  # anomaly over the window, per member
    np.testing.assert_allclose(stack.values, expected, atol=1e-12)
    assert stack.records == ("A/t", "B/t") and (stack.n_records == 2).all()
    table = stack_records({}, settings, ensembles={"t": stack})
    np.testing.assert_allclose(table["value_median"], np.median(expected, axis=1))


def test_member_draws_are_seeded_by_stable_names():
    """A record with fewer members is resampled by rng_for(seed, "stack", core, series):
    adding another core does not change its draw."""
    rng = np.random.default_rng(2)
    ages = np.arange(0.0, 501.0, 50.0)
    small = _Result({"t": _series(ages, rng.normal(size=(ages.size, 10)))})
    big = _Result({"t": _series(ages, rng.normal(size=(ages.size, 40)))})
    other = _Result({"t": _series(ages, rng.normal(size=(ages.size, 40)))})
    settings = ReconstructionSettings(stack_young_cal_bp=0.0, stack_old_cal_bp=500.0)
    two = stack_ensembles({"S": small, "B": big}, settings, seed=9)["t"].values
    three = stack_ensembles({"S": small, "B": big, "C": other}, settings, seed=9)["t"].values
    s_std = small.series["t"].values - small.series["t"].values.mean(axis=0)
    b_std = big.series["t"].values - big.series["t"].values.mean(axis=0)
    o_std = other.series["t"].values - other.series["t"].values.mean(axis=0)
    recovered_small = 2 * two - b_std  # the small record's drawn members
    np.testing.assert_allclose(3 * three - b_std - o_std, recovered_small, atol=1e-10)
    draw = rng_for(9, "stack", "S", "t").integers(0, 10, 40)
    np.testing.assert_allclose(recovered_small, s_std[:, draw], atol=1e-10)


def test_memory_stays_small_for_100_cores_of_500_members():
    """Records are composited one at a time: the extra memory is a few composites, not a
    (cores x time x members) cube (100 x 60 x 500 doubles = 24 MB)."""
    rng = np.random.default_rng(3)
    ages = np.arange(0.0, 3000.0, 50.0)
    results = {f"C{k:03d}": _Result({"t": _series(ages, rng.normal(size=(ages.size, 500)))}) for k in range(100)}
    settings = ReconstructionSettings(stack_young_cal_bp=0.0, stack_old_cal_bp=2950.0)
    tracemalloc.start()
    stack = stack_ensembles(results, settings, seed=1)["t"]
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    one = ages.size * 500 * 8
    assert stack.values.shape == (ages.size, 500)
    assert peak < 12 * one  # the cube alone would be 100 x one


@pytest.mark.slow
def test_regional_onset_range_holds_the_shared_onset():
    """Three simulated records (AR(1) red noise plus measurement noise, each with its own
    uncertain age model) share a lasting 5-SD step at 4,025 yr BP; the stack finds it, and the
    95 % range of the regional midpoint holds the true change in at least 6 of 8 trials
    (binomial at 85 % coverage: P(<= 5 of 8) ~ 3 %). The ramp's onset of the composite is
    biased old (it starts with the earliest record's change): checked to lie at or before
    the midpoint."""
    settings = dataclasses.replace(EventSettings(), n_surrogates=60)
    reco = ReconstructionSettings()
    onset = 1000.0 + 50.0 * 60 + 25.0
    held = found = 0
    for trial in range(8):
        results = {}
        for core in ("A", "B", "C"):
            ages, values, _ = simulated_ensemble(rng_for(31, "regional", core, trial), kind="step", size=5.0,
                                                 onset=onset, n_points=100, n_members=24)
            results[core] = _Result({"t": _series(ages, values)})
        stacks = stack_ensembles(results, reco, seed=trial)
        events, onsets = regional_events(stacks, settings, lambda v, t=trial: rng_for(31, "stack-events", v, t))
        assert list(events.columns) == REGIONAL_COLUMNS
        hit = events[events["significant"] & (events["kind"] == "shift")
                     & (abs(events["onset_median"] - onset) <= 400)]
        if not len(hit):
            continue
        found += 1
        row = hit.iloc[0]
        held += bool(row["midpoint_q025"] <= onset <= row["midpoint_q975"])
        assert row["onset_median"] >= row["midpoint_median"]
        members = onsets[onsets["event_id"] == row["event_id"]]
        assert len(members) == 24 and row["n_records"] == 3
    assert found >= 6 and held >= 6


def test_report_lists_regional_events_with_their_midpoint(tmp_path):
    import pandas as pd

    from pipelines.report import write_run_report
    from run_folder_factory import make_run_folder

    run = tmp_path / "run"
    make_run_folder(run)
    row = {c: [0.0] for c in REGIONAL_COLUMNS}
    row.update(variable=["temperature"], event_id=["temperature-E01"], kind=["shift"], direction=["positive"],
               onset_median=[4150.0], midpoint_median=[4061.0], significant=[True], records=["A/t, B/t"], note=[""])
    pd.DataFrame(row).to_parquet(run / "regional_events.parquet")
    text = write_run_report(run).read_text(encoding="utf-8")
    assert "regional onset and midpoint" in text and "4061" in text
