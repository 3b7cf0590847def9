"""Age-depth models: the exact accumulation model, Monte Carlo interpolation, the stage.

Checks against the outside:
- exactness: evidence, node marginals and outlier probabilities equal brute-force enumeration
  of every path on a tiny grid (the definition of the model);
- posterior quantiles agree with a generic MCMC sampler (emcee, Foreman-Mackey et al. 2013,
  doi:10.1086/670067) on the continuous version of a small problem;
- simulation: on synthetic cores drawn from a known truth through IntCal20 (Reimer et al.
  2020, doi:10.1017/RDC.2020.41), the 95 % ranges contain the truth 90-99 % of the time.
"""

from __future__ import annotations

import itertools
import sys
import pathlib
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from proxies.chronology import ChronologySettings, build_chronology
from proxies.chronology.accumulation import (
    AccumulationProblem,
    _outlier_posterior,
    backward_messages,
    fit_accumulation,
    forward_filter,
    increment_kernel,
    place_nodes,
    transition_kernels,
)
from proxies.chronology.interpolation import fit_interpolation
from proxies.chronology.curves import CalibrationCurve
from proxies.cores import Core, EventLayer
from proxies.problems import InputError

sys.path.insert(0, str(pathlib.Path(__file__).parent))
from chronology_synthetic import simulate_dates, simulate_truth, synthetic_core  # noqa: E402


# --- the exact chain ---------------------------------------------------------------------

def _tiny_problem(seed=3):
    """4 nodes (a hiatus between nodes 1 and 2), 3 dates (two on node 3), 20-cell grid."""
    rng = np.random.default_rng(seed)
    size = 20
    mass = rng.random((3, size)) ** 4
    mass /= mass.sum(axis=1, keepdims=True)
    broad = 0.2 * rng.random((3, size)) / size  # a non-flat outlier part, not normalised to the grid
    return AccumulationProblem(np.array([0.0, 5.0, 5.0, 12.0]), np.array([False, True, False]),
                               np.array([0, 3, 3]), mass, np.array([0.1, 0.2, 0.05]), 0.0, 10.0, 5.0,
                               outlier_mass=broad)


def _enumerate(problem, kernels):
    """Brute force: weight of every one of the 20^4 paths."""
    size = problem.n_grid
    per = problem.date_likelihoods()
    post = np.zeros((problem.n_nodes, size))
    outlier = np.zeros(len(problem.date_node))
    total = 0.0
    for path in itertools.product(range(size), repeat=problem.n_nodes):
        w = 1.0 / size
        for k in range(problem.n_nodes - 1):
            t = path[k + 1] - path[k]
            w *= kernels[k][t] if 0 <= t < kernels[k].size else 0.0
            if w == 0.0:
                break
        if w == 0.0:
            continue
        like = np.array([per[d, path[k]] for d, k in enumerate(problem.date_node)])
        broad = np.array([problem.outlier_likelihoods()[d, path[k]] for d, k in enumerate(problem.date_node)])
        w *= like.prod()
        total += w
        for k in range(problem.n_nodes):
            post[k, path[k]] += w
        outlier += w * problem.outlier_prior * broad / like
    return np.log(total), post / total, outlier / total


def test_forward_backward_equals_brute_force_enumeration():
    problem = _tiny_problem()
    kernels = transition_kernels(problem, [2.5, 4.0], [2.0, 6.0], gap_mean=40.0)
    like = problem.node_likelihoods()
    filtered, log_evidence, predicted = forward_filter(like, kernels, keep_predicted=[0, 3])
    beta = backward_messages(like, kernels)
    for h in range(2):
        exact_log_z, exact_post, exact_outlier = _enumerate(problem, [k[h] for k in kernels])
        assert log_evidence[h] == pytest.approx(exact_log_z, abs=1e-10)
        marginal = filtered[h] * beta[h]
        marginal /= marginal.sum(axis=1, keepdims=True)
        np.testing.assert_allclose(marginal, exact_post, atol=1e-12)
        ours = _outlier_posterior(problem, {k: predicted[k][h] for k in predicted}, beta[h],
                                  problem.date_likelihoods())
        np.testing.assert_allclose(ours, exact_outlier, atol=1e-12)


