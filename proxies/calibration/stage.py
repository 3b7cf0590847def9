"""The calibration stage: fit transfer functions once per run, calibrate each core.

Two functions are the seams the pipeline calls (see DEVELOPERS.md):
:func:`fit_transfer_function` and :func:`calibrate_core`.
"""

from __future__ import annotations

import warnings as _warnings
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np
import pandas as pd

from proxies.cores.model import NON_PROXY_COLUMNS
from proxies.problems import InputError, Problem

from .assemblage import counts_to_percentages, rare_taxa_mask, transform_abundances
from .crossval import (bootstrap_predictions, choose_n_components, component_predictions,
                       hblock_predictions, kfold_predictions, loo_predictions,
                       skill_by_components)
from .data import InstrumentalSeries, TrainingSet
from .diagnostics import (analogue_quality, analogue_thresholds, missing_taxa,
                          nearest_analogue_distance)
from .equations import Coefficient, climate_from_exponential, climate_from_linear, \
    published_equation
from .inversion import invert_ensemble
from .overlap import aggregate_windows, calibrate_overlap
from .settings import COUNTS_KEY, CalibrationSettings, ProxyCalibration, TrainingSpec

__all__ = ["FittedTransfer", "CalibratedRecord", "CalibrationResult", "prepare_training",
           "prepare_fossil", "fit_transfer_function", "calibrate_core", "SKILL_COLUMNS"]

MODEL_REFERENCES = {
    "wa": "Birks et al. (1990), Phil. Trans. R. Soc. B 327:263, doi:10.1098/rstb.1990.0062",
    "wapls": "ter Braak & Juggins (1993), Hydrobiologia 269:485, doi:10.1007/BF00028046",
    "mat": "Overpeck et al. (1985), Quat. Res. 23:87, doi:10.1016/0033-5894(85)90074-2",
}
OVERLAP_REFERENCE = ("split-period verification: Cook et al. (1994), Int. J. Climatol. 14:379, "
                     "doi:10.1002/joc.3370140404")
SKILL_COLUMNS = ["proxy", "variable", "units", "method", "detail", "reference", "period",
                 "status", "n_calibration", "n_verification", "r2", "rmse", "re", "ce",
                 "durbin_watson", "n_effective", "calibration_error", "n_components",
                 "n_members"]


# --------------------------------------------------------------------------- results
@dataclass(frozen=True)
class FittedTransfer:
    """A transfer function fitted to one training set, shared by every core of a run.

    Attributes
    ----------
    name : str
    spec : TrainingSpec
    model : WA, WAPLS or MAT
        Fitted on the whole training set with ``n_components`` components.
    n_components : int
        Chosen by :func:`~proxies.calibration.crossval.choose_n_components` for WA-PLS, 1
        otherwise.
    skill : pandas.DataFrame
        Per number of components (``training/<name>_skill.parquet``).
    cv : pandas.DataFrame
        ``id, observed, predicted, residual, n_components`` cross-validated with the chosen
        number of components, plus ``predicted_c1 ...`` for every component of WA-PLS
        (``training/<name>_cv.parquet``).
    taxa : tuple of str
        Training taxa kept by the rare-taxa filter, in model column order.
    thresholds : (float, float)
        Squared-chord distances for "good" and "no close" analogues.
    rmsep : float
        RMSEP of the chosen model [target units].
    """

    name: str
    spec: TrainingSpec
    model: Any
    n_components: int
    skill: pd.DataFrame
    cv: pd.DataFrame
    taxa: tuple[str, ...]
    target_name: str
    units: str
    thresholds: tuple[float, float]
    rmsep: float
    training_x: np.ndarray = field(repr=False)
    training_y: np.ndarray = field(repr=False)
    training_percent: np.ndarray = field(repr=False)

    @property
    def reference(self) -> str:
        return MODEL_REFERENCES[self.spec.model]


