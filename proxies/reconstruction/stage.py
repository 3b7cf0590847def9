"""The reconstruction stage: calibrated sample ensembles of a core -> gridded climate series.

For every calibrated record, member ``m`` pairs the values of calibration draw ``m`` (which
carry the analytical and calibration errors) with the sample ages of age path ``m``; the
member is put on the regular grid (cell means or interpolation), referenced to its own
reference value, and quantile bands are taken over members at the end.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from proxies.members import member_column_names
from proxies.problems import InputError, Problem
from proxies.reconstruction.anomalies import (anomalies_from_reference, normal_window_cal_bp,
                                              window_coverage, window_mean_per_member)
from proxies.reconstruction.grid import (auto_grid_step_yr, bin_means, bin_means_filled, cal_bp_to_ce,
                                         interpolate_members, median_sample_spacing_yr, regular_grid)
from proxies.reconstruction.quantiles import BAND_LEVELS, band_name, ensemble_bands
from proxies.reconstruction.settings import ReconstructionSettings

__all__ = ["GridSeries", "ReconstructionResult", "TimeGrid", "reconstruct_core", "time_grid_for",
           "filled_share"]


@dataclass(frozen=True)
class GridSeries:
    """One climate variable of one core on the regular grid, as an ensemble.

    Attributes
    ----------
    variable : str
        Name of the variable (unique within the core).
    units : str
    age_cal_bp : ndarray (T,)
        Grid-cell centres [cal BP].
    values : ndarray (T, M)
        Member values; NaN where the member has no sample in the cell.
    anomalies : ndarray (T, M)
        ``values`` minus each member's reference value.
    n_samples : ndarray (T,)
        Upper median over members of the number of samples in each cell (0 = empty cell).
    reference_window : (float, float)
        (young, old) [cal BP] of the reference.
    reference_kind : str
        ``"normal 1961-1990"``, ``"window"`` or ``"record"``.
    proxy : str
        Proxy column the variable was calibrated from.
    climate_variable : str
        The calibrated variable's own name (``variable`` gets a ``_<proxy>`` suffix when two
        proxies of a core give the same variable); records are stacked by this name.
    """

    variable: str
    units: str
    age_cal_bp: np.ndarray
    values: np.ndarray
    anomalies: np.ndarray
    n_samples: np.ndarray
    reference_window: tuple[float, float]
    reference_kind: str = "window"
    proxy: str = ""
    climate_variable: str = ""

    @property
    def n_empty(self) -> int:
        """Number of grid cells without any sample in the median member."""
        return int(np.sum(self.n_samples == 0))


@dataclass
class ReconstructionResult:
    """Output of :func:`reconstruct_core`.

    ``table`` is ``reconstruction.parquet``, ``ensemble`` is
    ``reconstruction_ensemble.parquet`` (one row per grid cell, variable and quantity
    ``value``/``anomaly``; one column per member). ``warnings`` are about the science (thin
    records), ``notes`` say what was done (the grid, interpolated cells); ``filled`` is
    each variable's :func:`filled_share` and ``thin`` the variables below
    ``min_filled_share``.
    """

    core_id: str
    table: pd.DataFrame
    series: dict[str, GridSeries]
    ensemble: pd.DataFrame
    warnings: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    filled: dict[str, float] = field(default_factory=dict)
    thin: list[str] = field(default_factory=list)


def _record_label(record, taken: set[str]) -> str:
    label = str(record.variable)
    if label in taken:
        label = f"{record.variable}_{record.proxy}"
    return label


@dataclass(frozen=True)
class TimeGrid:
    """The time grid of one core and how it was chosen.

    Attributes
    ----------
    age_cal_bp : ndarray (T,)
        Cell centres [cal BP].
    step_yr : float
        Cell width [yr].
    spacing_yr : float
        Median spacing of the sample ages [yr] (NaN when the step was given).
    chosen : str
        ``"given"`` (``grid_step_yr`` set) or ``"auto"``.
    """

    age_cal_bp: np.ndarray
    step_yr: float
    spacing_yr: float
    chosen: str

    def describe(self) -> str:
        """One line for the core's notes, e.g. ``"time grid 9900..12400 cal BP every 200 yr
        (median sample spacing 187 yr, rounded to a standard step)"``."""
        where = (f"time grid {self.age_cal_bp[0] + 0.0:g}..{self.age_cal_bp[-1] + 0.0:g} cal BP every "
                 f"{self.step_yr:g} yr")
        if self.chosen == "auto":
            return f"{where} (median sample spacing {self.spacing_yr:.0f} yr, rounded to a standard step)"
        return f"{where} (grid_step_yr)"


