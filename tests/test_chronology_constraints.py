"""The trusted core top, the grid-independent outlier part and row-order independence.

All on an invented straight calibration curve (14C age = 0.9 cal BP + 50, sigma 15), so the
expected answers follow from the setup itself.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from proxies.chronology import ChronologySettings, build_chronology
from proxies.chronology.calibrate import calibrate_calendar
from proxies.chronology.outliers import outlier_density
from proxies.cores import Core


def _straight_curve():
    from proxies.chronology.curves import CalibrationCurve

    cal = np.arange(-100.0, 60001.0, 5.0)
    return CalibrationCurve("straight", cal, 0.9 * cal + 50, np.full(cal.size, 15.0))


def _dates(depths, cal_ages, error=30.0):
    depths = np.asarray(depths, dtype=float)
    return pd.DataFrame({
        "label": [f"D{i}" for i in range(depths.size)], "depth_cm": depths, "kind": "radiocarbon",
        "age": np.round(0.9 * np.asarray(cal_ages, dtype=float) + 50), "error": error, "thickness_cm": 0.0,
        "curve": None, "reservoir_offset": 0.0, "reservoir_error": 0.0, "exclude": False,
        "source_row": np.arange(2, depths.size + 2)})


def _core(dates, hiatuses=(), top_intact=None, length=None):
    length = float(dates["depth_cm"].max() + 10) if length is None else length
    samples = pd.DataFrame({"depth_cm": np.arange(0.0, length + 0.1, 5.0)})
    return Core(id="C-1", archive="lake", latitude=60.0, longitude=10.0, collected_ce=2018, site="invented",
                top_age_error=None, samples=samples, dates=dates, counts=None, hiatuses_cm=tuple(hiatuses),
                folder="cores/C-1", top_intact=top_intact)


def _run(core, ensemble=600, seed=1, **settings):
    return build_chronology(core, {"atmosphere": _straight_curve()}, ChronologySettings(**settings), ensemble,
                            np.random.default_rng(seed))


def test_core_top_is_a_constraint_when_all_dates_are_deep():
    """Five dates at 100-110 cm: the surface stays at the collection year (-68 +- 5 cal BP)."""
    depths = np.linspace(100, 110, 5)
    result = _run(_core(_dates(depths, 1500 + 20 * (depths - 100))))
    top = result.age_at([0.0])[0]
    lo, hi = np.quantile(top, [0.025, 0.975])
    assert -68 - 15 < lo and hi < -68 + 15
    top_row = result.dates.set_index("label").loc["core top"]
    assert top_row["outlier_prob"] == 0.0 and bool(top_row["constraint"])


def test_core_top_is_not_voted_out_by_old_dates():
    """Dates of 30-49 kyr below 200 cm do not move the surface away from the collection year."""
    depths = np.array([200.0, 250, 300, 350, 400])
    result = _run(_core(_dates(depths, np.linspace(30000, 49000, 5), error=150.0)), ensemble=400)
    assert np.median(result.age_at([0.0])[0]) == pytest.approx(-68, abs=10)
    assert result.dates.set_index("label").loc["core top", "outlier_prob"] == 0.0


def test_a_lost_top_is_dated_by_the_dates_alone():
    depths = np.linspace(100, 110, 5)
    result = _run(_core(_dates(depths, 1500 + 20 * (depths - 100)), top_intact=False))
    assert "core top" not in set(result.dates["label"])
    # the surface is now only bounded by the collection year: older and far less certain
    surface = result.age_at([0.0])[0]
    lo, hi = np.quantile(surface, [0.025, 0.975])
    assert lo >= -68 - 20 and hi - lo > 300 and np.median(surface) > 0
    # and the run-level default is overridden the other way round too
    kept = _run(_core(_dates(depths, 1500 + 20 * (depths - 100)), top_intact=True), core_top=False)
    assert "core top" in set(kept.dates["label"])


def test_outlier_probability_does_not_depend_on_the_grid_length():
    """A hiatus below every date lengthens the calendar grid by tens of kyr; a date's outlier
    probability must stay where it was (it moved from 0.62 to 0.32 with a flat outlier part)."""
    depths = np.array([20.0, 60, 100, 140, 180])
    ages = -68 + 10 * depths
    ages[2] += 200  # a moderately shifted date: its outlier probability is neither 0 nor 1
    dates = _dates(depths, ages)
    # same grid step in both (a coarser step would change the discretisation, not the point)
    plain = _run(_core(dates, length=260.0), ensemble=100, model="accumulation", grid_step_yr=5.0)
    gapped = _run(_core(dates, hiatuses=(220.0,), length=260.0), ensemble=100, model="accumulation",
                  grid_step_yr=5.0)
    p_plain = plain.dates.set_index("label")["outlier_prob"]
    p_gapped = gapped.dates.set_index("label")["outlier_prob"]
    assert 0.05 < p_plain["D2"] < 0.95
    np.testing.assert_allclose(p_gapped.to_numpy(float), p_plain.to_numpy(float), atol=0.03)


def test_outlier_density_is_centred_on_the_date_and_not_renormalised():
    dates = calibrate_calendar([1000.0, 20000.0], [20.0, 100.0], step=1.0)
    dens = outlier_density(dates, 0.0, 10.0, 5000, 500.0, 0.1)
    grid = 10.0 * np.arange(5000)
    assert grid[np.argmax(dens[0])] == pytest.approx(1000, abs=10)
    assert grid[np.argmax(dens[1])] == pytest.approx(20000, abs=10)
    # the older date's outlier part is wider (scale grows with age): lower peak
    assert dens[1].max() < dens[0].max() / 3
    # truncating the grid drops mass but does not change the mass of the cells kept
    short = outlier_density(dates, 0.0, 10.0, 2500, 500.0, 0.1)
    np.testing.assert_allclose(short, dens[:, :2500])
    assert short[1].sum() < 0.99


def test_interpolation_uses_every_date_at_one_depth_whatever_the_row_order():
    """Two dates at 100 cm (1,000 and 1,400 cal BP): both count, so the result does not depend
    on which row comes first (it was 1,942 vs 2,741 cal BP in a real case)."""
    depths = np.array([50.0, 100.0, 100.0, 150.0])
    ages = np.array([500.0, 1000.0, 1400.0, 1700.0])
    dates = _dates(depths, ages, error=20.0)
    swapped = dates.iloc[[0, 2, 1, 3]].reset_index(drop=True)
    a = _run(_core(dates), ensemble=2000, seed=3, model="interpolation", outlier_prior=0.0)
    b = _run(_core(swapped), ensemble=2000, seed=4, model="interpolation", outlier_prior=0.0)
    mean_a, mean_b = np.mean(a.age_at([100.0])[0]), np.mean(b.age_at([100.0])[0])
    assert mean_a == pytest.approx(1200, abs=25) and mean_b == pytest.approx(1200, abs=25)
    # both dates give the depth its age about half of the time
    draws = a.age_at([100.0])[0]
    near_first = np.mean(np.abs(draws - 1000) < 80)
    near_second = np.mean(np.abs(draws - 1400) < 80)
    assert 0.35 < near_first < 0.65 and 0.35 < near_second < 0.65


def test_core_toml_top_intact_is_read_and_checked():
    from proxies.cores.validation import check_core_mapping

    base = {"core": {"id": "T-2", "archive": "marine", "latitude": 1.0, "longitude": 2.0, "collected": 2001},
            "files": {"samples": "s.csv", "dates": "d.csv"}}
    spec, problems = check_core_mapping({**base, "core": {**base["core"], "top_intact": False}}, "T-2/core.toml",
                                        year=2026)
    assert not problems and spec.top_intact is False
    spec, _ = check_core_mapping(base, "T-2/core.toml", year=2026)
    assert spec.top_intact is None
    _, problems = check_core_mapping({**base, "core": {**base["core"], "top_intact": "lost"}}, "T-2/core.toml",
                                     year=2026)
    assert [p.column for p in problems] == ["core.top_intact"]
    assert "top_intact = false" in problems[0].fix