@dataclass(frozen=True)
class CalibratedRecord:
    """One calibrated proxy of one core.

    ``values`` has shape (n, M): member m of the climate at ``depth_cm``; for overlap
    calibrations member m used age path m.
    """

    proxy: str
    variable: str
    units: str
    method: str
    reference: str
    depth_cm: np.ndarray
    values: np.ndarray


@dataclass(frozen=True)
class CalibrationResult:
    """Everything the calibration stage produced for one core.

    Attributes
    ----------
    records : list of CalibratedRecord
    skill : pandas.DataFrame
        ``calibration.parquet``: one row per proxy and period (:data:`SKILL_COLUMNS`).
    samples : pandas.DataFrame
        ``calibrated_samples.parquet``: ``depth_cm, proxy, variable, units, method,
        value_median, value_q025, value_q975, value_mean, value_sd``.
    diagnostics : pandas.DataFrame
        ``calibration_diagnostics.parquet``: fossil-sample analogue distances and missing taxa.
    warnings : list of str
    """

    records: list
    skill: pd.DataFrame
    samples: pd.DataFrame
    diagnostics: pd.DataFrame
    warnings: list


# --------------------------------------------------------------------------- transfer
def prepare_training(training: TrainingSet, spec: TrainingSpec):
    """Percentages, rare-taxa filter and transform of a training set.

    Returns
    -------
    x : ndarray (n_sites, n_kept)
        Transformed percentages of the kept taxa (model input).
    taxa : tuple of str
    percent : ndarray (n_sites, n_kept)
        Untransformed percentages of the kept taxa.
    """
    section = f"training.{training.name}"
    percent = counts_to_percentages(training.taxa)
    if percent.isna().any(axis=None):
        bad = [str(i) for i in training.ids[percent.isna().any(axis=1).to_numpy()]]
        raise InputError(Problem(spec.file, f"sites with no counts: {', '.join(bad[:10])}",
                                 "remove those sites or add their counts"))
    keep = rare_taxa_mask(percent.to_numpy(), spec.min_occurrences, spec.min_max_percent)
    if keep.sum() < 2:
        raise InputError(Problem(spec.file, "fewer than 2 taxa pass the rare-taxa filter",
                                 "lower min_occurrences or min_max_percent",
                                 column=f"{section}.min_occurrences"))
    kept = percent.loc[:, keep]
    if np.any(kept.to_numpy().sum(axis=1) <= 0):
        bad = [str(i) for i in training.ids[kept.to_numpy().sum(axis=1) <= 0]]
        raise InputError(Problem(spec.file, f"sites {', '.join(bad[:10])} hold only taxa "
                                 "removed by the rare-taxa filter",
                                 "lower min_occurrences or min_max_percent",
                                 column=f"{section}.min_max_percent"))
    x = np.asarray(transform_abundances(kept.to_numpy(), spec.transform), dtype=float)
    return x, tuple(map(str, kept.columns)), kept.to_numpy()


def prepare_fossil(counts: pd.DataFrame, fitted: FittedTransfer):
    """Fossil counts -> (model input x, kept-taxa percentages), aligned on the training taxa.

    Percentages are of each sample's full count (taxa absent from the training set included);
    training taxa the sample lacks are 0.
    """
    percent = counts_to_percentages(counts)
    aligned = percent.reindex(columns=list(fitted.taxa), fill_value=0.0).to_numpy(dtype=float)
    x = np.asarray(transform_abundances(aligned, fitted.spec.transform), dtype=float)
    return x, aligned


def _cross_validate(spec: TrainingSpec, training: TrainingSet, x, y, rng):
    estimator = spec.estimator()
    if spec.validation == "loo":
        return loo_predictions(estimator, x, y), None
    if spec.validation == "kfold":
        return kfold_predictions(estimator, x, y, spec.folds, rng), None
    if spec.validation == "hblock":
        if not training.has_coordinates:
            raise ValueError(f"training set '{training.name}' has no coordinates for h-block")
        return hblock_predictions(estimator, x, y, training.latitude, training.longitude,
                                  spec.hblock_km), None
    boot = bootstrap_predictions(estimator, x, y, spec.bootstrap_cycles, rng)
    return boot.predictions, boot.rmsep


