"""Change points in mean and slope: PELT (Killick, Fearnhead & Eckley 2012, JASA 107:1590,
doi:10.1080/01621459.2012.737745) and exact optimal partitioning."""

from __future__ import annotations

import numpy as np
import pytest

from proxies.events.changepoints import bic_penalty, optimal_partitioning, pelt, robust_sigma


@pytest.fixture(scope="module")
def nile():
    """Annual flow of the Nile at Aswan 1871-1970 (statsmodels.datasets.nile)."""
    from statsmodels import datasets

    data = datasets.nile.load_pandas().data
    return data["year"].to_numpy(), data["volume"].to_numpy(dtype=float)


def test_nile_change_point_near_1898(nile):
    """Cobb (1978, Biometrika 65:243): the Nile flow dropped after 1898 (Aswan dam works).
    The single change point found starts the new segment in 1899 (tolerance +-2 yr)."""
    years, flow = nile
    changes = pelt(flow, "mean")
    assert changes.size == 1
    assert abs(years[changes[0]] - 1899) <= 2
    before, after = flow[: changes[0]].mean(), flow[changes[0]:].mean()
    # From memory (Cobb 1978): mean flow about 1100 before and about 850 after (1e8 m3).
    assert before == pytest.approx(1100, rel=0.05) and after == pytest.approx(850, rel=0.05)


def test_nile_ensemble_version_agrees(nile):
    _, flow = nile
    assert optimal_partitioning(flow[:, None], "mean")[0].tolist() == pelt(flow, "mean").tolist()


def test_pelt_equals_exact_optimal_partitioning():
    """PELT prunes but is exact (Killick et al. 2012, Theorem 3.2): same segmentation as OP."""
    rng = np.random.default_rng(0)
    x = rng.standard_normal((150, 30)).cumsum(axis=0) * 0.4 + rng.standard_normal((150, 30))
    for model in ("mean", "slope"):
        together = optimal_partitioning(x, model)
        for j in range(x.shape[1]):
            assert pelt(x[:, j], model).tolist() == together[j].tolist()


def test_single_change_matches_exhaustive_search():
    """With a penalty that allows one change, the optimum equals the brute-force best split."""
    rng = np.random.default_rng(1)
    x = np.concatenate([rng.normal(0, 1, 37), rng.normal(1.5, 1, 63)])
    changes = pelt(x, "mean", sigma=1.0)
    rss = [np.sum((x[:k] - x[:k].mean()) ** 2) + np.sum((x[k:] - x[k:].mean()) ** 2) for k in range(2, 99)]
    assert changes.tolist() == [2 + int(np.argmin(rss))]


def test_slope_model_finds_a_kink():
    t = np.arange(200.0)
    rng = np.random.default_rng(2)
    x = np.where(t < 120, 0.02 * t, 0.02 * 120 - 0.05 * (t - 120)) + rng.normal(0, 0.2, t.size)
    changes = pelt(x, "slope")
    assert changes.size >= 1 and np.min(np.abs(changes - 120)) <= 6
    assert pelt(x, "mean").size > changes.size  # a trend needs many steps in mean


def test_no_change_in_white_noise_and_penalty_values():
    """BIC/SIC penalty p ln n (Schwarz 1978): 2 ln n for mean, 3 ln n for slope."""
    assert bic_penalty(100, "mean") == pytest.approx(2 * np.log(100))
    assert bic_penalty(100, "slope") == pytest.approx(3 * np.log(100))
    rng = np.random.default_rng(3)
    found = sum(pelt(rng.standard_normal(200)).size > 0 for _ in range(50))
    assert found <= 6
    # MAD of differences of unit white noise: sigma close to 1.
    assert robust_sigma(rng.standard_normal((5000, 1)))[0] == pytest.approx(1.0, rel=0.05)
    with pytest.raises(ValueError):
        pelt(np.zeros(10), "variance")


