"""Ramp regression (Mudelsee 2000, Comput. Geosci. 26:293, doi:10.1016/S0098-3004(99)00141-7)."""

from __future__ import annotations

import numpy as np
import pytest

from proxies.events.ramp import fit_ramp, fit_ramps, ramp_bootstrap, ramp_curve


def _brute_force(t, x):
    """Independent implementation: numpy lstsq over every (t1, t2) pair of sample times."""
    best = None
    for i in range(t.size):
        for j in range(i + 1, t.size):
            frac = np.clip((t - t[i]) / (t[j] - t[i]), 0, 1)
            design = np.column_stack([1 - frac, frac])
            coef, *_ = np.linalg.lstsq(design, x, rcond=None)
            rss = float(np.sum((x - design @ coef) ** 2))
            if best is None or rss < best[0]:
                best = (rss, t[i], t[j], coef[0], coef[1])
    return best


def test_ramp_matches_brute_force_least_squares_on_uneven_times():
    rng = np.random.default_rng(0)
    t = np.sort(rng.uniform(0, 100, 45))
    x = ramp_curve(t, 40, 58, 1.0, 3.0) + rng.normal(0, 0.4, t.size)
    fit = fit_ramp(t, x)
    rss, t1, t2, x1, x2 = _brute_force(t, x)
    assert (fit.t1, fit.t2) == (t1, t2)
    assert fit.x1 == pytest.approx(x1) and fit.x2 == pytest.approx(x2)
    assert fit.rss == pytest.approx(rss, rel=1e-9)


def test_noise_free_ramp_is_recovered_exactly():
    """Mudelsee (2000, Eq. 1) ramp without noise: the fit returns its parameters."""
    t = np.arange(0.0, 60.0)
    fit = fit_ramp(t, ramp_curve(t, 20, 31, 5.0, -2.0))
    assert (fit.t1, fit.t2) == (20.0, 31.0)
    assert fit.amplitude == pytest.approx(-7.0) and fit.duration == 11.0
    assert fit.rss == pytest.approx(0.0, abs=1e-9)


def test_batch_windows_equal_separate_fits():
    rng = np.random.default_rng(1)
    t = np.arange(0.0, 120.0)
    x = np.column_stack([ramp_curve(t, 30 + 10 * k, 40 + 10 * k, 0, 2) + rng.normal(0, 0.3, t.size)
                         for k in range(4)])
    start, stop = np.array([0, 10, 25, 40]), np.array([80, 70, 119, 100])
    batch = fit_ramps(t, x, start, stop, max_points=200)
    for k in range(4):
        one = fit_ramp(t[start[k]:stop[k] + 1], x[start[k]:stop[k] + 1, k])
        assert batch.t1[k] == one.t1 and batch.t2[k] == one.t2
        assert batch.x1[k] == pytest.approx(one.x1)


@pytest.mark.slow
def test_bootstrap_ranges_cover_onset_and_duration_about_95_percent():
    """Simulation: synthetic ramps + white noise; 95 % residual-bootstrap percentile ranges
    (after Mudelsee 2000, Sect. 3) contain the true onset and duration about 95 % of the time.
    150 trials: a binomial 95 % band around 0.95 is about 0.91-0.98."""
    rng = np.random.default_rng(2026)
    t = np.arange(0.0, 60.0)
    cover_t1 = cover_dur = 0
    trials = 150
    for _ in range(trials):
        x = ramp_curve(t, 25, 34, 0.0, 2.0) + rng.normal(0, 0.5, t.size)
        out = ramp_bootstrap(t, x, 200, rng)
        cover_t1 += out["t1"][1] <= 25 <= out["t1"][2]
        cover_dur += out["duration"][1] <= 9 <= out["duration"][2]
    assert 0.89 <= cover_t1 / trials <= 0.995
    assert 0.89 <= cover_dur / trials <= 0.995


def test_bootstrap_range_brackets_the_estimate():
    rng = np.random.default_rng(4)
    t = np.arange(0.0, 50.0)
    x = ramp_curve(t, 20, 28, 0.0, 3.0) + rng.normal(0, 0.4, t.size)
    out = ramp_bootstrap(t, x, 100, rng)
    for name in ("t1", "t2", "amplitude"):
        est, lo, hi = out[name]
        assert lo <= est <= hi
    assert out["amplitude"][0] == pytest.approx(3.0, abs=0.4)
