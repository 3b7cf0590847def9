"""The moving-sum (MOSUM) shift statistic: exact against a brute-force computation, its
variance formula against the AR(1) covariance matrix, and a lasting step seen in full where
the running-median background keeps edges (issue 16)."""

from __future__ import annotations

import numpy as np
import pytest

from proxies.events import EventSettings
from proxies.events.candidates import remove_background
from proxies.events.mosum import mean_difference_variance, mosum_peaks, mosum_profile
from proxies.problems import InputError


def test_mean_difference_variance_matches_the_ar1_covariance_matrix():
    a, p, q = 0.6, 7, 4
    n = p + q
    cov = a ** np.abs(np.subtract.outer(np.arange(n), np.arange(n)))
    w = np.concatenate([-np.ones(p) / p, np.ones(q) / q])
    assert mean_difference_variance(np.array([p]), np.array([q]), a)[0] == pytest.approx(w @ cov @ w)


def test_profile_equals_a_brute_force_computation_with_gaps():
    rng = np.random.default_rng(3)
    x = rng.standard_normal((60, 3))
    observed = rng.random(x.shape) > 0.15
    h, a, support = 8, 0.4, 3
    scale = np.array([1.0, 2.0, 0.5])
    z = mosum_profile(x, observed, h, a, scale, support)
    for m in range(3):
        for k in range(60):
            left = [i for i in range(max(k - h, 0), k) if observed[i, m]]
            right = [i for i in range(k, min(k + h, 60)) if observed[i, m]]
            if len(left) < support or len(right) < support or k < support or k > 60 - support:
                assert z[k, m] == 0.0
                continue
            d = x[right, m].mean() - x[left, m].mean()
            sd = scale[m] * np.sqrt(mean_difference_variance(np.array([len(left)]), np.array([len(right)]), a)[0])
            assert z[k, m] == pytest.approx(d / sd)


def test_a_clean_step_is_absorbed_by_the_running_median_but_seen_by_the_mosum():
    """The root cause of issue 16's missed steps: an edge-keeping running median follows a
    clean step, so its residual is exactly zero; the MOSUM compares the levels directly."""
    x = np.where(np.arange(200) >= 90, 3.0, 0.0)[:, None]
    assert np.abs(remove_background(x, 41)).max() == 0.0
    z = mosum_profile(x + 1e-9, np.ones(x.shape, bool), 20, 0.0, np.ones(1), 5)
    member, index, stat, sign = mosum_peaks(z, 20, 3)
    assert index[0] == 90 and sign[0] == 1.0 and stat[0] == pytest.approx(3.0 / np.sqrt(2 / 20))


def test_the_removed_step_keeping_key_gets_a_clear_message():
    with pytest.raises(InputError) as info:
        EventSettings.from_mapping({"background_keeps_changes": 1})
    problem = info.value.problems[0]
    assert problem.column == "background_keeps_changes" and "removed" in problem.message
    assert "series itself" in problem.fix