def test_sampled_paths_follow_the_exact_marginals():
    problem = _tiny_problem()
    kernels = transition_kernels(problem, [2.5], [2.0], gap_mean=40.0)
    _, exact_post, exact_outlier = _enumerate(problem, [k[0] for k in kernels])
    fit = fit_accumulation(problem, [2.5], [2.0], 40.0, 40000, np.random.default_rng(0))
    cells = np.clip(np.round(fit.paths / 10.0).astype(int), 0, 19)
    for k in range(problem.n_nodes):
        freq = np.bincount(cells[k], minlength=20) / cells.shape[1]
        # multinomial sd <= 0.0025 at 40,000 paths; 5 sd, plus the within-cell jitter
        assert np.max(np.abs(freq - exact_post[k])) < 0.02
    np.testing.assert_allclose(fit.outlier_posterior, exact_outlier, atol=1e-12)
    assert np.all(np.diff(fit.paths, axis=0) >= 0)


def test_gamma_process_kernels_add_up():
    """Two 2.5-cm increments convolve to the 5-cm one (gamma process), mean = rate x dz."""
    half = increment_kernel(2.5, 20.0, 3.0, 1.0, 5.0)
    whole = increment_kernel(5.0, 20.0, 3.0, 1.0, 5.0)
    both = np.convolve(half, half)[: whole.size]
    assert np.max(np.abs(both - whole)) < 2e-3
    cells = np.arange(whole.size)
    assert np.sum(cells * whole) == pytest.approx(100.0, abs=0.5)
    # the rate over the reference interval has the stated shape: variance mean^2 / shape
    assert np.sum((cells - 100.0) ** 2 * whole) == pytest.approx(100.0**2 / 3.0, rel=0.02)


def test_node_placement():
    nodes, gap = place_nodes(0.0, 20.0, 5.0, [3.0, 7.5, 7.5, 16.0], [12.0])
    # the ladder node at 15 cm gives way to the date at 16 cm (closer than 5/3 cm)
    np.testing.assert_array_equal(nodes, [0, 3, 5, 7.5, 10, 12, 12, 16, 20])
    assert list(np.flatnonzero(gap)) == [5]


def test_quantiles_agree_with_emcee():
    """Continuous model sampled by emcee vs our 1-yr grid: node-age quantiles within 4 yr."""
    import emcee

    nodes = np.array([0.0, 10.0, 20.0, 30.0])
    dates = np.array([[40.0, 15.0], [190.0, 25.0], [260.0, 30.0]])  # age, sd at nodes 0, 2, 3
    date_node = np.array([0, 2, 3])
    origin, size = -200.0, 1000
    grid = origin + np.arange(size)
    mass = stats.norm.pdf(grid[None, :], dates[:, :1], dates[:, 1:])
    mass /= mass.sum(axis=1, keepdims=True)
    problem = AccumulationProblem(nodes, np.zeros(3, bool), date_node, mass, np.zeros(3), origin, 1.0, 10.0)
    rate, shape = 8.0, 3.0
    fit = fit_accumulation(problem, [rate], [shape], 1000.0, 20000, np.random.default_rng(5))

    def log_prob(theta):
        a0, logx = theta[:, 0], theta[:, 1:]
        x = np.exp(logx)
        ages = np.concatenate([a0[:, None], a0[:, None] + np.cumsum(x, axis=1)], axis=1)
        lp = np.sum(stats.gamma.logpdf(x, shape, scale=rate * 10.0 / shape) + logx, axis=1)
        lp += np.sum(stats.norm.logpdf(ages[:, date_node], dates[:, 0], dates[:, 1]), axis=1)
        return np.where((a0 > grid[0]) & (ages[:, -1] < grid[-1]), lp, -np.inf)

    rng = np.random.default_rng(6)
    walkers = 32
    start = np.column_stack([rng.normal(40, 5, walkers), np.log(rng.uniform(60, 90, (walkers, 3)))])
    sampler = emcee.EnsembleSampler(walkers, 4, log_prob, vectorize=True)
    sampler._random = np.random.RandomState(7)
    sampler.run_mcmc(start, 3500, progress=False)
    chain = sampler.get_chain(discard=500, flat=True)
    mcmc_ages = np.column_stack([chain[:, 0], chain[:, :1] + np.cumsum(np.exp(chain[:, 1:]), axis=1)])
    for k in range(4):
        ours = np.quantile(fit.paths[k], [0.025, 0.5, 0.975])
        theirs = np.quantile(mcmc_ages[:, k], [0.025, 0.5, 0.975])
        np.testing.assert_allclose(ours, theirs, atol=4.0)