#: binning = "filled" bridges gaps up to this many median sample spacings (fill_max_gap_yr = "auto")
FILL_GAP_SPACINGS = 3.0


def _median_ages(records_ages: list[np.ndarray], records_values: list[np.ndarray],
                 with_value_only: bool) -> list[np.ndarray]:
    """Per record: the median-member age of every sample (NaN for samples without a value
    when ``with_value_only``)."""
    out = []
    for ages, values in zip(records_ages, records_values):
        keep = np.isfinite(values).any(axis=1) if with_value_only else np.isfinite(ages).any(axis=1)
        median = np.full(ages.shape[0], np.nan)
        if keep.any():
            median[keep] = np.nanmedian(ages[keep], axis=1)
        out.append(median)
    return out


def time_grid_for(records_ages: list[np.ndarray], records_values: list[np.ndarray],
                  settings: ReconstructionSettings) -> TimeGrid:
    """The core's time grid: the stated range or the samples' median ages, and the stated step
    or one that follows the record.

    With ``grid_step_yr = "auto"`` the step is the smallest of the records' median sample
    spacings (samples with a value, median member) rounded to a standard step
    (:func:`~proxies.reconstruction.grid.auto_grid_step_yr`), so the finest record keeps its
    resolution and coarser ones are filled between their samples.

    Raises
    ------
    ValueError
        When no sample has a finite age.
    """
    finite = np.concatenate(_median_ages(records_ages, records_values, with_value_only=False))
    finite = finite[np.isfinite(finite)]
    if settings.grid_young_cal_bp is not None:
        young, old = float(settings.grid_young_cal_bp), float(settings.grid_old_cal_bp)
    elif finite.size:
        young, old = float(finite.min()), float(finite.max())
    else:
        raise ValueError("no sample has a finite age; cannot build a time grid")
    if settings.grid_step_yr is not None:
        step = float(settings.grid_step_yr)
        return TimeGrid(regular_grid(young, old, step), step, float("nan"), "given")
    spacings = [median_sample_spacing_yr(m)
                for m in _median_ages(records_ages, records_values, with_value_only=True)]
    spacings = [g for g in spacings if np.isfinite(g)]
    spacing = min(spacings) if spacings else max(old - young, 1.0)
    step = auto_grid_step_yr(spacing, old - young)
    return TimeGrid(regular_grid(young, old, step), step, spacing, "auto")


def filled_share(series: "GridSeries", min_share: float, span_cal_bp: tuple[float, float] | None = None) -> float:
    """Share of the grid cells inside a record's age span that hold reconstructed values.

    A cell counts as filled when at least ``min_share`` of the members have a value there
    (the rule under which it gets quantiles).

    Parameters
    ----------
    series : GridSeries
    min_share : float
    span_cal_bp : (young, old), optional
        The record's age span [cal BP] (its youngest and oldest sample, median member);
        default: from the youngest to the oldest cell where any member has a value.

    Returns
    -------
    float
        0 for a record without any value.
    """
    share = np.isfinite(series.values).mean(axis=1) if series.values.size else np.zeros(0)
    if not np.any(share > 0):
        return 0.0
    if span_cal_bp is None:
        any_value = np.flatnonzero(share > 0)
        inside = np.zeros(share.size, dtype=bool)
        inside[any_value[0]:any_value[-1] + 1] = True
    else:
        step = series.age_cal_bp[1] - series.age_cal_bp[0] if series.age_cal_bp.size > 1 else 1.0
        # cells whose extent overlaps the span
        inside = (series.age_cal_bp + step / 2 > span_cal_bp[0]) & (series.age_cal_bp - step / 2 <= span_cal_bp[1])
    if not inside.any():
        return 0.0
    return float(np.mean(share[inside] >= min_share))


