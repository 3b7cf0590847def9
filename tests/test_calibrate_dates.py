"""Date calibration and HPD ranges (proxies.chronology.calibrate) and the radiocarbon command.

Outside references: the IntCal20 curve (Reimer et al. 2020, doi:10.1017/RDC.2020.41, in
../shared/reference); the normal distribution's 95.45 % = +-2 sigma (scipy.stats.norm);
the Student-t likelihood form of Christen & Perez (2009), Radiocarbon 51:1047.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from scipy import stats

from pipelines.cli import main
from pipelines.curvefiles import read_curve_file
from proxies.chronology.calibrate import (
    CurveRangeError,
    calibrate_calendar,
    calibrate_radiocarbon,
)


@pytest.fixture(scope="module")
def intcal(intcal20_path):
    return read_curve_file(intcal20_path, name="intcal20").on_grid(1.0)


def _monotone_points(curve, half_window=50, count=6, seed=0, error=10.0):
    """Calendar ages theta where the curve is monotone: it never falls over +-half_window yr,
    and no calendar age outside that window has a curve value within 4 combined sigma of
    mu(theta) (so the age cannot be matched elsewhere). Tabulated 14C ages are integers, so
    1-yr steps may repeat a value."""
    rng = np.random.default_rng(seed)
    mu, sc = curve.c14_age, curve.c14_sigma
    cal = np.arange(mu.size)
    chosen = []
    for i in rng.permutation(np.arange(500, 12000)):
        piece = mu[i - half_window: i + half_window + 1]
        if not (np.all(np.diff(piece) >= 0) and piece[-1] > piece[0]):
            continue
        near = np.abs(mu - mu[i]) < 4 * np.sqrt(error**2 + sc**2)
        if np.all(np.abs(cal[near] - i) <= half_window):
            chosen.append(float(i))
        if len(chosen) == count:
            break
    assert len(chosen) == count
    return np.array(chosen)


def test_curve_value_calibrates_to_its_calendar_age(intcal):
    """A radiocarbon age equal to IntCal20's value where the curve is monotone calibrates to
    that calendar age (10-yr error)."""
    theta = _monotone_points(intcal)
    r, _ = intcal.at(theta)
    dates = calibrate_radiocarbon(r, 10.0, intcal)
    # the mode sits where the curve is within half a combined sigma of R (the density also
    # carries the curve's varying sigma, and tabulated ages are integers), the median within 10 yr,
    # and the calendar age lies in the 68.3 % HPD region
    mode_value, mode_sigma = intcal.at(dates.mode())
    assert np.all(np.abs(mode_value - r) <= 0.5 * np.hypot(10.0, mode_sigma))
    assert np.max(np.abs(dates.median() - theta)) <= 10
    for ranges, t in zip(dates.hpd(0.683), theta):
        assert any(young <= t <= old for young, old, _ in ranges)


def test_matches_direct_formula_on_the_whole_curve(intcal):
    """Windowed, vectorised densities equal N(R; mu, s^2 + sigma_c^2) evaluated on all 55,001
    curve points and normalised (an independent, brute-force evaluation)."""
    ages, errors = np.array([2450.0, 7800.0, 21000.0]), np.array([30.0, 45.0, 200.0])
    dates = calibrate_radiocarbon(ages, errors, intcal)
    for i in range(3):
        total = errors[i] ** 2 + intcal.c14_sigma**2
        full = np.exp(-0.5 * (ages[i] - intcal.c14_age) ** 2 / total) / np.sqrt(total)
        full /= full.sum()
        cal, mass = dates.row(i)
        np.testing.assert_allclose(mass, full[cal.astype(int)], atol=1e-9)
        assert full.sum() - full[cal.astype(int)].sum() < 1e-6
        assert dates.mode()[i] == np.argmax(full)


def test_reservoir_offset_is_subtraction_and_quadrature(intcal):
    """dR +- e: calibrate R - dR with sqrt(s^2 + e^2) (common practice)."""
    a = calibrate_radiocarbon([5000.0], [40.0], intcal, reservoir_offset=400.0, reservoir_error=30.0)
    b = calibrate_radiocarbon([4600.0], [50.0], intcal)
    np.testing.assert_allclose(a.values, b.values)
    assert a.start[0] == b.start[0]


def test_student_t_form_and_heavier_tails(intcal):
    """Christen & Perez (2009): p ~ s^-1 (b + (R - mu)^2 / (2 s^2))^-(a + 1/2), a = 3, b = 4."""
    r, s = 3100.0, 30.0
    dates = calibrate_radiocarbon([r], [s], intcal, student_t=True)
    cal, mass = dates.row(0)
    total = s**2 + intcal.c14_sigma[cal.astype(int)] ** 2
    direct = (4 + 0.5 * (r - intcal.c14_age[cal.astype(int)]) ** 2 / total) ** -3.5 / np.sqrt(total)
    np.testing.assert_allclose(mass, direct / direct.sum(), rtol=1e-9)
    normal = calibrate_radiocarbon([r], [s], intcal)
    assert dates.widths[0] > normal.widths[0]
    assert dates.quantile(0.999)[0] - dates.quantile(0.001)[0] > normal.quantile(0.999)[0] - normal.quantile(0.001)[0]


def test_hpd_of_a_normal_calendar_date():
    """95.45 % HPD of N(age, sd) is age +- 2 sd, 68.27 % is +- 1 sd (scipy.stats.norm)."""
    assert stats.norm.cdf(2) - stats.norm.cdf(-2) == pytest.approx(0.9545, abs=1e-4)
    dates = calibrate_calendar([1000.0, -68.0], [50.0, 5.0])
    (r95,), (r68,) = dates.hpd(0.9545)[0], dates.hpd(0.6827)[0]
    assert r95[0] == pytest.approx(900, abs=1.5) and r95[1] == pytest.approx(1100, abs=1.5)
    assert r68[0] == pytest.approx(950, abs=1.5) and r68[1] == pytest.approx(1050, abs=1.5)
    assert dates.median()[1] == pytest.approx(-68.0, abs=0.5)
    assert dates.mean()[0] == pytest.approx(1000.0, abs=0.01)


def test_hpd_has_disjoint_ranges_and_enough_mass(intcal):
    """A date on a wiggle (4520 +- 35) gives several 95.4 % ranges holding >= 95.4 %."""
    dates = calibrate_radiocarbon([4520.0, 9870.0], [35.0, 60.0], intcal)
    for ranges in dates.hpd(0.954):
        assert len(ranges) >= 2
        assert sum(p for _, _, p in ranges) >= 0.954 - 1e-9
        ends = [r[1] for r in ranges[:-1]]
        starts = [r[0] for r in ranges[1:]]
        assert all(e < s for e, s in zip(ends, starts))
        # every range's densities beat every cell outside the HPD region
    cal, mass = dates.row(0)
    inside = np.zeros(cal.size, bool)
    for young, old, _ in dates.hpd(0.954)[0]:
        inside |= (cal >= young) & (cal <= old)
    assert mass[inside].min() >= mass[~inside].max() - 1e-15


def test_vectorised_equals_one_by_one(intcal):
    rng = np.random.default_rng(4)
    ages, errors = rng.uniform(300, 30000, 60), rng.uniform(20, 250, 60)
    together = calibrate_radiocarbon(ages, errors, intcal)
    medians = together.median()
    hpds = together.hpd(0.954)
    for i in range(0, 60, 7):
        alone = calibrate_radiocarbon(ages[i:i + 1], errors[i:i + 1], intcal)
        assert alone.median()[0] == pytest.approx(medians[i])
        np.testing.assert_allclose(np.array(alone.hpd(0.954)[0]), np.array(hpds[i]), rtol=1e-9)


def test_samples_and_regridding_keep_the_distribution(intcal):
    dates = calibrate_radiocarbon([6000.0], [40.0], intcal)
    draws = dates.sample(20000, np.random.default_rng(1))
    assert np.mean(draws) == pytest.approx(dates.mean()[0], abs=3)
    coarse = dates.on_grid(6000.0, 10.0, 300)
    assert coarse.sum() == pytest.approx(1.0, abs=1e-12)
    centres = 6000.0 + 10.0 * np.arange(300)
    assert np.sum(coarse[0] * centres) == pytest.approx(dates.mean()[0], abs=1.0)


def test_age_outside_the_curve_is_a_clear_error(intcal):
    with pytest.raises(CurveRangeError, match="outside curve 'intcal20'.*LAB-9") as caught:
        calibrate_radiocarbon([4000.0, 61000.0], [30.0, 500.0], intcal, labels=["LAB-1", "LAB-9"])
    assert list(caught.value.index) == [1]
    with pytest.raises(CurveRangeError):
        calibrate_radiocarbon([-800.0], [20.0], intcal)


def test_bad_errors_rejected(intcal):
    with pytest.raises(ValueError, match="errors > 0"):
        calibrate_radiocarbon([4000.0], [0.0], intcal)


def test_radiocarbon_command(intcal20_path):
    runner = CliRunner()
    result = runner.invoke(main, ["radiocarbon", "4520:35", "9870+-60", "--curve", str(intcal20_path)])
    assert result.exit_code == 0, result.output
    assert "95.4% HPD: 5048 to 5201" in result.output
    assert "median 11283" in result.output
    f14c = runner.invoke(main, ["radiocarbon", "0.5:0.002", "--f14c", "--reservoir", "100:20",
                                "--curve", str(intcal20_path)])
    assert f14c.exit_code == 0 and "5568 +- 32 14C yr BP" in f14c.output
    bad = runner.invoke(main, ["radiocarbon", "4520", "--curve", str(intcal20_path)])
    assert bad.exit_code == 2 and "VALUE:ERROR" in bad.output
    outside = runner.invoke(main, ["radiocarbon", "90000:40", "--curve", str(intcal20_path)])
    assert outside.exit_code == 1 and "outside curve" in outside.output


def test_radiocarbon_command_writes_csv(intcal20_path, tmp_path):
    """--csv: one row per HPD range, the same numbers as printed (5048 to 5201 at 95.4 % for
    4520 +- 35 on IntCal20, as in test_radiocarbon_command), range shares summing to each level."""
    out = tmp_path / "dates.csv"
    result = CliRunner().invoke(main, ["radiocarbon", "4520:35", "9870:60", "--curve", str(intcal20_path),
                                       "--csv", str(out)])
    assert result.exit_code == 0, result.output
    table = pd.read_csv(out)
    assert list(table.columns) == ["input", "age_14c_bp", "error_14c_yr", "median_cal_bp", "mode_cal_bp",
                                   "mean_cal_bp", "hpd_level", "range_young_cal_bp", "range_old_cal_bp",
                                   "range_probability"]
    first = table[(table["input"] == "4520:35") & (table["hpd_level"] == 0.954)]
    assert round(first["range_young_cal_bp"].min()) == 5048
    assert round(first["range_old_cal_bp"].iloc[0]) == 5201
    for (_, level), part in table.groupby(["input", "hpd_level"]):
        assert part["range_probability"].sum() >= level - 0.01