# --- Monte Carlo interpolation --------------------------------------------------------------

def test_interpolation_passes_through_date_draws_and_stays_monotone():
    rng = np.random.default_rng(2)
    depths = np.array([10.0, 50.0, 90.0])
    means, sds = np.array([100.0, 500.0, 900.0]), np.array([10.0, 10.0, 10.0])

    def draw(size):
        return means[:, None] + sds[:, None] * rng.standard_normal((3, size))

    query = np.array([0.0, 10.0, 30.0, 50.0, 90.0, 100.0])
    for smooth in (False, True):
        fit = fit_interpolation(depths, draw, query, (), np.zeros(3), 2000, rng, smooth=smooth, fallback_rate=10.0)
        assert np.all(np.diff(fit.paths, axis=0) >= 0)
        np.testing.assert_allclose(np.median(fit.paths[[1, 3, 4]], axis=1), means, atol=1.5)
        assert np.median(fit.paths[2]) == pytest.approx(300.0, abs=3)
        # extrapolated above the first date with the first interval's rate (10 yr/cm)
        assert np.median(fit.paths[0]) == pytest.approx(0.0, abs=3)
        assert fit.acceptance == pytest.approx(1.0)


def test_interpolation_flags_a_reversed_date_as_outlier():
    rng = np.random.default_rng(3)
    depths = np.array([10.0, 30.0, 50.0, 70.0])
    means, sds = np.array([100.0, 3000.0, 500.0, 700.0]), np.full(4, 10.0)
    fit = fit_interpolation(depths, lambda n: means[:, None] + sds[:, None] * rng.standard_normal((4, n)),
                            np.array([40.0]), (), np.full(4, 0.1), 1000, rng)
    # exact answer by enumerating the 16 leave-out patterns (ages are 20 sd apart, so a pattern
    # is accepted or not regardless of the draw; an all-out draw keeps every date)
    weight, flagged = 0.0, np.zeros(4)
    for pattern in itertools.product([False, True], repeat=4):
        out = np.array(pattern)
        prior = np.prod(np.where(out, 0.1, 0.9))
        if out.all():
            out = np.zeros(4, bool)
        kept = means[~out]
        if np.all(np.diff(kept) > 0):
            weight += prior
            flagged += prior * out
    exact = flagged / weight
    assert exact[1] == pytest.approx(0.917, abs=1e-3)
    # 1,000 accepted draws: binomial sd <= 0.016
    np.testing.assert_allclose(fit.outlier_posterior, exact, atol=0.05)


# --- the stage -------------------------------------------------------------------------------

def _linear_curve():
    """An invented straight calibration curve: 14C age = 0.9 cal BP + 50, sigma 15."""
    cal = np.arange(0.0, 30001.0, 5.0)
    return CalibrationCurve("straight", cal, 0.9 * cal + 50, np.full(cal.size, 15.0))


