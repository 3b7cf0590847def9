"""Transfer functions: fitted once per run on a training set, applied to each core's counts.

:func:`fit_transfer_function` is the seam the pipeline calls per training set;
:func:`calibrate_transfer` is the ``transfer`` method of the calibration registry.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from proxies.problems import InputError, Problem

from .assemblage import counts_to_percentages, rare_taxa_mask, transform_abundances
from .crossval import (bootstrap_predictions, choose_n_components, component_predictions,
                       hblock_predictions, kfold_predictions, loo_predictions,
                       skill_by_components)
from .data import TrainingSet
from .diagnostics import (analogue_quality, analogue_thresholds, missing_taxa,
                          nearest_analogue_distance)
from .inversion import split_error_draws
from .records import CalibratedRecord, CoreInputs, MethodResult, in_event_layers
from .settings import COUNTS_KEY, TransferCalibration
from .significance import choose_by_randomisation, component_p_values, random_variable_test
from .training_settings import TrainingSpec

__all__ = ["FittedTransfer", "prepare_training", "prepare_fossil", "fit_transfer_function",
           "calibrate_transfer", "MODEL_REFERENCES", "TRANSFER_SHARED_FRACTION"]

MODEL_REFERENCES = {
    "wa": "Birks et al. (1990), Phil. Trans. R. Soc. B 327:263, doi:10.1098/rstb.1990.0062",
    "wapls": "ter Braak & Juggins (1993), Hydrobiologia 269:485, doi:10.1007/BF00028046",
    "mat": "Overpeck et al. (1985), Quat. Res. 23:87, doi:10.1016/0033-5894(85)90074-2",
}
#: default share of the residual prediction error (bootstrap s2, or RMSEP) that is shared by
#: every sample of a member: a lake's own offset from the training sites (our choice)
TRANSFER_SHARED_FRACTION = 0.5


@dataclass(frozen=True)
class FittedTransfer:
    """A transfer function fitted to one training set, once per run by
    :func:`fit_transfer_function`, and shared by every core of the run.

    Attributes
    ----------
    name : str
    spec : TrainingSpec
    model : WA, WAPLS or MAT
        Fitted on the whole training set with ``n_components`` components.
    n_components : int
        Chosen by ``spec.component_rule`` for WA-PLS, 1 otherwise.
    skill : pandas.DataFrame
        Per number of components (``training/<name>_skill.parquet``), with the randomisation
        t-test p-value against one component fewer (``randomisation_p``).
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
    percent = counts_to_percentages(training.taxa)
    if percent.isna().any(axis=None):
        bad = [str(i) for i in training.ids[percent.isna().any(axis=1).to_numpy()]]
        raise InputError(Problem(spec.file, f"sites with no counts: {', '.join(bad[:10])}",
                                 "remove those sites or add their counts"))
    keep = rare_taxa_mask(percent.to_numpy(), spec.min_occurrences, spec.min_max_percent)
    if keep.sum() < 2:
        raise InputError(Problem(spec.file, "fewer than 2 taxa pass the rare-taxa filter",
                                 "lower min_occurrences or min_max_percent",
                                 column=f"training.{training.name}.min_occurrences"))
    kept = percent.loc[:, keep]
    if np.any(kept.to_numpy().sum(axis=1) <= 0):
        bad = [str(i) for i in training.ids[kept.to_numpy().sum(axis=1) <= 0]]
        raise InputError(Problem(spec.file, f"sites {', '.join(bad[:10])} hold only taxa "
                                 "removed by the rare-taxa filter",
                                 "lower min_occurrences or min_max_percent",
                                 column=f"training.{training.name}.min_max_percent"))
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


def _choose_components(spec: TrainingSpec, skill: pd.DataFrame, p_values) -> int:
    if spec.model != "wapls":
        return 1
    by_improvement = choose_n_components(skill, spec.min_improvement)
    by_test = choose_by_randomisation(p_values, spec.randomisation_alpha)
    return {"improvement": by_improvement, "randomisation": by_test,
            "improvement_and_randomisation": min(by_improvement, by_test)}[spec.component_rule]


def fit_transfer_function(training: TrainingSet, spec: TrainingSpec,
                          rng: np.random.Generator) -> FittedTransfer:
    """Fit, cross-validate and choose the transfer function of one training set.

    The number of WA-PLS components follows ``spec.component_rule``: a further component must
    cut RMSEP by ``min_improvement`` (Birks 1998), be significantly better in van der Voet's
    (1994) randomisation t-test, or both; the skill table reports both.

    Parameters
    ----------
    training : TrainingSet
    spec : TrainingSpec
        Model, data preparation and validation scheme (``[training.<name>]``).
    rng : numpy.random.Generator
        For k-fold and bootstrap resampling and the randomisation test.
    """
    x, taxa, percent = prepare_training(training, spec)
    y = training.target
    full = spec.estimator().fit(x, y)
    apparent = component_predictions(full, x)
    predicted, rmsep = _cross_validate(spec, training, x, y, rng)
    skill = skill_by_components(y, apparent, predicted, rmsep)
    p_values = component_p_values(y, predicted, spec.randomisation_cycles, rng)
    skill["randomisation_p"] = p_values
    n_components = _choose_components(spec, skill, p_values)
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