def _put_on_grid(binning: str, ages, values, grid, max_gap_yr):
    """(grid values (T, M), sample counts (T, M)) of one record for a ``binning`` choice."""
    if binning == "filled":
        return bin_means_filled(ages, values, grid, max_gap_yr)
    means, counts = bin_means(ages, values, grid)
    return (means if binning == "bin" else interpolate_members(ages, values, grid)), counts


def _record_span_and_gap(ages, values, settings) -> tuple[tuple[float, float] | None, float | None]:
    """A record's age span (median member, samples with a value) and the longest gap
    ``binning = "filled"`` bridges [yr]."""
    median = _median_ages([ages], [values], with_value_only=True)[0]
    median = median[np.isfinite(median)]
    span = (float(median.min()), float(median.max())) if median.size else None
    if settings.fill_max_gap_yr is not None:
        return span, float(settings.fill_max_gap_yr)
    spacing = median_sample_spacing_yr(median)
    return span, (FILL_GAP_SPACINGS * spacing if np.isfinite(spacing) else None)


def _grid_note(label: str, series: "GridSeries", binning: str, share: float,
               max_gap_yr: float | None) -> str | None:
    """What was done with the cells of one record, in words (None when nothing to say)."""
    n_cells = series.age_cal_bp.size
    empty = series.n_empty
    if share == 0.0:
        return f"{label}: no grid cell holds a value"
    if not empty:
        return None
    head = f"{label}: {empty} of {n_cells} grid cells hold no sample (median member); "
    if binning == "bin":
        return head + f"they are left empty (binning = 'bin'); values cover {share:.0%} of its age span"
    bridge = (f"gaps up to {max_gap_yr:.0f} yr" if binning == "filled" and max_gap_yr is not None
              else "every gap")
    return (head + f"between neighbouring samples they are interpolated (binning = '{binning}', "
            f"{bridge}); values cover {share:.0%} of its age span")


def _reference(ages, values, grid, grid_values, settings, core_id, variable):
    """Pick the reference window and return (reference (M,), window, kind)."""
    with_value = np.where(np.isfinite(values), ages, np.nan)
    normal = normal_window_cal_bp(settings.normal_period)
    kind = settings.reference
    if kind == "auto":
        covers = window_coverage(with_value, normal).mean() >= settings.min_member_share
        kind = "normal" if covers else ("window" if settings.reference_window else "record")
    if kind == "record":
        window = (float(grid[0]), float(grid[-1]))
        return np.nanmean(grid_values, axis=0), window, "record"
    window = normal if kind == "normal" else settings.reference_window
    share = window_coverage(with_value, window).mean()
    if share < settings.min_member_share:
        key = "normal_period" if kind == "normal" else "reference_young_cal_bp"
        raise InputError(Problem(
            "[reconstruction]",
            f"core {core_id}, variable {variable}: only {share:.0%} of the ensemble members span "
            f"the reference window {window[0]:g}..{window[1]:g} cal BP",
            "choose a reference window inside the record (reference_young_cal_bp / "
            "reference_old_cal_bp) or reference = 'record'", column=key))
    label = f"normal {settings.normal_period}" if kind == "normal" else "window"
    return window_mean_per_member(ages, values, window), window, label


def _series_table(series: GridSeries, min_share: float) -> pd.DataFrame:
    table = {"age_cal_bp": series.age_cal_bp, "year_ce": cal_bp_to_ce(series.age_cal_bp),
             "variable": series.variable, "proxy": series.proxy, "units": series.units}
    for name, ensemble in (("value", series.values), ("anomaly", series.anomalies)):
        bands = ensemble_bands(ensemble, min_share)
        for level in BAND_LEVELS:
            table[f"{name}_{band_name(level)}"] = bands[band_name(level)]
        if name == "value":
            table["member_share"] = bands["member_share"]
    table["n_samples"] = series.n_samples.astype(np.int64)
    table["reference_young_cal_bp"] = series.reference_window[0]
    table["reference_old_cal_bp"] = series.reference_window[1]
    return pd.DataFrame(table)