def _core(hiatus=(), layers=(), extra_dates=None, exclude_label=None):
    truth_rate = 10.0  # yr/cm below the top (-68 cal BP)
    depth = np.array([20.0, 60.0, 100.0, 140.0, 180.0, 220.0])
    age = -68 + truth_rate * depth
    free = depth.copy()
    for layer in layers:
        free = np.where(depth > layer.bottom_cm, free - (layer.bottom_cm - layer.top_cm), free)
    age = -68 + truth_rate * free
    for h in hiatus:
        age = np.where(depth > h, age + 2000.0, age)
    dates = pd.DataFrame({
        "label": [f"L{i}" for i in range(depth.size)], "depth_cm": depth, "kind": "radiocarbon",
        "age": np.round(0.9 * age + 50), "error": 30.0, "thickness_cm": 0.0, "curve": None,
        "reservoir_offset": 0.0, "reservoir_error": 0.0, "exclude": False,
        "source_row": np.arange(2, depth.size + 2)})
    if extra_dates is not None:
        dates = pd.concat([dates, extra_dates], ignore_index=True)
    if exclude_label:
        dates.loc[dates["label"] == exclude_label, "exclude"] = True
    samples = pd.DataFrame({"depth_cm": np.arange(0.0, 241.0, 10.0), "source_row": np.arange(2, 27)})
    return Core(id="T-1", archive="lake", latitude=60.0, longitude=10.0, collected_ce=2018, site="invented",
                top_age_error=None, samples=samples, dates=dates, counts=None, event_layers=tuple(layers),
                hiatuses_cm=tuple(hiatus), folder="cores/T-1")


@pytest.mark.parametrize("model", ["accumulation", "interpolation"])
def test_stage_outputs_and_reproducibility(model):
    core = _core()
    settings = ChronologySettings(model=model)
    curves = {"atmosphere": _linear_curve()}
    a = build_chronology(core, curves, settings, 300, np.random.default_rng(11))
    b = build_chronology(core, curves, settings, 300, np.random.default_rng(11))
    np.testing.assert_array_equal(a.ensemble, b.ensemble)
    assert a.ensemble.shape == (a.depth_cm.size, 300)
    np.testing.assert_array_equal(a.depth_cm, np.arange(0.0, 241.0, 1.0))
    for column in ("depth_cm", "age_median", "age_q025", "age_q975", "age_mean", "age_sd", "deposition_time_yr_cm"):
        assert column in a.summary
    assert np.all(np.diff(a.ensemble, axis=0) >= -1e-9)
    truth = -68 + 10.0 * a.depth_cm
    inside = (truth >= a.summary["age_q025"]) & (truth <= a.summary["age_q975"])
    assert inside.mean() > 0.85
    assert np.median(a.summary["deposition_time_yr_cm"]) == pytest.approx(10.0, rel=0.15)
    dates = a.dates
    assert dates["label"].iloc[0] == "core top" and dates["age"].iloc[0] == -68.0
    assert dates["error"].iloc[0] == 5.0  # settings default: core.toml gives no top_age_error
    for column in ("cal_median_bp", "hpd95_young_bp", "hpd95_old_bp", "outlier_prob", "source_row"):
        assert column in dates
    ranges = a.date_ranges
    assert set(ranges["label"]) == set(dates["label"]) and set(ranges["level"]) == {0.683, 0.954}
    wide = ranges[ranges["level"] == 0.954].groupby("label", sort=False)
    np.testing.assert_allclose(wide["young_cal_bp"].min()[dates["label"]], dates["hpd95_young_bp"])
    np.testing.assert_allclose(wide["old_cal_bp"].max()[dates["label"]], dates["hpd95_old_bp"])
    assert (wide["probability"].sum() >= 0.954 - 0.01).all()
    assert dates["outlier_prob"].between(0, 1).all()
    np.testing.assert_allclose(a.age_at([60.0])[0], a.ensemble[60])


def test_stage_hiatus_event_layer_exclusion_and_outlier():
    layer = EventLayer(top_cm=110.0, bottom_cm=130.0, kind="turbidite")
    bad = pd.DataFrame({"label": ["WRONG"], "depth_cm": [80.0], "kind": ["radiocarbon"], "age": [9000.0],
                        "error": [30.0], "thickness_cm": [0.0], "curve": [None], "reservoir_offset": [0.0],
                        "reservoir_error": [0.0], "exclude": [False], "source_row": [8]})
    core = _core(hiatus=(170.0,), layers=(layer,), extra_dates=bad, exclude_label="L0")
    result = build_chronology(core, {"atmosphere": _linear_curve()}, ChronologySettings(), 400,
                              np.random.default_rng(4))
    dates = result.dates.set_index("label")
    assert dates.loc["WRONG", "outlier_prob"] > 0.99
    assert any("WRONG" in w for w in result.warnings)
    assert np.isnan(dates.loc["L0", "outlier_prob"])
    # inside the event layer every depth has the age of its top
    inside = result.age_at([110.0, 115.0, 129.9])
    np.testing.assert_allclose(inside[1], inside[0])
    np.testing.assert_allclose(inside[2], inside[0])
    # across the hiatus the age jumps by about the 2000-yr gap
    jump = np.median(result.age_at([170.5])[0] - result.age_at([170.0])[0])
    assert 1500 < jump < 2500
    below = np.median(result.age_at([180.0])[0])
    assert below == pytest.approx(-68 + 10 * 160 + 2000, abs=60)