def fit_transfer_function(training: TrainingSet, spec: TrainingSpec,
                          rng: np.random.Generator) -> FittedTransfer:
    """Fit, cross-validate and choose the transfer function of one training set.

    Parameters
    ----------
    training : TrainingSet
    spec : TrainingSpec
        Model, data preparation and validation scheme (``[training.<name>]``).
    rng : numpy.random.Generator
        For k-fold and bootstrap resampling.
    """
    x, taxa, percent = prepare_training(training, spec)
    y = training.target
    full = spec.estimator().fit(x, y)
    apparent = component_predictions(full, x)
    predicted, rmsep = _cross_validate(spec, training, x, y, rng)
    skill = skill_by_components(y, apparent, predicted, rmsep)
    n_components = choose_n_components(skill, spec.min_improvement) \
        if spec.model == "wapls" else 1
    skill.insert(0, "training", training.name)
    skill.insert(1, "model", spec.model)
    skill.insert(2, "validation", spec.validation)
    skill["chosen"] = skill["n_components"] == n_components
    model = spec.estimator(n_components).fit(x, y)
    cv = pd.DataFrame({"id": training.ids.astype(str), "observed": y,
                       "predicted": predicted[:, n_components - 1]})
    cv["residual"] = cv["predicted"] - cv["observed"]
    cv["n_components"] = n_components
    if predicted.shape[1] > 1:
        for a in range(predicted.shape[1]):
            cv[f"predicted_c{a + 1}"] = predicted[:, a]
    return FittedTransfer(
        name=training.name, spec=spec, model=model, n_components=n_components,
        skill=skill, cv=cv, taxa=taxa,
        target_name=spec.target_name or training.target_name, units=spec.units or training.units,
        thresholds=analogue_thresholds(percent, spec.analogue_percentiles),
        rmsep=float(skill.loc[skill["chosen"], "rmsep"].iloc[0]),
        training_x=x, training_y=y, training_percent=percent)


def _taxa_columns(core) -> list[str]:
    """Taxon columns of the counts table (``core.taxa`` when the core provides it)."""
    taxa = getattr(core, "taxa", None)
    if taxa is not None:
        return list(taxa)
    return [c for c in core.counts.columns
            if c not in NON_PROXY_COLUMNS and pd.api.types.is_numeric_dtype(core.counts[c])]


