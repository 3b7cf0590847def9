"""The chronology stage: calibrate a core's dates and build its age-depth ensemble.

:func:`build_chronology` is the seam the pipeline calls (see DEVELOPERS.md). It is a thin
adapter from a :class:`proxies.cores.Core` to the array functions of
:mod:`proxies.chronology.calibrate`, :mod:`~proxies.chronology.accumulation` and
:mod:`~proxies.chronology.interpolation`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import stats

from proxies.chronology.calibrate import (
    CalibratedDates,
    calibrate_calendar,
    stack_calibrated,
)
from proxies.chronology.curves import CalibrationCurve
from proxies.chronology.date_curves import calibrate_radiocarbon_rows, lead210_rows
from proxies.chronology.model_runs import HYPERPARAMETER_COLUMNS, run_accumulation, run_interpolation, slice_intervals
from proxies.chronology.settings import ChronologySettings
from proxies.cores.datability import (age_control_problems, event_layer_problems, grid_memory_problems,
                                      machine_memory_bytes)
from proxies.problems import InputError, Problem
from proxies.warning_sinks import collected_warnings

__all__ = ["ChronologyResult", "build_chronology", "calibrate_core_dates", "date_density_table", "date_range_table", "format_ranges",
           "mean_rate_from_dates", "CORE_TOP_LABEL"]

#: label of the core-top pseudo-date added when ``core_top`` is on
CORE_TOP_LABEL = "core top"
#: HPD levels reported for every date (common practice: 68.3 % and 95.4 %)
HPD_LEVELS = (0.683, 0.954)


@dataclass(frozen=True, eq=False)
class ChronologyResult:
    """Age-depth ensemble of one core.

    Attributes
    ----------
    depth_cm : ndarray, shape (n,)
        Output depths [cm, composite].
    ensemble : ndarray, shape (n, M)
        Age of each member at each output depth [cal BP].
    summary : pandas.DataFrame
        ``chronology.parquet``: depth_cm, event_free_depth_cm, age_median, age_q025,
        age_q975, age_mean, age_sd, deposition_time_yr_cm.
    dates : pandas.DataFrame
        ``dates.parquet``: each date's inputs with its calibration and outlier probability.
    warnings : list of str
    node_event_free_cm : ndarray, shape (K,)
        Depths of the model's nodes [cm, event-free] (a hiatus appears twice).
    node_paths : ndarray, shape (K, M)
        Ages of the nodes [cal BP].
    model : str
        Model used.
    hyperparameters : pandas.DataFrame
        Accumulation models: model, mean_rate_yr_cm, rate_variability, rate_memory,
        log_evidence, weight per hyper-parameter point (``hyperparameters.parquet``).
    date_densities : pandas.DataFrame
        ``date_densities.parquet``: label, age_cal_bp, density [1/yr] of each calibrated date
        (before the age model), thinned for plotting (see :func:`date_density_table`).
    date_ranges : pandas.DataFrame
        ``date_ranges.parquet``: the 68.3 % and 95.4 % HPD ranges of each date as numbers
        (see :func:`date_range_table`).
    """

    depth_cm: np.ndarray
    ensemble: np.ndarray
    summary: pd.DataFrame
    dates: pd.DataFrame
    warnings: list[str]
    node_event_free_cm: np.ndarray
    node_paths: np.ndarray
    model: str
    depth_scale: object = None
    hyperparameters: pd.DataFrame = field(default_factory=pd.DataFrame)
    date_densities: pd.DataFrame = field(default_factory=pd.DataFrame)
    date_ranges: pd.DataFrame = field(default_factory=pd.DataFrame)

    def age_at(self, depth_cm) -> np.ndarray:
        """Ensemble ages at composite depths [cm], shape (k, M) [cal BP].

        Depths are converted to the event-free scale (a depth inside an event layer gets the
        age of the layer's top) and the node paths interpolated linearly (extrapolated with
        the end intervals' slopes beyond the nodes).
        """
        depth = np.atleast_1d(np.asarray(depth_cm, dtype=float))
        free = _event_free(self.depth_scale, depth)
        return interpolate_nodes(self.node_event_free_cm, self.node_paths, free)


def interpolate_nodes(nodes: np.ndarray, paths: np.ndarray, depth: np.ndarray) -> np.ndarray:
    """Linear interpolation of node paths (K, M) at depths (k,) -> (k, M).

    A depth equal to a hiatus depth takes the age just above the hiatus.
    """
    k = np.searchsorted(nodes, depth, side="left") - 1
    k = np.clip(k, 0, nodes.size - 2)
    upper, lower = nodes[k], nodes[k + 1]
    width = lower - upper
    weight = np.where(width > 0, (depth - upper) / np.where(width > 0, width, 1.0), 1.0)
    return paths[k] + weight[:, None] * (paths[k + 1] - paths[k])


def _event_free(depth_scale, depth: np.ndarray) -> np.ndarray:
    if depth_scale is None:
        return np.asarray(depth, dtype=float)
    return np.asarray(depth_scale.event_free_depth(depth), dtype=float)


def _dates_file(core) -> str:
    files = getattr(core, "files", None) or {}
    if "dates" in files:
        return files["dates"]
    folder = getattr(core, "folder", "") or ""
    return f"{folder}/dates" if folder else f"dates of core {getattr(core, 'id', '?')}"


def calibrate_core_dates(core, curves: dict[str, CalibrationCurve], settings: ChronologySettings,
                         rng: np.random.Generator | None = None):
    """Calibrate every date of a core (and the core top, and its 210Pb ages), grouped by curve.

    ``rng`` draws the Monte Carlo errors of the 210Pb ages (needed when the core has a
    ``lead210`` table).

    Returns
    -------
    table : pandas.DataFrame
        The dates table (core top first when added) with ``curve_used``.
    calibrated : CalibratedDates
        One row per table row, on the ``calibration_step_yr`` grid.

    Raises
    ------
    proxies.problems.InputError
        A date names an unknown curve, no curve is available for radiocarbon dates, or an age
        lies outside its curve; each problem names the dates file, row and column.
    """
    table = core.dates.copy().reset_index(drop=True)
    for column, default in (("thickness_cm", 0.0), ("curve", None), ("reservoir_offset", 0.0),
                            ("reservoir_error", 0.0), ("exclude", False), ("source_row", np.nan)):
        if column not in table.columns:
            table[column] = default
    table["constraint"] = False
    if top_is_surface(core, settings):
        error = core.top_age_error or settings.top_age_error_yr
        top = {c: None for c in table.columns}
        top.update(label=CORE_TOP_LABEL, depth_cm=0.0, kind="calendar", age=float(core.top_age_cal_bp),
                   error=float(error), thickness_cm=0.0, reservoir_offset=0.0, reservoir_error=0.0,
                   exclude=False, source_row=np.nan, constraint=True)
        table = pd.concat([pd.DataFrame([top]), table], ignore_index=True)
    table["constraint"] = table["constraint"].astype(bool)
    if core.lead210 is not None:
        if rng is None:
            raise ValueError("a core with a lead210 table needs a random generator for its Monte Carlo errors")
        table = pd.concat([table, lead210_rows(core, settings, table.columns, rng)], ignore_index=True)
    table["reservoir_offset"] = pd.to_numeric(table["reservoir_offset"]).fillna(0.0)
    table["reservoir_error"] = pd.to_numeric(table["reservoir_error"]).fillna(0.0)
    table["exclude"] = table["exclude"].fillna(False).astype(bool)
    kinds = table["kind"].astype(str).str.lower().to_numpy()
    file = _dates_file(core)
    step = settings.calibration_step_yr
    used = [None] * len(table)
    radiocarbon = np.flatnonzero(kinds == "radiocarbon")
    parts, used_keys, problems = calibrate_radiocarbon_rows(table, radiocarbon, curves, settings, file,
                                                            lambda i: _row(table, i))
    for i, key in used_keys.items():
        used[i] = key
    calendar = np.flatnonzero(kinds == "calendar")
    if calendar.size:
        parts.append((calendar, calibrate_calendar(table["age"].to_numpy(float)[calendar],
                                                   table["error"].to_numpy(float)[calendar], step)))
    other = np.flatnonzero((kinds != "calendar") & (kinds != "radiocarbon"))
    for i in other:
        problems.append(Problem(file, f"unknown date kind {table.at[i, 'kind']!r}", "use radiocarbon or calendar",
                                row=_row(table, i), column="kind"))
    if problems:
        raise InputError(problems)
    table["curve_used"] = used
    return table, stack_calibrated(parts, len(table))


def top_is_surface(core, settings: ChronologySettings) -> bool:
    """Whether the core top is the sediment surface of the collection year (a constraint).

    ``core.toml``'s ``top_intact`` decides when given; otherwise ``[chronology] core_top``.
    """
    return settings.core_top if core.top_intact is None else bool(core.top_intact)


def outlier_priors(table: pd.DataFrame, settings: ChronologySettings) -> np.ndarray:
    """Prior outlier probability of each date: ``outlier_prior``, 0 for constraints (core top)."""
    return np.where(table["constraint"].to_numpy(bool), 0.0, settings.outlier_prior)


def _row(table: pd.DataFrame, i: int) -> int | None:
    value = table.at[i, "source_row"]
    return None if value is None or (isinstance(value, float) and math.isnan(value)) else int(value)


def format_ranges(ranges) -> str:
    """HPD ranges as text, e.g. ``"5048 to 5201 (62.7%); 5209 to 5310 (32.9%)"`` [cal BP]."""
    return "; ".join(f"{young:.0f} to {old:.0f} ({100 * p:.1f}%)" for young, old, p in ranges)


def mean_rate_from_dates(depth_cm, median_cal_bp) -> float | None:
    """Data-driven mean accumulation rate [yr/cm]: Theil-Sen slope of date medians on depth.

    The median of pairwise slopes (Sen 1968) resists outlying dates and hiatus jumps better
    than least squares. Returns ``None`` with fewer than two distinct depths or a slope <= 0.

    References
    ----------
    Sen PK (1968). Estimates of the regression coefficient based on Kendall's tau. JASA
    63(324), 1379-1389. doi:10.1080/01621459.1968.10480934
    """
    depth = np.asarray(depth_cm, dtype=float)
    median = np.asarray(median_cal_bp, dtype=float)
    if np.unique(depth).size < 2:
        return None
    slope = stats.theilslopes(median, depth).slope
    return float(slope) if np.isfinite(slope) and slope > 0 else None


def build_chronology(core, curves: dict[str, CalibrationCurve], settings: ChronologySettings,
                     ensemble: int, rng: np.random.Generator) -> ChronologyResult:
    """Calibrate a core's dates and build its age-depth ensemble.

    Parameters
    ----------
    core : proxies.cores.Core
        The core (``dates``, ``samples``, ``depth_scale``, ``hiatuses_cm``, ``top_age_cal_bp``,
        ``top_age_error``).
    curves : dict of str to CalibrationCurve
        Curves by their ``[curves]`` name.
    settings : ChronologySettings
    ensemble : int
        Number of members M.
    rng : numpy.random.Generator

    Returns
    -------
    ChronologyResult
    """
    if ensemble < 1:
        raise ValueError(f"ensemble must be >= 1, got {ensemble}")
    refused = (age_control_problems(core, top_is_surface(core, settings)) + event_layer_problems(core)
               + grid_memory_problems(core, settings, None, ensemble, machine_memory_bytes(), "run config"))
    if refused:
        raise InputError(refused)
    messages: list[str] = []
    with collected_warnings() as caught:  # thread-safe, unlike warnings.catch_warnings
        # a core with 210Pb data takes its Monte Carlo generator from the stage's, first
        lead_rng = np.random.default_rng(rng.integers(2**63)) if core.lead210 is not None else None
        table, calibrated = calibrate_core_dates(core, curves, settings, lead_rng)
    messages.extend(caught)
    depth_scale = getattr(core, "depth_scale", None)
    table["event_free_depth_cm"] = _event_free(depth_scale, table["depth_cm"].to_numpy(float))
    medians = calibrated.median()
    use = ~table["exclude"].to_numpy(bool)
    if not use.any():
        raise InputError(Problem(_dates_file(core), "every date is excluded; an age model needs at least one",
                                 "set exclude = false for some dates"))
    hiatuses = tuple(float(h) for h in _event_free(depth_scale, np.asarray(getattr(core, "hiatuses_cm", ()) or (),
                                                                             dtype=float)))
    out_depth = _output_depths(core, table, settings)
    free_out = _event_free(depth_scale, out_depth)
    z = table["event_free_depth_cm"].to_numpy(float)
    centre = settings.mean_rate_yr_cm or mean_rate_from_dates(z[use], medians[use])
    if centre is None:
        centre = 10.0
        messages.append("mean accumulation rate could not be estimated from the dates; 10 yr/cm assumed")
    depth = table["depth_cm"].to_numpy(float)
    half = table["thickness_cm"].fillna(0.0).to_numpy(float) / 2
    spans, span_messages = slice_intervals(table["label"].tolist(), _event_free(depth_scale, depth - half),
                                           _event_free(depth_scale, depth + half), z, use, hiatuses)
    ends = spans[np.isfinite(spans[:, 0])]
    top = float(min(free_out.min(), z.min(), ends.min(initial=np.inf)))
    bottom = float(max(free_out.max(), z.max(), ends.max(initial=-np.inf)))
    outlier = np.full(len(table), np.nan)
    hyper = pd.DataFrame({c: pd.Series(dtype="string" if c == "model" else float) for c in HYPERPARAMETER_COLUMNS})
    priors = outlier_priors(table, settings)
    if settings.model in ("memory", "accumulation"):
        pinned = table["constraint"].to_numpy(bool) & use & (table["kind"].astype(str).str.lower() == "calendar")
        constraints = [(z[i], float(table.at[i, "age"]), float(table.at[i, "error"])) for i in np.flatnonzero(pinned)]
        messages.extend(span_messages)
        nodes, paths, outlier_used, hyper = run_accumulation(
            calibrated, use, z, priors, hiatuses, top, bottom, centre, core, settings, ensemble, rng, constraints,
            spans)
    else:
        nodes, paths, outlier_used = run_interpolation(
            calibrated, use, z, priors, hiatuses, free_out, centre, settings, ensemble, rng)
    outlier[use] = outlier_used
    result_ensemble = interpolate_nodes(nodes, paths, free_out)
    summary = _summary(out_depth, free_out, result_ensemble)
    summary["hiatus_gap_yr"] = _hiatus_gaps(out_depth, getattr(core, "hiatuses_cm", ()) or (), depth_scale,
                                            nodes, paths)
    dates = _dates_table(table, calibrated, medians, outlier, interpolate_nodes(nodes, paths, z))
    for label, p in zip(dates["label"], dates["outlier_prob"]):
        if np.isfinite(p) and p > 0.5:
            messages.append(f"date {label!r} is probably an outlier (posterior probability {p:.2f})")
    return ChronologyResult(out_depth, result_ensemble, summary, dates, messages, nodes, paths,
                            settings.model, depth_scale, hyper,
                            date_density_table(table["label"].tolist(), calibrated),
                            date_range_table(table["label"].tolist(), calibrated))


def date_range_table(labels: list[str], calibrated: CalibratedDates,
                     levels: tuple[float, ...] = HPD_LEVELS) -> pd.DataFrame:
    """HPD ranges of the calibrated dates as numbers, one row per range.

    Returns
    -------
    pandas.DataFrame
        ``date_ranges.parquet``: label, level, young_cal_bp, old_cal_bp [cal BP], probability
        (mass inside the range), dates in input order, levels ascending, ranges young to old.
    """
    rows = [(label, level, young, old, mass)
            for level in sorted(levels)
            for label, ranges in zip(labels, calibrated.hpd(level))
            for young, old, mass in ranges]
    frame = pd.DataFrame(rows, columns=["label", "level", "young_cal_bp", "old_cal_bp", "probability"])
    order = {label: i for i, label in enumerate(labels)}
    frame["_date"] = frame["label"].map(order)
    frame = frame.sort_values(["_date", "level"], kind="stable").drop(columns="_date")
    return frame.astype({"level": float, "young_cal_bp": float, "old_cal_bp": float,
                         "probability": float}).reset_index(drop=True)


def date_density_table(labels: list[str], calibrated: CalibratedDates, max_points: int = 400,
                       cutoff: float = 1e-4) -> pd.DataFrame:
    """Calibrated densities of the dates as a long table for figures.

    Parameters
    ----------
    labels : list of str
        Date labels, one per row of ``calibrated``.
    calibrated : CalibratedDates
        Densities on the calibration grid.
    max_points : int
        At most this many points per date; denser rows are thinned by taking the maximum
        mass in consecutive blocks, so narrow peaks survive.
    cutoff : float
        Cells below ``cutoff`` times the row's peak are dropped at both ends.

    Returns
    -------
    pandas.DataFrame
        Columns label, age_cal_bp [cal BP], density [1/yr] (mass per cell / step).
    """
    frames = []
    for i, label in enumerate(labels):
        ages, mass = calibrated.row(i)
        keep = np.flatnonzero(mass >= cutoff * mass.max())
        ages, mass = ages[keep[0]:keep[-1] + 1], mass[keep[0]:keep[-1] + 1]
        block = max(1, int(math.ceil(ages.size / max_points)))
        n = ages.size // block * block
        if block > 1 and n:
            ages = ages[:n].reshape(-1, block).mean(axis=1)
            mass = mass[:n].reshape(-1, block).max(axis=1)
        frames.append(pd.DataFrame({"label": label, "age_cal_bp": ages,
                                    "density": mass / calibrated.step}))
    if not frames:
        return pd.DataFrame({"label": [], "age_cal_bp": [], "density": []})
    return pd.concat(frames, ignore_index=True)


def _output_depths(core, table: pd.DataFrame, settings: ChronologySettings) -> np.ndarray:
    deepest = float(table["depth_cm"].max())
    samples = getattr(core, "samples", None)
    if samples is not None and len(samples) and "depth_cm" in samples:
        thickness = samples["thickness_cm"].fillna(0.0) if "thickness_cm" in samples else 0.0
        deepest = max(deepest, float((samples["depth_cm"] + thickness).max()))
    top = min(0.0, float(table["depth_cm"].min()))
    step = settings.output_step_cm
    depth = np.arange(top, deepest + step * 0.5, step)
    if depth[-1] < deepest - 1e-9:
        depth = np.append(depth, deepest)
    return depth


def _hiatus_gaps(out_depth, hiatuses_cm, depth_scale, nodes, paths) -> np.ndarray:
    """Median age jump across each hiatus [yr], at the output depth just above it (else NaN)."""
    gaps = np.full(out_depth.size, np.nan)
    for h in hiatuses_cm:
        if not out_depth[0] <= h <= out_depth[-1]:
            continue
        free = _event_free(depth_scale, np.array([h, h + 1e-6]))
        above, below = interpolate_nodes(nodes, paths, free)
        row = int(np.searchsorted(out_depth, h + 1e-9, side="right")) - 1
        gaps[row] = float(np.median(below - above))
    return gaps


def _summary(depth_cm, free, ensemble) -> pd.DataFrame:
    q025, median, q975 = np.quantile(ensemble, [0.025, 0.5, 0.975], axis=1)
    if depth_cm.size > 1:
        rate = np.median(np.gradient(ensemble, depth_cm, axis=0), axis=1)
    else:
        rate = np.full(depth_cm.size, np.nan)
    return pd.DataFrame({
        "depth_cm": depth_cm, "event_free_depth_cm": free, "age_median": median, "age_q025": q025,
        "age_q975": q975, "age_mean": ensemble.mean(axis=1), "age_sd": ensemble.std(axis=1, ddof=1)
        if ensemble.shape[1] > 1 else np.zeros(depth_cm.size), "deposition_time_yr_cm": rate})


def _dates_table(table, calibrated: CalibratedDates, medians, outlier, model_ages) -> pd.DataFrame:
    out = table.copy()
    hpd95 = calibrated.hpd(0.954)
    out["cal_median_bp"] = medians
    out["cal_mode_bp"] = calibrated.mode()
    out["cal_mean_bp"] = calibrated.mean()
    out["hpd95_young_bp"] = [r[0][0] for r in hpd95]
    out["hpd95_old_bp"] = [r[-1][1] for r in hpd95]
    out["outlier_prob"] = outlier
    out["model_age_median_bp"] = np.median(model_ages, axis=1)
    out["curve"] = out["curve"].astype(object).where(out["curve"].notna(), None)
    return out
