"""The calibrated-date density table written for the report's age-depth figure."""

import numpy as np
from scipy import stats

from proxies.chronology.calibrate import calibrate_calendar
from proxies.chronology.stage import date_density_table


def test_densities_integrate_to_one_and_match_the_normal():
    """A calendar date is a normal density (common practice); the table must reproduce it."""
    cal = calibrate_calendar(np.array([5000.0, 812.0]), np.array([40.0, 5.0]), step=1.0)
    table = date_density_table(["a", "b"], cal, max_points=10_000)
    for label, mu, sigma in (("a", 5000.0, 40.0), ("b", 812.0, 5.0)):
        rows = table[table["label"] == label]
        area = np.sum(rows["density"].to_numpy()) * 1.0
        assert 0.99 < area <= 1.0 + 1e-9
        peak = rows["age_cal_bp"].to_numpy()[np.argmax(rows["density"].to_numpy())]
        assert abs(peak - mu) <= 1.0
        assert np.isclose(rows["density"].max(), stats.norm.pdf(0, scale=sigma), rtol=0.02)


def test_thinning_keeps_the_peak_and_the_point_budget():
    cal = calibrate_calendar(np.array([12000.0]), np.array([300.0]), step=1.0)
    table = date_density_table(["wide"], cal, max_points=200)
    assert len(table) <= 200
    assert np.isclose(table["density"].max(), stats.norm.pdf(0, scale=300.0), rtol=0.02)