def _transfer_record(core, proxy: ProxyCalibration, fitted: FittedTransfer, ensemble, rng,
                     warnings):
    counts = core.counts
    if counts is None:
        return None  # the run config is shared by all cores; this one has no counts
    taxa_columns = _taxa_columns(core)
    table = counts[taxa_columns]
    depth = counts["depth_cm"].to_numpy(dtype=float)
    x, aligned = prepare_fossil(table, fitted)
    empty = ~(aligned.sum(axis=1) > 0)
    prediction = np.full(depth.size, np.nan)
    if np.any(~empty):
        prediction[~empty] = fitted.model.predict(x[~empty])
    error = np.full(depth.size, fitted.rmsep)
    spec = fitted.spec
    if spec.validation == "bootstrap" and np.any(~empty):
        boot = bootstrap_predictions(spec.estimator(fitted.n_components), fitted.training_x,
                                     fitted.training_y, spec.bootstrap_cycles, rng,
                                     X_new=x[~empty])
        error[~empty] = boot.new_errors[:, -1]
    values = prediction[:, None] + error[:, None] * rng.standard_normal((depth.size, ensemble))
    distance = nearest_analogue_distance(fitted.training_percent, aligned)
    quality = analogue_quality(distance, fitted.thresholds)
    quality = np.where(np.isfinite(distance), quality, "")
    missing = missing_taxa(table, fitted.taxa)
    diagnostics = pd.DataFrame({
        "depth_cm": depth, "proxy": COUNTS_KEY, "training": fitted.name,
        "prediction": prediction, "prediction_error": error,
        "nearest_analogue_distance": distance,
        "good_analogue_limit": fitted.thresholds[0], "no_analogue_limit": fitted.thresholds[1],
        "analogue_quality": quality,
        "missing_taxa_percent": missing["missing_taxa_percent"].to_numpy(),
        "n_missing_taxa": missing["n_missing_taxa"].to_numpy(),
    })
    if "source_row" in counts:
        diagnostics["source_row"] = counts["source_row"].to_numpy()
    n_none = int(np.sum(quality == "none"))
    if n_none:
        warnings.append(f"{n_none} of {depth.size} count samples have no close modern analogue "
                        f"in training set '{fitted.name}' (nearest squared-chord distance above "
                        f"{fitted.thresholds[1]:.3g}); treat their reconstructions with care")
    n_missing = int(np.sum(missing["missing_taxa_percent"].to_numpy() > 5.0))
    if n_missing:
        warnings.append(f"{n_missing} count samples have more than 5 % of their count in taxa "
                        f"absent from training set '{fitted.name}'")
    if np.any(empty):
        warnings.append(f"{int(empty.sum())} count samples hold none of the training taxa; "
                        "no reconstruction for them")
    perf = fitted.skill.loc[fitted.skill["chosen"]].iloc[0]
    skill = [{
        "period": "cross_validation", "status": "ok", "n_calibration": len(fitted.training_y),
        "r2": perf["r2_cv"], "rmse": perf["rmsep"], "calibration_error": fitted.rmsep,
        "n_components": fitted.n_components,
        "detail": f"{spec.model} on training set '{fitted.name}' ({spec.validation})",
    }]
    keep = ~empty
    record = CalibratedRecord(COUNTS_KEY, proxy.variable or fitted.target_name,
                              proxy.units or fitted.units, "transfer", fitted.reference,
                              depth[keep], values[keep])
    return record, skill, diagnostics


# --------------------------------------------------------------------------- equations
def _equation_record(proxy: ProxyCalibration, values, errors, ensemble, rng):
    if proxy.method == "equation":
        eq = published_equation(proxy.equation)
        shared = {}
        if eq.needs_seawater:
            shared["d18o_water_vsmow"] = Coefficient(proxy.seawater_d18o_vsmow,
                                                     proxy.seawater_d18o_error)
        residual = eq.residual_sd if proxy.residual_error is None else proxy.residual_error
        climate = invert_ensemble(values, errors, eq.climate_from_proxy, eq.coefficients,
                                  residual, ensemble, rng, shared)
        meta = (proxy.variable or eq.variable, proxy.units or eq.units,
                proxy.reference or eq.reference, eq.name)
        return climate, residual, meta
    if proxy.method == "linear":
        function, coefficients = climate_from_linear, {
            "slope": Coefficient(proxy.slope, proxy.slope_error),
            "intercept": Coefficient(proxy.intercept, proxy.intercept_error)}
        detail = f"proxy = {proxy.slope:g} {proxy.variable} + {proxy.intercept:g}"
    else:
        function, coefficients = climate_from_exponential, {
            "prefactor": Coefficient(proxy.prefactor, proxy.prefactor_error),
            "exponent": Coefficient(proxy.exponent, proxy.exponent_error)}
        detail = f"proxy = {proxy.prefactor:g} exp({proxy.exponent:g} {proxy.variable})"
    residual = proxy.residual_error or 0.0
    climate = invert_ensemble(values, errors, function, coefficients, residual, ensemble, rng)
    meta = (proxy.variable, proxy.units or "", proxy.reference or "user-defined", detail)
    return climate, residual, meta


# --------------------------------------------------------------------------- overlap
def _sample_limits(samples: pd.DataFrame):
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


