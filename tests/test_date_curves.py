"""Per-date curve choices: blends of two curves with an uncertain share, post-bomb dates.

The curves are invented (straight lines and a made-up bomb peak), so the expected calendar
ages follow from the setup."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from proxies.chronology import ChronologySettings
from proxies.chronology.calibrate import calibrate_radiocarbon
from proxies.chronology.curve_cells import parse_curve_cell, share_quadrature
from proxies.chronology.curves import CalibrationCurve, blend_curves
from proxies.chronology.stage import calibrate_core_dates
from proxies.cores import Core
from proxies.cores.validation import check_curve_names
from proxies.problems import InputError


def _straight(name, offset):
    cal = np.arange(0.0, 20001.0, 1.0)
    return CalibrationCurve(name, cal, cal + offset, np.full(cal.size, 10.0))


def _post_bomb():
    """Invented post-bomb curve, -70..0 cal BP (2020..1950 CE): F14C rises from 1.0 at 1955 CE
    (-5 cal BP) to 1.8 at 1963 CE (-13 cal BP), then falls to 1.05 at 2020 CE (-70 cal BP)."""
    cal = np.arange(-70.0, 1.0, 1.0)
    year = 1950 - cal
    f = np.where(year <= 1955, 1.0, np.where(year <= 1963, 1.0 + 0.8 * (year - 1955) / 8,
                                             1.8 - 0.75 * (year - 1963) / 57))
    age = -8033 * np.log(f)
    return CalibrationCurve("bomb", cal, age, np.full(cal.size, 8.0))


def _core(dates):
    return Core(id="B-1", archive="lake", latitude=1.0, longitude=1.0, collected_ce=2020, site="invented",
                top_age_error=None, samples=pd.DataFrame({"depth_cm": [0.0, 50.0]}), dates=dates, counts=None,
                folder="cores/B-1")


def _dates(ages, curves_cells, errors=None):
    n = len(ages)
    return pd.DataFrame({"label": [f"B{i}" for i in range(n)], "depth_cm": np.arange(1.0, n + 1), "kind": "radiocarbon",
                         "age": ages, "error": errors or [20.0] * n, "curve": curves_cells,
                         "source_row": np.arange(2, n + 2)})


def test_blend_cell_is_parsed_and_checked():
    choice = parse_curve_cell("blend:atmosphere:marine:0.3:0.1")
    assert (choice.base, choice.admixture, choice.share, choice.share_sd) == ("atmosphere", "marine", 0.3, 0.1)
    assert parse_curve_cell("atmosphere").admixture is None
    bad = pd.DataFrame({"curve": ["blend:atmosphere:marine:1.4", "blend:atmosphere", "blend:atmosphere:lake:0.2",
                                  "atmosphere"], "kind": "radiocarbon", "source_row": [2, 3, 4, 5]})
    problems = check_curve_names(bad, "cores/B-1/dates.csv", {"atmosphere", "marine"})
    assert [(p.row, p.column) for p in problems] == [(2, "curve"), (3, "curve"), (4, "curve")]
    assert "blend:BASE:ADMIXTURE:SHARE" in problems[0].fix and "'lake'" in problems[2].message


def test_blended_date_lies_between_the_two_curves_and_widens_with_the_share_uncertainty():
    """Curves 14C = cal + 0 and cal + 400: a 30 % share moves 14C by 120 yr, so 5,120 14C yr BP
    calibrates to 5,000 cal BP on the blend."""
    curves = {"atmosphere": _straight("atmosphere", 0.0), "marine": _straight("marine", 400.0)}
    table, dates = calibrate_core_dates(_core(_dates([5120.0, 5120.0], ["blend:atmosphere:marine:0.3",
                                                                         "blend:atmosphere:marine:0.3:0.1"])),
                                        curves, ChronologySettings(core_top=False))
    assert dates.median()[0] == pytest.approx(5000, abs=2)
    assert dates.median()[1] == pytest.approx(5000, abs=5)
    sd = [np.sqrt(np.sum(dates.row(i)[1] * (dates.row(i)[0] - dates.mean()[i]) ** 2)) for i in range(2)]
    # share sd 0.1 x 400 yr = 40 yr more spread, in quadrature with ~22 yr
    assert sd[1] == pytest.approx(np.hypot(sd[0], 40.0), rel=0.1)
    assert table["curve_used"].iloc[1] == "blend:atmosphere:marine:0.3:0.1"
    # the blend itself is blend_curves (common practice)
    mixed = blend_curves(curves["atmosphere"], curves["marine"], 0.3)
    assert mixed.at([5000.0])[0][0] == pytest.approx(5120.0)


def test_share_quadrature_is_a_censored_normal():
    shares, weights = share_quadrature(0.05, 0.1)
    assert weights.sum() == pytest.approx(1.0) and shares.min() >= 0
    assert np.sum(weights * shares) > 0.05  # mass below 0 is moved up to 0


def test_post_bomb_date_calibrates_to_the_right_years():
    """F14C 1.4 on the invented curve: reached in 1959 CE on the rise and ~1993 CE on the fall."""
    curve = _post_bomb().on_grid(1.0)
    dates = calibrate_radiocarbon([-8033 * np.log(1.4)], [15.0], curve)
    ages, mass = dates.row(0)
    year = 1950 - ages
    rise = mass[np.abs(year - 1959) <= 2].sum()
    fall = mass[np.abs(year - (1963 + 57 * 0.4 / 0.75)) <= 8].sum()  # 1993.4 CE
    assert rise > 0.1 and fall > 0.1 and rise + fall > 0.95


def test_post_bomb_date_without_a_post_bomb_curve_is_refused_with_its_row():
    curves = {"atmosphere": _straight("atmosphere", 0.0)}
    with pytest.raises(InputError) as caught:
        calibrate_core_dates(_core(_dates([1200.0, -2700.0], [None, None])), curves, ChronologySettings())
    (problem,) = caught.value.problems
    assert problem.row == 3 and problem.column == "curve" and "post-bomb" in problem.message
    assert "cal BP below 0" in problem.fix
    # with the post-bomb curve named in its cell it calibrates
    curves["bomb"] = _post_bomb()
    table, dates = calibrate_core_dates(_core(_dates([1200.0, -2700.0], [None, "bomb"])), curves,
                                        ChronologySettings())
    assert table["curve_used"].tolist()[1:] == ["atmosphere", "bomb"]  # after the core top
    assert -70 <= dates.median()[2] <= 0