def _ensemble_table(series: dict[str, GridSeries]) -> pd.DataFrame:
    frames = []
    for s in series.values():
        for quantity, ensemble in (("value", s.values), ("anomaly", s.anomalies)):
            head = pd.DataFrame({"age_cal_bp": s.age_cal_bp, "variable": s.variable,
                                 "quantity": quantity})
            body = pd.DataFrame(ensemble, columns=member_column_names(ensemble.shape[1]))
            frames.append(pd.concat([head, body], axis=1))
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()


def reconstruct_core(core, chronology, calibration, settings: ReconstructionSettings,
                     rng: np.random.Generator) -> ReconstructionResult:
    """Put every calibrated record of a core on the time grid, with anomalies and bands.

    Parameters
    ----------
    core : proxies.cores.Core
        Only ``core.id`` is used.
    chronology : object with ``age_at(depth_cm) -> ndarray (k, M)`` [cal BP]
    calibration : object with ``records``: list of ``CalibratedRecord`` with ``proxy``,
        ``variable``, ``units``, ``depth_cm`` (n,), ``values`` (n, M); member ``m`` of the
        values pairs with age path ``m``.
    settings : ReconstructionSettings
    rng : numpy.random.Generator
        Unused (the stage is deterministic given its inputs); kept for the stage contract.

    Returns
    -------
    ReconstructionResult
    """
    del rng
    records = list(getattr(calibration, "records", []) or [])
    if not records:
        empty = pd.DataFrame(columns=["age_cal_bp", "variable", "value_median"])
        return ReconstructionResult(core.id, empty, {}, pd.DataFrame(), ["no calibrated record"])
    ages_list, values_list = [], []
    for record in records:
        values = np.asarray(record.values, dtype=float)
        ages = np.asarray(chronology.age_at(np.asarray(record.depth_cm, dtype=float)), dtype=float)
        if ages.shape != values.shape:
            raise ValueError(f"core {core.id}, {record.proxy}: ages {ages.shape} and calibrated "
                             f"values {values.shape} differ; both must be (n samples, M members)")
        ages_list.append(ages)
        values_list.append(values)
    grid = time_grid_for(ages_list, values_list, settings)
    notes, warnings, filled, thin = [grid.describe()], [], {}, []
    series: dict[str, GridSeries] = {}
    for record, ages, values in zip(records, ages_list, values_list):
        span, max_gap = _record_span_and_gap(ages, values, settings)
        grid_values, counts = _put_on_grid(settings.binning, ages, values, grid.age_cal_bp, max_gap)
        label = _record_label(record, set(series))
        reference, window, kind = _reference(ages, values, grid.age_cal_bp, grid_values, settings,
                                             core.id, label)
        # Upper median: a cell has n_samples >= 1 exactly when at least half of the members have
        # a sample in it.
        n_samples = np.quantile(counts, 0.5, axis=1, method="higher").astype(np.int64)
        series[label] = GridSeries(label, str(record.units), grid.age_cal_bp.copy(), grid_values,
                                   anomalies_from_reference(grid_values, reference), n_samples,
                                   window, kind, str(record.proxy), str(record.variable))
        filled[label] = filled_share(series[label], settings.min_member_share, span)
        note = _grid_note(label, series[label], settings.binning, filled[label], max_gap)
        if note:
            notes.append(note)
        if filled[label] < settings.min_filled_share:
            thin.append(label)
            warnings.append(f"{label}: values cover only {filled[label]:.0%} of the record's age "
                            f"span (min_filled_share = {settings.min_filled_share:g}); the "
                            "reconstruction is thin")
    table = pd.concat([_series_table(s, settings.min_member_share) for s in series.values()],
                      ignore_index=True)
    return ReconstructionResult(core.id, table, series, _ensemble_table(series), warnings, notes,
                                filled, thin)