def _overlap_record(core, chronology, proxy: ProxyCalibration, rows, values, ensemble,
                    instrumental, rng, warnings):
    if proxy.series not in instrumental:
        raise KeyError(f"[calibration.{proxy.column}] names instrumental series "
                       f"'{proxy.series}', which was not loaded")
    series: InstrumentalSeries = instrumental[proxy.series]
    if chronology is None:
        raise ValueError(f"[calibration.{proxy.column}] uses the instrumental overlap, which "
                         "needs the core's age ensemble; no chronology was given")
    samples = core.samples.loc[rows]
    top, bottom = _sample_limits(core.samples)
    top, bottom = top[rows], bottom[rows]
    depth = samples["depth_cm"].to_numpy(dtype=float)
    n = depth.size
    ages = np.asarray(chronology.age_at(np.concatenate([top, bottom, depth])), dtype=float)
    if ages.shape[1] != ensemble:
        raise ValueError(f"chronology has {ages.shape[1]} members, calibration asked for "
                         f"{ensemble}")
    age_top, age_bottom, age_mid = ages[:n], ages[n:2 * n], ages[2 * n:]
    climate = aggregate_windows(series, 1950.0 - age_top, 1950.0 - age_bottom,
                                proxy.min_coverage)
    result = calibrate_overlap(values, climate, age_mid, proxy.fit, rng, proxy.error_ratio,
                               proxy.min_pairs)
    variable = proxy.variable or series.variable
    units = proxy.units or series.units
    detail = f"{proxy.fit} fit against instrumental series '{series.name}'"
    skill = []
    status = "ok"
    if result.skill["n_members"].iloc[0] == 0:
        status = "refused"
        warnings.append(f"{proxy.column}: fewer than {proxy.min_pairs} samples overlap "
                        f"instrumental series '{series.name}' in every age member; not "
                        "calibrated")
    elif not result.has_skill:
        status = "refused" if proxy.on_no_skill == "refuse" else "no_skill"
        re = result.skill.loc[result.skill["period"] != "full", "re"].to_numpy()
        warnings.append(
            f"{proxy.column}: split-period verification against '{series.name}' shows no skill "
            f"(median RE = {', '.join(f'{v:.2f}' for v in re)}; RE <= 0 means the calibration "
            "mean predicts better); "
            + ("the record was NOT calibrated (set on_no_skill = \"warn\" to override)"
               if status == "refused" else "calibrated anyway because on_no_skill = \"warn\""))
    for row in result.skill.to_dict("records"):
        row["status"] = status
        row["detail"] = detail
        row["calibration_error"] = np.nan
        skill.append(row)
    meta = (variable, units, OVERLAP_REFERENCE, detail)
    if status == "refused":
        return None, skill, meta
    return result.values, skill, meta


# --------------------------------------------------------------------------- the stage
def _summaries(record: CalibratedRecord, source_rows):
    v = record.values
    with _warnings.catch_warnings():
        _warnings.simplefilter("ignore", RuntimeWarning)
        q = np.nanquantile(v, [0.5, 0.025, 0.975], axis=1) if v.size else np.zeros((3, 0))
        mean = np.nanmean(v, axis=1) if v.size else np.zeros(0)
        sd = np.nanstd(v, axis=1, ddof=1) if v.size else np.zeros(0)
    table = pd.DataFrame({
        "depth_cm": record.depth_cm, "proxy": record.proxy, "variable": record.variable,
        "units": record.units, "method": record.method, "value_median": q[0],
        "value_q025": q[1], "value_q975": q[2], "value_mean": mean, "value_sd": sd,
    })
    if source_rows is not None:
        table["source_row"] = source_rows
    return table


