"""Chronology benchmark: prints one JSON line.

- ``dates_per_second``: 1,000 radiocarbon ages (500-20,000 14C yr BP, errors 20-150 yr)
  calibrated on IntCal20 at 1-yr resolution, with medians and 95.4 % HPD ranges;
- ``standard_core_seconds``: 40 radiocarbon dates over 600 cm, ~20,000-yr span, automatic
  node spacing, 2,000 paths, the independent-increment ``accumulation`` model (hyper-parameter
  grid included);
- ``memory_core_seconds``: the same core with the default ``memory`` model, every
  hyper-parameter (mean rate x variability x memory) integrated, 2,000 paths;
- ``speedup_vs_generic_mcmc``: effective samples per second of our exact sampler of the
  memory model over those of emcee (affine-invariant ensemble MCMC) on the same posterior (the
  standard core, at the model's highest-evidence hyper-parameters; for emcee continuous ages,
  the rate classes summed out exactly by a forward recursion over classes for every walker);
  ``speedup_vs_generic_mcmc_independent`` is the same for the independent-increment model. Our ESS = number of
  paths (2,000 independent exact draws at those fixed hyper-parameters, timed alone);
  ``speedup_including_hyperparameter_grid`` charges our side the whole default run instead
  (all 30 hyper-parameter points, the standard-core time); emcee's ESS = walkers x kept steps / tau, tau
  the largest integrated autocorrelation time over the parameters
  (emcee.autocorr.integrated_time, tol=0, which underestimates tau on chains shorter than
  50 tau and so favours emcee). emcee runs for a fixed 20-s budget after which its second
  half is kept.

The IntCal20 curve (Reimer et al. 2020, doi:10.1017/RDC.2020.41) is read from
../shared/reference for benchmarking only. Timings depend on machine load.
"""

from __future__ import annotations

import json
import pathlib
import sys
import time
import warnings

import numpy as np

ROOT = pathlib.Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "tests"))

from chronology_synthetic import simulate_dates, simulate_truth, synthetic_core  # noqa: E402

from pipelines.curvefiles import read_curve_file  # noqa: E402
from proxies.chronology import ChronologySettings, build_chronology, calibrate_radiocarbon  # noqa: E402
from proxies.chronology.accumulation import AccumulationProblem, fit_accumulation  # noqa: E402
from proxies.chronology.memory import fit_memory, rate_classes  # noqa: E402
from proxies.chronology import model_runs  # noqa: E402

INTCAL20 = ROOT.parent / "shared" / "reference" / "intcal20.14c"


def bench_dates(curve, rng) -> float:
    ages = rng.uniform(500, 20000, 1000)
    errors = rng.uniform(20, 150, 1000)
    best = np.inf
    for _ in range(5):
        start = time.perf_counter()
        dates = calibrate_radiocarbon(ages, errors, curve)
        dates.median()
        dates.hpd(0.954)
        best = min(best, time.perf_counter() - start)
    return 1000 / best


def standard_core(curve, rng):
    depth, ages = simulate_truth(rng, 600.0, mean_rate=33.0, shape=4.0)
    dates = simulate_dates(rng, depth, ages, curve, 40, error_range=(30, 90))
    return synthetic_core(dates, 600.0)


def bench_core(core, curve, rng, model):
    start = time.perf_counter()
    result = build_chronology(core, {"atmosphere": curve}, ChronologySettings(model=model), 2000, rng)
    return time.perf_counter() - start, result


def capture_problem(core, curve, rng, model) -> AccumulationProblem:
    """The AccumulationProblem the standard core builds (captured from the stage)."""
    captured = {}
    name = "fit_memory" if model == "memory" else "fit_accumulation"
    original = getattr(model_runs, name)

    def spy(problem, *args, **kwargs):
        captured["problem"] = problem
        return original(problem, *args, **kwargs)

    setattr(model_runs, name, spy)
    try:
        build_chronology(core, {"atmosphere": curve}, ChronologySettings(model=model), 10, rng)
    finally:
        setattr(model_runs, name, original)
    return captured["problem"]


def continuous_log_posterior(problem: AccumulationProblem, prior_log_density):
    """log p(a_0, log x_1..x_{K-1} | dates) of the continuous model, vectorised over walkers.

    ``prior_log_density(x)`` gives the log prior density of the increments x (walkers, K')."""
    dz = np.diff(problem.node_depth_cm)
    keep = dz > 0
    density = problem.date_likelihoods() / problem.grid_step
    grid = problem.grid()
    lo, hi = grid[0], grid[-1]
    node_of_interval = np.concatenate([[0], np.cumsum(keep)])  # node k -> index among ages

    def log_prob(theta):
        theta = np.atleast_2d(theta)
        a0, logx = theta[:, 0], theta[:, 1:]
        x = np.exp(logx)
        ages = np.concatenate([a0[:, None], a0[:, None] + np.cumsum(x, axis=1)], axis=1)
        lp = prior_log_density(x) + np.sum(logx, axis=1)
        lp = np.where((a0 >= lo) & (ages[:, -1] <= hi), lp, -np.inf)
        for d, k in enumerate(problem.date_node):
            a = ages[:, node_of_interval[k]]
            lp = lp + np.log(np.interp(a, grid, density[d]) + 1e-300)
        return lp

    return log_prob, keep.sum()


def independent_prior(problem: AccumulationProblem, mean_rate: float, variability: float):
    from scipy import stats

    dz = np.diff(problem.node_depth_cm)
    dz = dz[dz > 0]
    local_shape = dz / problem.reference_cm / variability**2
    scale = mean_rate * dz / local_shape
    return lambda x: np.sum(stats.gamma.logpdf(x, local_shape, scale=scale), axis=1)


