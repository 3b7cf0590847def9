"""The ``overlap`` calibration method: a core's top samples against an instrumental series,
member by member along the age ensemble (``calibrate(settings, inputs) -> MethodResult``)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from proxies.cores.model import BP_ZERO_CE

from .data import InstrumentalSeries
from .overlap import aggregate_windows, calibrate_overlap
from .records import CalibratedRecord, CoreInputs, MethodResult, proxy_column
from .settings import OverlapCalibrationSettings

__all__ = ["calibrate_with_overlap", "sample_limits", "OVERLAP_REFERENCE"]

OVERLAP_REFERENCE = ("split-period verification: Cook et al. (1994), Int. J. Climatol. 14:379, "
                     "doi:10.1002/joc.3370140404")


def sample_limits(samples: pd.DataFrame):
    """Top and bottom depth of every sample [cm].

    With ``thickness_cm`` the sample spans depth +- thickness / 2; without it (or where it is
    empty) samples are taken as contiguous, reaching half way to their neighbours.
    """
    depth = samples["depth_cm"].to_numpy(dtype=float)
    order = np.argsort(depth, kind="stable")
    sorted_depth = depth[order]
    gaps = np.diff(sorted_depth)
    half_up = np.concatenate([[gaps[0] if gaps.size else 1.0], gaps]) / 2
    half_down = np.concatenate([gaps, [gaps[-1] if gaps.size else 1.0]]) / 2
    top = np.empty_like(depth)
    bottom = np.empty_like(depth)
    top[order] = sorted_depth - half_up
    bottom[order] = sorted_depth + half_down
    if "thickness_cm" in samples:
        thickness = samples["thickness_cm"].to_numpy(dtype=float)
        given = np.isfinite(thickness)
        top[given] = depth[given] - thickness[given] / 2
        bottom[given] = depth[given] + thickness[given] / 2
    return np.maximum(top, 0.0), bottom


def _window_climate(inputs: CoreInputs, settings, rows, series):
    top, bottom = sample_limits(inputs.core.samples)
    depth = inputs.core.samples["depth_cm"].to_numpy(dtype=float)[rows]
    n = depth.size
    ages = np.asarray(inputs.chronology.age_at(np.concatenate([top[rows], bottom[rows], depth])),
                      dtype=float)
    if ages.shape[1] != inputs.ensemble:
        raise ValueError(f"chronology has {ages.shape[1]} members, calibration asked for "
                         f"{inputs.ensemble}")
    age_top, age_bottom, age_mid = ages[:n], ages[n:2 * n], ages[2 * n:]
    climate = aggregate_windows(series, BP_ZERO_CE - age_top, BP_ZERO_CE - age_bottom,
                                settings.min_coverage)
    return climate, age_mid


def _status(settings, result, series_name, warnings) -> str:
    column = settings.column
    if result.n_failed:
        warnings.append(f"{column}: {result.n_failed} of {result.values.shape[1]} age members "
                        f"have fewer than 3 samples overlapping '{series_name}' (or no spread "
                        "in them); the record was NOT calibrated, since dropping those members "
                        "would bias its ages -- add samples near the core top or use another "
                        "method")
        return "refused"
    if result.median_pairs < settings.min_pairs:
        warnings.append(f"{column}: the median age member has {result.median_pairs:g} samples "
                        f"overlapping '{series_name}', fewer than min_pairs = "
                        f"{settings.min_pairs}; not calibrated")
        return "refused"
    if result.has_skill:
        return "ok"
    status = "refused" if settings.on_no_skill == "refuse" else "no_skill"
    verify = result.skill.loc[result.skill["period"] != "full"]
    test = "RE and CE" if settings.skill_test == "re_and_ce" else "RE"
    warnings.append(
        f"{column}: split-period verification against '{series_name}' shows no skill "
        f"(median RE = {', '.join(f'{v:.2f}' for v in verify['re'])}, CE = "
        f"{', '.join(f'{v:.2f}' for v in verify['ce'])}; {test} must be > 0 in both splits); "
        + ("the record was NOT calibrated (set on_no_skill = \"warn\" to override)"
           if status == "refused" else "calibrated anyway because on_no_skill = \"warn\""))
    return status


def calibrate_with_overlap(settings: OverlapCalibrationSettings,
                           inputs: CoreInputs) -> MethodResult:
    """Calibrate a proxy column on its overlap with an instrumental series.

    For every age member m the instrumental series is averaged over each sample's window
    (CE = 1950 - cal BP), a line is fitted (:func:`~proxies.calibration.overlap.calibrate_overlap`)
    and verified on split periods (Cook et al. 1994). The fit's coefficients (covariance
    scaled by n / n_eff) are the shared error of a member, the residual scatter the
    independent one.
    """
    if settings.series not in inputs.instrumental:
        raise KeyError(f"[calibration.{settings.column}] names instrumental series "
                       f"'{settings.series}', which was not loaded")
    column = proxy_column(inputs.core, settings.column, settings.event_layer_samples == "keep")
    if column is None:
        return MethodResult(None)
    if column.values.size == 0:
        return MethodResult(None, warnings=[f"core {inputs.core.id}: column '{settings.column}' "
                                            "has no usable value; skipped"])
    if inputs.chronology is None:
        raise ValueError(f"[calibration.{settings.column}] uses the instrumental overlap, which "
                         "needs the core's age ensemble; no chronology was given")
    series: InstrumentalSeries = inputs.instrumental[settings.series]
    climate, age_mid = _window_climate(inputs, settings, column.rows, series)
    result = calibrate_overlap(column.values, climate, age_mid, settings.fit, inputs.rng,
                               settings.error_ratio, settings.min_pairs, settings.skill_test)
    warnings: list[str] = []
    status = _status(settings, result, series.name, warnings)
    variable = settings.variable or series.variable
    units = settings.units or series.units
    detail = f"{settings.fit} fit against instrumental series '{series.name}'"
    skill = [{**row, "variable": variable, "units": units, "reference": OVERLAP_REFERENCE,
              "status": status, "detail": detail, "calibration_error": np.nan}
             for row in result.skill.to_dict("records")]
    if status == "refused":
        return MethodResult(None, skill, None, warnings)
    record = CalibratedRecord(settings.column, variable, units, settings.method,
                              OVERLAP_REFERENCE, column.depth_cm, result.values,
                              np.zeros(column.values.size, dtype=bool), column.source_row)
    return MethodResult(record, skill, None, warnings)