def calibrate_core(core, chronology, settings: CalibrationSettings,
                   transfer: Mapping[str, FittedTransfer],
                   instrumental: Mapping[str, InstrumentalSeries], ensemble: int,
                   rng: np.random.Generator) -> CalibrationResult:
    """Calibrate every configured proxy of one core into climate ensembles.

    Parameters
    ----------
    core : proxies.cores.Core
        Uses ``core.id``, ``core.samples`` (``depth_cm``, optional ``thickness_cm``, proxy
        columns, ``<proxy>_error``, ``source_row``) and ``core.counts``.
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
    samples = core.samples
    records, skill_rows, sample_tables, diag_tables, warnings = [], [], [], [], []
    for proxy in settings.proxies:
        base = {"proxy": proxy.column, "method": proxy.method}
        if proxy.method == "transfer":
            if proxy.training not in transfer:
                raise KeyError(f"[calibration.{proxy.column}] names training set "
                               f"'{proxy.training}', which was not fitted")
            fitted = transfer[proxy.training]
            out = _transfer_record(core, proxy, fitted, ensemble, rng, warnings)
            if out is None:
                continue
            record, skill, diagnostics = out
            records.append(record)
            for row in skill:
                skill_rows.append({**base, "variable": record.variable, "units": record.units,
                                   "reference": record.reference, **row})
            diag_tables.append(diagnostics)
            src = core.counts["source_row"].to_numpy()[
                np.isin(core.counts["depth_cm"].to_numpy(float), record.depth_cm)] \
                if "source_row" in core.counts else None
            sample_tables.append(_summaries(record, src))
            continue
        if proxy.column not in samples:
            continue  # the run config is shared by all cores; this one lacks the proxy
        values_all = samples[proxy.column].to_numpy(dtype=float)
        rows = np.flatnonzero(np.isfinite(values_all))
        if rows.size == 0:
            warnings.append(f"core {core.id}: column '{proxy.column}' is empty; skipped")
            continue
        values = values_all[rows]
        error_column = f"{proxy.column}_error"
        errors = samples[error_column].to_numpy(dtype=float)[rows] if error_column in samples \
            else np.zeros(rows.size)
        depth = samples["depth_cm"].to_numpy(dtype=float)[rows]
        if proxy.method == "overlap":
            climate, skill, (variable, units, reference, detail) = _overlap_record(
                core, chronology, proxy, rows, values, ensemble, instrumental, rng, warnings)
            for row in skill:
                skill_rows.append({**base, "variable": variable, "units": units,
                                   "reference": reference, **row})
        else:
            climate, residual, (variable, units, reference, detail) = _equation_record(
                proxy, values, errors, ensemble, rng)
            skill_rows.append({**base, "variable": variable, "units": units,
                               "reference": reference, "detail": detail, "period": "published",
                               "status": "ok", "calibration_error": residual})
            n_bad = int(np.sum(np.all(~np.isfinite(climate), axis=1)))
            if n_bad:
                warnings.append(f"{proxy.column}: {n_bad} samples lie outside the domain of "
                                f"'{detail}' and gave no value")
        if climate is None:
            continue
        record = CalibratedRecord(proxy.column, variable, units, proxy.method, reference, depth,
                                  climate)
        records.append(record)
        src = samples["source_row"].to_numpy()[rows] if "source_row" in samples else None
        sample_tables.append(_summaries(record, src))
    skill = pd.DataFrame(skill_rows).reindex(columns=SKILL_COLUMNS)
    sample_table = pd.concat(sample_tables, ignore_index=True) if sample_tables else \
        pd.DataFrame(columns=["depth_cm", "proxy", "variable", "units", "method", "value_median",
                              "value_q025", "value_q975", "value_mean", "value_sd"])
    diagnostics = pd.concat(diag_tables, ignore_index=True) if diag_tables else pd.DataFrame(
        columns=["depth_cm", "proxy", "training", "prediction", "prediction_error",
                 "nearest_analogue_distance", "good_analogue_limit", "no_analogue_limit",
                 "analogue_quality", "missing_taxa_percent", "n_missing_taxa"])
    return CalibrationResult(records, skill, sample_table, diagnostics, warnings)