def memory_prior(problem: AccumulationProblem, mean_rate: float, variability: float, memory: float,
                 classes: int, within_shape: float):
    """Log density of the increments under the memory model, classes summed out exactly."""
    from scipy import stats
    from scipy.special import logsumexp

    dz = np.diff(problem.node_depth_cm)
    dz = dz[dz > 0]
    rates = mean_rate * rate_classes(variability, classes)
    local = within_shape * dz / problem.reference_cm
    stay = memory ** (dz / problem.reference_cm)

    def log_density(x):
        # log K_c(x_k): (walkers, K', C)
        logk = stats.gamma.logpdf(x[:, :, None], local[None, :, None],
                                  scale=(rates[None, None, :] * dz[None, :, None]) / local[None, :, None])
        state = logk[:, 0] - np.log(classes)
        for k in range(1, x.shape[1]):
            total = logsumexp(state, axis=1, keepdims=True)
            mixed = np.logaddexp(np.log(stay[k - 1]) + state, np.log1p(-stay[k - 1]) + total - np.log(classes))
            state = mixed + logk[:, k]
        return logsumexp(state, axis=1)

    return log_density


def bench_mcmc(problem, prior, start_path, rng, seconds=20.0):
    import emcee

    log_prob, n_intervals = continuous_log_posterior(problem, prior)
    dz = np.diff(problem.node_depth_cm)
    x0 = np.maximum(np.diff(start_path)[dz > 0], 0.5)
    centre = np.concatenate([[start_path[0]], np.log(x0)])
    ndim = centre.size
    walkers = 2 * ndim + 2
    p0 = centre + 1e-2 * rng.standard_normal((walkers, ndim))
    p0[:, 0] = start_path[0] + rng.standard_normal(walkers)
    sampler = emcee.EnsembleSampler(walkers, ndim, log_prob, vectorize=True)
    sampler._random = np.random.RandomState(int(rng.integers(2**31)))  # emcee's own generator, seeded
    start = time.perf_counter()
    steps = 0
    state = p0
    while time.perf_counter() - start < seconds:
        state = sampler.run_mcmc(state, 500, progress=False)
        steps += 500
    elapsed = time.perf_counter() - start
    chain = sampler.get_chain()[steps // 2:]
    tau = emcee.autocorr.integrated_time(chain, tol=0)
    # the slowest-mixing parameter sets the sampler's effective sample size (common practice)
    ess = chain.shape[0] * walkers / np.max(tau)
    return ess / elapsed, ess, elapsed


def _fixed_point_seconds(fit, seconds_rng) -> float:
    start = time.perf_counter()
    fit(seconds_rng)
    return time.perf_counter() - start


def main() -> None:
    warnings.simplefilter("ignore")
    rng = np.random.default_rng(20261201)
    curve = read_curve_file(INTCAL20, "atmosphere").on_grid(1.0)
    dates_per_second = bench_dates(curve, rng)
    core = standard_core(curve, rng)
    settings = ChronologySettings()
    seconds, result = bench_core(core, curve, np.random.default_rng(1), "accumulation")
    memory_seconds, memory_result = bench_core(core, curve, np.random.default_rng(1), "memory")
    # independent-increment model at its best point
    problem = capture_problem(core, curve, np.random.default_rng(2), "accumulation")
    best = result.hyperparameters.sort_values("weight").iloc[-1]
    fixed = _fixed_point_seconds(lambda r: fit_accumulation(
        problem, [best["mean_rate_yr_cm"]], [best["rate_variability"] ** -2], settings.hiatus_gap_yr, 2000, r),
        np.random.default_rng(4))
    median_path = np.median(result.node_paths, axis=1)
    mcmc_independent, _, _ = bench_mcmc(problem, independent_prior(problem, best["mean_rate_yr_cm"],
                                                                   best["rate_variability"]),
                                        median_path, np.random.default_rng(3))
    # memory model at its best point
    memory_problem = capture_problem(core, curve, np.random.default_rng(2), "memory")
    top = memory_result.hyperparameters.sort_values("weight").iloc[-1]
    within = settings.within_class_variability ** -2
    memory_fixed = _fixed_point_seconds(lambda r: fit_memory(
        memory_problem, [top["mean_rate_yr_cm"]], [top["rate_variability"]], [top["rate_memory"]],
        settings.hiatus_gap_yr, 2000, r, classes=settings.rate_classes, within_shape=within),
        np.random.default_rng(5))
    prior = memory_prior(memory_problem, top["mean_rate_yr_cm"], top["rate_variability"], top["rate_memory"],
                         settings.rate_classes, within)
    mcmc_memory, mcmc_ess, mcmc_seconds = bench_mcmc(memory_problem, prior, np.median(memory_result.node_paths,
                                                                                      axis=1),
                                                     np.random.default_rng(6))
    print(json.dumps({
        "dates_per_second": round(dates_per_second, 1),
        "standard_core_seconds": round(seconds, 3),
        "memory_core_seconds": round(memory_seconds, 3),
        "speedup_vs_generic_mcmc": round(2000 / memory_fixed / mcmc_memory, 1),
        "speedup_including_hyperparameter_grid": round(2000 / memory_seconds / mcmc_memory, 1),
        "speedup_vs_generic_mcmc_independent": round(2000 / fixed / mcmc_independent, 1),
        "fixed_hyperparameter_seconds": round(memory_fixed, 3),
        "standard_core_nodes": int(memory_problem.n_nodes),
        "standard_core_grid_cells": int(memory_problem.n_grid),
        "hyperparameter_points": int(len(memory_result.hyperparameters)),
        "mcmc_effective_samples": round(float(mcmc_ess), 1),
        "mcmc_seconds": round(mcmc_seconds, 1),
    }))


if __name__ == "__main__":
    main()