def _ensemble(fitted: FittedTransfer, settings, x, keep, ensemble, rng):
    """Predictions and their (n, M) ensemble: the bootstrap model error s1_j is shared by all
    samples of a member, the residual error s2 (RMSEP without bootstrap) split by
    ``shared_error_fraction``."""
    n = x.shape[0]
    prediction = np.full(n, np.nan)
    model_error = np.zeros(n)
    residual = fitted.rmsep
    if np.any(keep):
        prediction[keep] = fitted.model.predict(x[keep])
    spec = fitted.spec
    if spec.validation == "bootstrap" and np.any(keep):
        boot = bootstrap_predictions(spec.estimator(fitted.n_components), fitted.training_x,
                                     fitted.training_y, spec.bootstrap_cycles, rng,
                                     X_new=x[keep])
        residual = float(boot.s2[-1])
        model_error[keep] = np.sqrt(np.maximum(boot.new_errors[:, -1] ** 2 - residual ** 2, 0))
    fraction = TRANSFER_SHARED_FRACTION if settings.shared_error_fraction is None \
        else settings.shared_error_fraction
    values = prediction[:, None] + model_error[:, None] * rng.standard_normal((1, ensemble)) \
        + split_error_draws(n, ensemble, residual, fraction, rng)
    return prediction, np.sqrt(model_error ** 2 + residual ** 2), values


def _diagnostics(fitted, table, depth, prediction, error, aligned, counts):
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
    return diagnostics, quality, missing


def _significance_row(fitted, x, prediction, keep, rng) -> dict:
    n_random = fitted.spec.significance_cycles
    if not n_random or keep.sum() < 3:
        return {}
    test = random_variable_test(fitted.spec.estimator(fitted.n_components), fitted.training_x,
                                x[keep], prediction[keep], n_random, rng)
    return {"period": "random_variable_test", "status": "ok",
            "n_calibration": len(fitted.training_y), "n_verification": int(keep.sum()),
            "variance_explained": test.explained, "first_axis_explained": test.first_axis,
            "random_variance_explained_q95": float(np.quantile(test.random_explained, 0.95)),
            "p_value": test.p_value, "n_components": fitted.n_components,
            "detail": f"{n_random} random environmental variables (Telford & Birks 2011)"}


def calibrate_transfer(settings: TransferCalibration, inputs: CoreInputs) -> MethodResult:
    """Reconstruct a core's assemblage counts with a fitted transfer function.

    Adds fossil diagnostics (analogue distance, missing taxa) and, per core, the
    random-environmental-variable significance test (Telford & Birks 2011).
    """
    if settings.training not in inputs.transfer:
        raise KeyError(f"[calibration.{settings.column}] names training set "
                       f"'{settings.training}', which was not fitted")
    fitted = inputs.transfer[settings.training]
    counts = inputs.core.counts
    if counts is None:
        return MethodResult(None)  # the run config is shared by all cores; this one has none
    table = counts[list(inputs.core.taxa)]
    depth = counts["depth_cm"].to_numpy(dtype=float)
    x, aligned = prepare_fossil(table, fitted)
    inside = in_event_layers(depth, inputs.core.event_layers)
    keep_events = settings.event_layer_samples == "keep"
    keep = (aligned.sum(axis=1) > 0) & (keep_events | ~inside)
    prediction, error, values = _ensemble(fitted, settings, x, keep, inputs.ensemble,
                                          inputs.rng)
    diagnostics, quality, missing = _diagnostics(fitted, table, depth, prediction, error,
                                                 aligned, counts)
    warnings = []
    n_none = int(np.sum(quality[keep] == "none"))
    if n_none:
        warnings.append(f"{n_none} of {int(keep.sum())} count samples have no close modern "
                        f"analogue in training set '{fitted.name}' (nearest squared-chord "
                        f"distance above {fitted.thresholds[1]:.3g}); treat their "
                        "reconstructions with care")
    n_missing = int(np.sum(missing["missing_taxa_percent"].to_numpy() > 5.0))
    if n_missing:
        warnings.append(f"{n_missing} count samples have more than 5 % of their count in taxa "
                        f"absent from training set '{fitted.name}'")
    n_empty = int(np.sum(~(aligned.sum(axis=1) > 0)))
    if n_empty:
        warnings.append(f"{n_empty} count samples hold none of the training taxa; no "
                        "reconstruction for them")
    if not keep_events and np.any(inside):
        warnings.append(f"{int(inside.sum())} count samples inside event layers were left out "
                        "(event_layer_samples = \"keep\" uses them)")
    perf = fitted.skill.loc[fitted.skill["chosen"]].iloc[0]
    variable = settings.variable or fitted.target_name
    units = settings.units or fitted.units
    common = {"variable": variable, "units": units, "reference": fitted.reference}
    skill = [{**common, "period": "cross_validation", "status": "ok",
              "n_calibration": len(fitted.training_y), "r2": perf["r2_cv"],
              "rmse": perf["rmsep"], "calibration_error": fitted.rmsep,
              "n_components": fitted.n_components,
              "detail": f"{fitted.spec.model} on training set '{fitted.name}' "
                        f"({fitted.spec.validation})"}]
    significance = _significance_row(fitted, x, prediction, keep, inputs.rng)
    if significance:
        skill.append({**common, **significance})
        if significance["p_value"] > 0.05:
            warnings.append(f"the reconstruction from training set '{fitted.name}' explains no "
                            "more of the fossil assemblages' variance than reconstructions of "
                            f"random variables (p = {significance['p_value']:.2f}, Telford & "
                            "Birks 2011)")
    source = counts["source_row"].to_numpy()[keep] if "source_row" in counts else None
    record = CalibratedRecord(COUNTS_KEY, variable, units, "transfer", fitted.reference,
                              depth[keep], values[keep], quality[keep] == "none", source)
    return MethodResult(record, skill, diagnostics, warnings)
