"""From a core's calibrated dates to the arrays of an age-depth model, and back.

The stage (:mod:`proxies.chronology.stage`) calls :func:`run_accumulation` (the memory and the
independent-increment accumulation models) or :func:`run_interpolation`; each places the
nodes, builds the calendar grid and returns node depths, paths, outlier probabilities and,
for the accumulation models, the hyper-parameter weights table.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from scipy import stats

from proxies.chronology.accumulation import AccumulationProblem, fit_accumulation
from proxies.chronology.nodes import place_nodes, span_nodes
from proxies.chronology.calibrate import CalibratedDates
from proxies.chronology.interpolation import fit_interpolation
from proxies.chronology.memory import fit_memory
from proxies.chronology.outliers import outlier_density
from proxies.chronology.settings import ChronologySettings
from proxies.chronology.spans import half_cell_mass

__all__ = ["run_accumulation", "run_interpolation", "auto_node_spacing", "slice_intervals", "HYPERPARAMETER_COLUMNS"]

_NICE_STEPS = (1, 2, 5, 10, 20, 50, 100)
#: columns of the hyper-parameter weights table (hyperparameters.parquet)
HYPERPARAMETER_COLUMNS = ("model", "mean_rate_yr_cm", "rate_variability", "rate_memory", "log_evidence",
                          "weight")


def _nice_step(span: float, cells: float = 4000.0) -> float:
    raw = span / cells
    for step in _NICE_STEPS:
        if raw <= step:
            return float(step)
    return float(math.ceil(raw / 100.0) * 100)


def auto_node_spacing(date_depths_cm, top_cm: float, bottom_cm: float) -> float:
    """Node spacing from the dates' density and the core length [cm].

    Half the median distance between neighbouring distinct date depths, so that every
    interval between dates holds at least one free node where the rate can change, kept
    between 1/150 of the modelled depth range (nodes finer than that add cost, not
    information, since the rate prior is stated per ``reference_depth_cm``) and 1/25 of it
    (a coarse ladder would make the age between sparse dates a straight line). Rounded to
    0.1 cm.
    """
    length = max(bottom_cm - top_cm, 1e-6)
    depths = np.unique(np.asarray(date_depths_cm, dtype=float))
    gap = float(np.median(np.diff(depths))) / 2 if depths.size > 1 else length / 25
    spacing = min(max(gap, length / 150), length / 25)
    return max(round(spacing, 1), 0.1)


def slice_intervals(labels, top_free, bottom_free, z, use, hiatuses) -> tuple[np.ndarray, list[str]]:
    """Depth interval of each date taken over a slice, for the accumulation models.

    A date with a slice (bottom - top > 1e-6 cm, event-free) constrains the slice's mean age
    when nothing else lies inside the slice: no other used date's depth, no other slice that
    overlaps it without being the same slice, no hiatus. Otherwise it is treated as a point at
    its depth, with a warning (the mean over a slice holding other nodes would tie several
    nodes together, which the chain cannot do exactly).

    Parameters
    ----------
    labels : sequence of str
    top_free, bottom_free, z : ndarray, shape (n,)
        Slice top, bottom and date depth [cm, event-free].
    use : ndarray of bool, shape (n,)
        Dates used by the model.
    hiatuses : sequence of float
        Hiatus depths [cm, event-free].

    Returns
    -------
    spans : ndarray, shape (n, 2)
        (top, bottom) of each slice date, NaN for point dates.
    messages : list of str
    """
    eps = 1e-6
    spans = np.full((len(z), 2), np.nan)
    thick = np.flatnonzero(use & (bottom_free - top_free > eps))
    messages = []
    for i in thick:
        top, bottom = top_free[i], bottom_free[i]
        inside = [j for j in np.flatnonzero(use) if j != i and top + eps < z[j] < bottom - eps
                  and not (j in thick and abs(top_free[j] - top) < eps and abs(bottom_free[j] - bottom) < eps)]
        overlap = [j for j in thick if j != i and top_free[j] < bottom - eps and bottom_free[j] > top + eps
                   and not (abs(top_free[j] - top) < eps and abs(bottom_free[j] - bottom) < eps)]
        gaps = [h for h in hiatuses if top + eps < h < bottom - eps]
        if inside or overlap or gaps:
            what = (f"a hiatus at {gaps[0]:g} cm" if gaps else
                    f"date {labels[(inside or overlap)[0]]!r}")
            messages.append(f"date {labels[i]!r}: its slice ({top:g}-{bottom:g} cm, event-free) holds {what}; "
                            "it is treated as a point at its depth (give overlapping dates the same slice, or "
                            "none)")
        else:
            spans[i] = top, bottom
    return spans, messages


def _grid(used: CalibratedDates, z_used, top, bottom, spacing, rate_max, n_hiatus, core, settings):
    lows, highs = used.quantile(0.0005), used.quantile(0.9995)
    young = float(lows.min() - max(0.0, z_used.min() - top) * rate_max * 3 - 100)
    if core.top_age_cal_bp is not None:
        error = core.top_age_error or settings.top_age_error_yr
        # a core cannot be younger than its collection year: the grid starts there
        young = float(min(lows.min(), core.top_age_cal_bp - 4 * error))
    old = float(highs.max() + max(0.0, bottom - z_used.max()) * rate_max * 2
                + n_hiatus * settings.hiatus_gap_yr * 10 + 2 * spacing * rate_max + 100)
    # the memory model's state is (age, rate class): a coarser default grid keeps its cost
    cells = 4000.0 if settings.model == "accumulation" else 1500.0
    step = settings.grid_step_yr or _nice_step(old - young, cells)
    size = int(math.ceil((old - young) / step)) + 1
    if size > 20000:
        step = _nice_step((old - young) * 2000 / 20000)
        size = int(math.ceil((old - young) / step)) + 1
    origin = math.floor(young / step) * step
    return float(origin), float(step), size


def run_accumulation(calibrated: CalibratedDates, use, z, priors, hiatuses, top, bottom, centre, core,
                     settings: ChronologySettings, ensemble: int, rng, constraints=(), spans=None):
    """Fit the memory or the independent-increment accumulation model to one core.

    ``constraints``: (depth [cm, event-free], age [cal BP], error [yr]) of calendar
    constraints (the core top), whose node ages are drawn within their grid cell.
    ``spans``: (n, 2) slice (top, bottom) of each date [cm, event-free], NaN for a point
    (see :func:`slice_intervals`); a slice date constrains the slice's mean age.

    Returns
    -------
    nodes : ndarray (K,), paths : ndarray (K, M), outlier : ndarray (used dates,),
    hyperparameters : DataFrame with :data:`HYPERPARAMETER_COLUMNS`
    """
    z_used = z[use]
    slices = (np.full((z.size, 2), np.nan) if spans is None else np.asarray(spans, dtype=float))[use]
    spacing = settings.node_spacing_cm or auto_node_spacing(z_used, top, bottom)
    spacing = max(spacing, (bottom - top) / settings.max_nodes)
    # a slice thinner than a third of the spacing (closer than that, ladder nodes give way to a
    # date) stays a point at its centre node: the mean age of a slice of thickness h around a
    # node where the deposition time changes by d [yr/cm] differs from the node's age by h d / 8
    is_span = np.isfinite(slices[:, 0]) & (slices[:, 1] - slices[:, 0] >= spacing / 3)
    inside = tuple(h for h in hiatuses if top < h < bottom)
    nodes, gap_after = place_nodes(top, bottom, spacing, z_used[~is_span], inside, slices[is_span])
    date_node = np.searchsorted(nodes, z_used - 1e-6, side="left")
    date_node[is_span] = span_nodes(nodes, slices[is_span])
    rates = centre * np.asarray(settings.mean_rate_factors)
    used = calibrated.take(np.flatnonzero(use))
    origin, step, size = _grid(used, z_used, top, bottom, spacing, rates.max(), len(inside), core, settings)
    scale = settings.outlier_shift_scale
    span_mass = span_outlier = None
    if is_span.any():
        span_mass, span_outlier = np.zeros((2, len(used), 2 * size - 1))
        thick = used.take(np.flatnonzero(is_span))
        span_mass[is_span] = half_cell_mass(thick.on_grid, origin, step, size)
        span_outlier[is_span] = half_cell_mass(lambda o, s, n: outlier_density(thick, o, s, n, *scale),
                                               origin, step, size)
    problem = AccumulationProblem(
        nodes, gap_after, date_node, used.on_grid(origin, step, size), priors[use], origin, step,
        float(settings.reference_depth_cm), outlier_mass=outlier_density(used, origin, step, size, *scale),
        date_span=is_span, span_mass=span_mass, span_outlier_mass=span_outlier)
    variability = np.asarray(settings.rate_variability, dtype=float)
    constraints = [(int(np.searchsorted(nodes, depth - 1e-6)), age, error) for depth, age, error in constraints]
    if settings.model == "memory":
        fit = fit_memory(problem, rates, variability, settings.rate_memory, settings.hiatus_gap_yr, ensemble, rng,
                         classes=settings.rate_classes, within_shape=settings.within_class_variability ** -2,
                         memory_prior=settings.rate_memory_prior)
        hyper = pd.DataFrame({"model": "memory", "mean_rate_yr_cm": fit.mean_rates,
                              "rate_variability": fit.variabilities, "rate_memory": fit.memories,
                              "log_evidence": fit.log_evidence, "weight": fit.weights})
    else:
        mean, cv = np.meshgrid(rates, variability, indexing="ij")
        fit = fit_accumulation(problem, mean.ravel(), cv.ravel() ** -2, settings.hiatus_gap_yr, ensemble, rng)
        hyper = pd.DataFrame({"model": "accumulation", "mean_rate_yr_cm": fit.mean_rates,
                              "rate_variability": cv.ravel(), "rate_memory": 0.0,
                              "log_evidence": fit.log_evidence, "weight": fit.weights})
    paths = _refine_in_cell(fit.paths, problem, constraints, rng)
    return nodes, paths, fit.outlier_posterior, hyper[list(HYPERPARAMETER_COLUMNS)]


def _refine_in_cell(paths: np.ndarray, problem: AccumulationProblem, constraints, rng) -> np.ndarray:
    """Draw the age of a node pinned by a normal constraint within its grid cell.

    The models spread ages uniformly within a cell; a constraint narrower than a cell (the
    core top: the collection year within a few years) is honoured by drawing the node's age
    from the constraint's normal density truncated to the cell, which is the exact
    conditional when no other date sits at that node. Paths stay monotone.

    ``constraints`` is a list of (node, age [cal BP], error [yr]).
    """
    step = problem.grid_step
    out = paths.copy()
    for node, age, error in constraints:
        if np.count_nonzero((problem.date_node == node) & ~problem.spans()) != 1:
            continue
        centre = problem.grid_origin + step * np.round((paths[node] - problem.grid_origin) / step)
        low = stats.norm.cdf((centre - step / 2 - age) / error)
        high = stats.norm.cdf((centre + step / 2 - age) / error)
        u = low + rng.random(paths.shape[1]) * np.maximum(high - low, 0.0)
        drawn = age + error * stats.norm.ppf(np.clip(u, 1e-12, 1 - 1e-12))
        out[node] = np.clip(drawn, centre - step / 2, centre + step / 2)
    return np.maximum.accumulate(out, axis=0)


def run_interpolation(calibrated: CalibratedDates, use, z, priors, hiatuses, free_out, centre,
                      settings: ChronologySettings, ensemble: int, rng):
    """Fit the Monte Carlo interpolation model; returns nodes (K,), paths (K, M), outlier."""
    index = np.flatnonzero(use)
    index = index[np.argsort(z[index], kind="stable")]
    chosen = calibrated.take(index)
    depths = z[index]
    edges = sorted(h for h in hiatuses)
    ladder = np.unique(np.concatenate([free_out, depths]))
    nodes = np.sort(np.concatenate([ladder, [h for h in edges if ladder[0] < h < ladder[-1]]]))
    # the second copy of a hiatus depth belongs to the section below it
    query = nodes.copy()
    for h in edges:
        copies = np.flatnonzero(nodes == h)
        if copies.size == 2:
            query[copies[1]] = h + 1e-9
    fit = fit_interpolation(depths, lambda size: chosen.sample(size, rng), query, edges, priors[index], ensemble,
                            rng, smooth=settings.join == "smooth", fallback_rate=centre)
    outlier = np.full(z.size, np.nan)
    outlier[index] = fit.outlier_posterior
    return nodes, fit.paths, outlier[use]