def test_stage_reports_bad_curves_with_rows():
    core = _core()
    dates = core.dates.copy()
    dates.loc[2, "curve"] = "marine"
    dates.loc[4, "age"] = 99999.0
    core = Core(**{**core.__dict__, "dates": dates})
    with pytest.raises(InputError) as caught:
        build_chronology(core, {"atmosphere": _linear_curve()}, ChronologySettings(), 10, np.random.default_rng(0))
    text = str(caught.value)
    assert "cores/T-1/dates, row 4, column 'curve'" in text and "'marine'" in text
    assert "row 6, column 'age'" in text and "outside curve 'atmosphere'" in text


def test_settings_from_mapping():
    settings = ChronologySettings.from_mapping({"model": "interpolation", "join": "smooth", "grid_step_yr": "auto",
                                                "rate_variability": [0.5, 1], "outlier_prior": 0})
    assert settings.model == "interpolation" and settings.rate_variability == (0.5, 1.0)
    assert settings.grid_step_yr is None and settings.outlier_prior == 0.0
    with pytest.raises(InputError) as caught:
        ChronologySettings.from_mapping({"model": "magic", "node_spacing_cm": -1, "bogus": 1,
                                         "student_t": "yes", "mean_rate_factors": []}, where="run.toml [chronology]")
    columns = {p.column for p in caught.value.problems}
    assert columns == {"model", "node_spacing_cm", "bogus", "student_t", "mean_rate_factors"}
    assert all(p.file == "run.toml [chronology]" for p in caught.value.problems)


# --- coverage on synthetic cores through IntCal20 ------------------------------------------------

def _coverage(curve, seeds, model="accumulation", n_cores=24, checks=10):
    hits = []
    for seed in seeds[:n_cores]:
        rng = np.random.default_rng(seed)
        depth, ages = simulate_truth(rng, 300.0)
        dates = simulate_dates(rng, depth, ages, curve, 12)
        core = synthetic_core(dates, 300.0)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            result = build_chronology(core, {"atmosphere": curve}, ChronologySettings(model=model), 1000, rng)
        pick = rng.choice(depth.size, checks, replace=False)
        lo, hi = np.quantile(result.age_at(depth[pick]), [0.025, 0.975], axis=1)
        hits.extend((ages[pick] >= lo) & (ages[pick] <= hi))
    return float(np.mean(hits))


@pytest.fixture(scope="module")
def intcal_grid(intcal20_path):
    from pipelines.curvefiles import read_curve_file

    return read_curve_file(intcal20_path, name="atmosphere").on_grid(1.0)


@pytest.mark.slow
def test_coverage_on_synthetic_cores(intcal_grid):
    """24 cores, 10 random depths each: the 95 % ranges hold the truth 90-99 % of the time."""
    coverage = _coverage(intcal_grid, list(range(100, 124)))
    assert 0.90 <= coverage <= 0.99, coverage


@pytest.mark.slow
def test_coverage_on_unseen_synthetic_cores(intcal_grid):
    """Cores never used while writing the model (seeds 9000+): 85-99.5 % coverage."""
    coverage = _coverage(intcal_grid, list(range(9000, 9024)))
    assert 0.85 <= coverage <= 0.995, coverage


@pytest.mark.slow
def test_coverage_of_the_interpolation_model(intcal_grid):
    coverage = _coverage(intcal_grid, list(range(500, 520)), model="interpolation", n_cores=20)
    assert 0.85 <= coverage <= 0.995, coverage
