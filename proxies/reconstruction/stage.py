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

from proxies.problems import InputError, Problem
from proxies.reconstruction.anomalies import (anomalies_from_reference, normal_window_cal_bp,
                                              window_coverage, window_mean_per_member)
from proxies.reconstruction.grid import bin_means, cal_bp_to_ce, interpolate_members, regular_grid
from proxies.reconstruction.quantiles import BAND_LEVELS, band_name, ensemble_bands
from proxies.reconstruction.settings import ReconstructionSettings

__all__ = ["GridSeries", "ReconstructionResult", "reconstruct_core", "member_column_names"]


def member_column_names(n_members: int) -> list[str]:
    """Column names of ensemble members: ``m0000, m0001, ...``."""
    return [f"m{m:04d}" for m in range(n_members)]


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
    ``value``/``anomaly``; one column per member).
    """

    core_id: str
    table: pd.DataFrame
    series: dict[str, GridSeries]
    ensemble: pd.DataFrame
    warnings: list[str] = field(default_factory=list)


def _record_label(record, taken: set[str]) -> str:
    label = str(record.variable)
    if label in taken:
        label = f"{record.variable}_{record.proxy}"
    return label


def _grid_for(records_ages: list[np.ndarray], settings: ReconstructionSettings) -> np.ndarray:
    if settings.grid_young_cal_bp is not None:
        return regular_grid(settings.grid_young_cal_bp, settings.grid_old_cal_bp, settings.grid_step_yr)
    medians = np.concatenate([np.nanmedian(a, axis=1) for a in records_ages])
    medians = medians[np.isfinite(medians)]
    if medians.size == 0:
        raise ValueError("no sample has a finite age; cannot build a time grid")
    return regular_grid(medians.min(), medians.max(), settings.grid_step_yr)


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
    notes: list[str] = []
    if not records:
        empty = pd.DataFrame(columns=["age_cal_bp", "variable", "value_median"])
        return ReconstructionResult(core.id, empty, {}, pd.DataFrame(), ["no calibrated record"])
    ages_list = []
    for record in records:
        values = np.asarray(record.values, dtype=float)
        ages = np.asarray(chronology.age_at(np.asarray(record.depth_cm, dtype=float)), dtype=float)
        if ages.shape != values.shape:
            raise ValueError(f"core {core.id}, {record.proxy}: ages {ages.shape} and calibrated "
                             f"values {values.shape} differ; both must be (n samples, M members)")
        ages_list.append(ages)
    grid = _grid_for(ages_list, settings)
    series: dict[str, GridSeries] = {}
    for record, ages in zip(records, ages_list):
        values = np.asarray(record.values, dtype=float)
        means, counts = bin_means(ages, values, grid)
        grid_values = means if settings.binning == "bin" else interpolate_members(ages, values, grid)
        label = _record_label(record, set(series))
        reference, window, kind = _reference(ages, values, grid, grid_values, settings, core.id, label)
        # Upper median: a cell has n_samples >= 1 exactly when at least half of the members have
        # a sample in it, which is when it gets quantiles (min_member_share = 0.5).
        n_samples = np.quantile(counts, 0.5, axis=1, method="higher").astype(np.int64)
        series[label] = GridSeries(label, str(record.units), grid.copy(), grid_values,
                                   anomalies_from_reference(grid_values, reference), n_samples,
                                   window, kind, str(record.proxy), str(record.variable))
        empty = int(np.sum(n_samples == 0))
        if empty:
            notes.append(f"{label}: {empty} of {grid.size} grid cells hold no sample "
                         f"(median member); they are left empty")
    table = pd.concat([_series_table(s, settings.min_member_share) for s in series.values()],
                      ignore_index=True)
    return ReconstructionResult(core.id, table, series, _ensemble_table(series), notes)