def test_zero_weight_points_do_not_create_change_points():
    """Gap-filled points (weight 0) take no part in the cost: wild values there are ignored."""
    rng = np.random.default_rng(4)
    x = rng.normal(0, 1, (120, 3))
    weights = np.ones_like(x)
    x[50:53] = 40.0
    weights[50:53] = 0.0
    assert all(c.size >= 1 for c in optimal_partitioning(x, "mean"))
    assert all(c.size == 0 for c in optimal_partitioning(x, "mean", sigma=np.ones(3), weights=weights))
    # All weights 1 is the unweighted problem.
    y = rng.normal(0, 1, (80, 4)) + np.repeat([0.0, 2.0], 40)[:, None]
    plain = optimal_partitioning(y, "mean")
    ones = optimal_partitioning(y, "mean", weights=np.ones_like(y))
    assert [c.tolist() for c in plain] == [c.tolist() for c in ones]


def test_robust_sigma_from_observed_neighbours_ignores_interpolated_points():
    from proxies.events.changepoints import robust_sigma_observed
    from proxies.reconstruction.grid import fill_gaps

    rng = np.random.default_rng(5)
    x = rng.normal(0, 1, (4000, 1))
    observed = rng.random(x.shape) > 0.4
    filled = fill_gaps(np.where(observed, x, np.nan))
    assert robust_sigma(filled)[0] < 0.9                      # interpolation smooths
    assert robust_sigma_observed(filled, observed)[0] == pytest.approx(1.0, rel=0.06)


def test_ar1_sum_variance_matches_the_covariance_matrix():
    """Var(sum of n unit AR(1) values) = 1' R 1 with R_ij = a^|i-j| (AR(1) autocorrelation,
    Mudelsee 2002, Eq. 1): the closed form equals the explicit double sum."""
    from proxies.events.scan import ar1_sum_variance

    for a in (0.0, 0.3, 0.8):
        for n in (1, 2, 7, 20):
            lag = np.abs(np.subtract.outer(np.arange(n), np.arange(n)))
            assert ar1_sum_variance(n, a) == pytest.approx(float(np.sum(a ** lag)), rel=1e-12)


def test_excursion_scan_equals_a_brute_force_search_with_gaps():
    """Independent loop over every block: standardised sum of observed points (robust scale
    1.4826 MAD), best length per start and direction."""
    from proxies.events.scan import ar1_sum_variance, excursion_scan, top_blocks

    rng = np.random.default_rng(8)
    x = rng.normal(0, 1, (60, 3))
    x[20:25, 1] -= 3.0
    observed = rng.random(x.shape) > 0.2
    a = 0.3
    profile = excursion_scan(x, observed, 8, a)
    for m in range(3):
        obs = x[observed[:, m], m]
        scale = 1.4826 * np.median(np.abs(obs - np.median(obs)))
        for s in range(0, 60, 7):
            best_up, best_down = -np.inf, -np.inf
            for length in range(2, 9):
                block = slice(s, s + length)
                if s + length > 60 or observed[block, m].sum() < 2:
                    continue
                n = observed[block, m].sum()
                z = x[block, m][observed[block, m]].sum() / scale / np.sqrt(ar1_sum_variance(n, a))
                best_up, best_down = max(best_up, z), max(best_down, -z)
            assert profile.up[s, m] == pytest.approx(best_up) and profile.down[s, m] == pytest.approx(best_down)
    member, start, length, sign, _ = top_blocks(profile, 3)
    first = member == 1
    assert sign[first][0] == -1 and abs(start[first][0] - 20) <= 1
    for m in range(3):  # the kept blocks of a member never overlap
        spans = sorted(zip(start[member == m], start[member == m] + length[member == m]))
        assert all(b0 >= a1 for (_, a1), (b0, _) in zip(spans, spans[1:]))


def test_local_null_grows_with_the_stretch_searched():
    """The best block over more starts can only be larger: the local null is stochastically
    increasing in its width, and a width of the whole series gives each surrogate's maximum."""
    from proxies.events.scan import excursion_scan
    from proxies.events.significance import local_null

    rng = np.random.default_rng(9)
    x = rng.normal(0, 1, (120, 50))
    profile = excursion_scan(x, np.ones(x.shape, bool), 6)
    q = [np.quantile(local_null(profile, w), 0.95) for w in (1, 5, 20, 120)]
    assert q == sorted(q)
    whole = local_null(profile, 120)
    assert whole.size == 100 and whole.max() == pytest.approx(max(profile.up.max(), profile.down.max()))
