"""The calibration stage: calibrate each core with the registered method of every column.

Two functions are the seams the pipeline calls (see DEVELOPERS.md):
:func:`~proxies.calibration.transfer.fit_transfer_function` (once per training set) and
:func:`calibrate_core`. A method is one entry of :data:`CALIBRATORS` (name -> function
``calibrate(settings, inputs) -> MethodResult``) and one settings class of the same name in
:data:`proxies.calibration.settings.METHOD_SETTINGS`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Mapping

import numpy as np
import pandas as pd

from .data import InstrumentalSeries
from .equation_methods import (calibrate_equation, calibrate_exponential, calibrate_linear,
                               calibrate_stated)
from .overlap_method import calibrate_with_overlap
from .records import CalibratedRecord, CoreInputs, MethodResult
from .settings import CalibrationSettings
from .transfer import FittedTransfer, calibrate_transfer, fit_transfer_function, \
    prepare_fossil, prepare_training
from proxies.warning_sinks import quiet_warnings

__all__ = ["FittedTransfer", "CalibratedRecord", "CalibrationResult", "prepare_training",
           "prepare_fossil", "fit_transfer_function", "calibrate_core", "SKILL_COLUMNS",
           "SAMPLE_COLUMNS", "CALIBRATORS"]

#: method name -> calibration function (its settings class: settings.METHOD_SETTINGS)
CALIBRATORS: Mapping[str, Callable[..., MethodResult]] = {
    "equation": calibrate_equation, "linear": calibrate_linear,
    "exponential": calibrate_exponential, "overlap": calibrate_with_overlap,
    "transfer": calibrate_transfer, "stated": calibrate_stated,
}

SKILL_COLUMNS = ["proxy", "variable", "units", "method", "detail", "reference", "period",
                 "status", "n_calibration", "n_verification", "r2", "rmse", "re", "ce",
                 "durbin_watson", "n_effective", "calibration_error", "n_components",
                 "n_members", "n_members_few_pairs", "n_members_failed", "n_outside_range",
                 "variance_explained", "random_variance_explained_q95",
                 "first_axis_explained", "p_value"]
SAMPLE_COLUMNS = ["depth_cm", "proxy", "variable", "units", "method", "value_median",
                  "value_q025", "value_q975", "value_mean", "value_sd",
                  "outside_calibration_range", "source_row"]
DIAGNOSTIC_COLUMNS = ["depth_cm", "proxy", "training", "prediction", "prediction_error",
                      "nearest_analogue_distance", "good_analogue_limit", "no_analogue_limit",
                      "analogue_quality", "missing_taxa_percent", "n_missing_taxa"]


@dataclass(frozen=True)
class CalibrationResult:
    """Everything the calibration stage produced for one core.

    Attributes
    ----------
    records : list of CalibratedRecord
    skill : pandas.DataFrame
        ``calibration.parquet``: one row per proxy and period (:data:`SKILL_COLUMNS`).
    samples : pandas.DataFrame
        ``calibrated_samples.parquet`` (:data:`SAMPLE_COLUMNS`): per calibrated sample the
        median, 95 % range, mean and SD over the members, and whether it lies outside the
        calibrated range.
    diagnostics : pandas.DataFrame
        ``calibration_diagnostics.parquet``: fossil-sample analogue distances and missing taxa.
    warnings : list of str
    """

    records: list
    skill: pd.DataFrame
    samples: pd.DataFrame
    diagnostics: pd.DataFrame
    warnings: list


def sample_summaries(record: CalibratedRecord) -> pd.DataFrame:
    """One row per sample of a record: median, 2.5 and 97.5 % quantiles, mean, SD, flag."""
    v = record.values
    with quiet_warnings(RuntimeWarning):
        q = np.nanquantile(v, [0.5, 0.025, 0.975], axis=1) if v.size else np.zeros((3, 0))
        mean = np.nanmean(v, axis=1) if v.size else np.zeros(0)
        sd = np.nanstd(v, axis=1, ddof=1) if v.size else np.zeros(0)
    n = record.depth_cm.size
    flags = np.zeros(n, dtype=bool) if record.outside_range is None else record.outside_range
    return pd.DataFrame({
        "depth_cm": record.depth_cm, "proxy": record.proxy, "variable": record.variable,
        "units": record.units, "method": record.method, "value_median": q[0],
        "value_q025": q[1], "value_q975": q[2], "value_mean": mean, "value_sd": sd,
        "outside_calibration_range": np.asarray(flags, dtype=bool),
        "source_row": pd.array(record.source_row if record.source_row is not None
                               else [None] * n, dtype="Int64"),
    })


def calibrate_core(core, chronology, settings: CalibrationSettings,
                   transfer: Mapping[str, FittedTransfer],
                   instrumental: Mapping[str, InstrumentalSeries], ensemble: int,
                   rng: np.random.Generator) -> CalibrationResult:
    """Calibrate every configured proxy of one core into climate ensembles.

    Parameters
    ----------
    core : proxies.cores.Core
        Uses ``core.id``, ``core.samples`` (``depth_cm``, optional ``thickness_cm``, proxy
        columns, ``<proxy>_error``, ``source_row``), ``core.counts``, ``core.taxa`` and
        ``core.event_layers``.
    chronology : ChronologyResult or None
        ``chronology.age_at(depth_cm) -> (k, M)`` cal BP; needed for overlap calibration only.
    settings : CalibrationSettings
    transfer : dict name -> FittedTransfer
    instrumental : dict name -> InstrumentalSeries
    ensemble : int
        Members M.
    rng : numpy.random.Generator

    Returns
    -------
    CalibrationResult
    """
    inputs = CoreInputs(core, chronology, transfer, instrumental, ensemble, rng)
    records, skill_rows, sample_tables, diag_tables, warnings = [], [], [], [], []
    for proxy in settings.proxies:
        result = CALIBRATORS[proxy.method](proxy, inputs)
        warnings.extend(result.warnings)
        skill_rows.extend({"proxy": proxy.column, "method": proxy.method, **row}
                          for row in result.skill)
        if result.diagnostics is not None:
            diag_tables.append(result.diagnostics)
        if result.record is not None:
            records.append(result.record)
            sample_tables.append(sample_summaries(result.record))
    skill = pd.DataFrame(skill_rows).reindex(columns=SKILL_COLUMNS)
    samples = pd.concat(sample_tables, ignore_index=True) if sample_tables else \
        pd.DataFrame(columns=SAMPLE_COLUMNS)
    diagnostics = pd.concat(diag_tables, ignore_index=True) if diag_tables else \
        pd.DataFrame(columns=DIAGNOSTIC_COLUMNS)
    return CalibrationResult(records, skill, samples, diagnostics, warnings)
