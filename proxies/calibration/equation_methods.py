"""Calibration methods on single proxy columns: published equations, user-defined linear and
exponential forms, and series already in climate units (``stated``).

Each function is ``calibrate(settings, inputs) -> MethodResult`` (see :mod:`.records`).
"""

from __future__ import annotations

import numpy as np

from .equations import (Coefficient, climate_from_exponential, climate_from_linear,
                        published_equation)
from .inversion import invert_ensemble, split_error_draws
from .records import CalibratedRecord, CoreInputs, MethodResult, proxy_column
from .settings import (EquationCalibration, ExponentialCalibration, LinearCalibration,
                       StatedCalibration)

__all__ = ["calibrate_equation", "calibrate_linear", "calibrate_exponential",
           "calibrate_stated", "outside_range_flags", "EQUATION_SHARED_FRACTION"]

#: default share of a published equation's total error variance that is systematic for a
#: core (site and species offsets dominate; the papers do not split it: our choice)
EQUATION_SHARED_FRACTION = 0.5


def outside_range_flags(proxy, climate, proxy_range, climate_range) -> np.ndarray:
    """True where the proxy value or the median climate lies outside a calibrated range."""
    proxy = np.asarray(proxy, dtype=float)
    with np.errstate(invalid="ignore"):
        median = np.nanmedian(climate, axis=1) if climate.size and np.isfinite(climate).any() \
            else np.full(proxy.size, np.nan)
    flags = np.zeros(proxy.size, dtype=bool)
    for values, bounds in ((proxy, proxy_range), (median, climate_range)):
        if bounds is not None:
            flags |= (values < bounds[0]) | (values > bounds[1])
    return flags


def _finish(settings, column, climate, meta, residual, proxy_range, climate_range,
            companion=""):
    variable, units, reference, detail = meta
    flags = outside_range_flags(column.values, climate, proxy_range, climate_range)
    warnings = []
    n_bad = int(np.sum(np.all(~np.isfinite(climate), axis=1)))
    if n_bad:
        warnings.append(f"{settings.column}: {n_bad} samples lie outside the domain of "
                        f"'{detail}' and gave no value")
    if flags.any():
        where = ", ".join(f"{d:g}" for d in column.depth_cm[flags][:8])
        hint = f"; consider {companion}" if companion else ""
        warnings.append(f"{settings.column}: {int(flags.sum())} samples (at {where} cm"
                        f"{' ...' if flags.sum() > 8 else ''}) lie outside the range "
                        f"'{detail}' was calibrated on{hint}; they are flagged "
                        "(outside_calibration_range)")
    if column.n_in_event_layers:
        warnings.append(f"{settings.column}: {column.n_in_event_layers} samples inside event "
                        "layers were left out (event_layer_samples = \"keep\" uses them)")
    record = CalibratedRecord(settings.column, variable, units, settings.method, reference,
                              column.depth_cm, climate, flags, column.source_row)
    skill = [{"variable": variable, "units": units, "reference": reference, "detail": detail,
              "period": "published", "status": "ok", "calibration_error": residual,
              "n_outside_range": int(flags.sum())}]
    return MethodResult(record, skill, None, warnings)


def _column(settings, inputs: CoreInputs):
    column = proxy_column(inputs.core, settings.column, settings.event_layer_samples == "keep")
    if column is None:
        return None, MethodResult(None)  # the run config is shared; this core lacks the proxy
    if column.values.size == 0:
        return None, MethodResult(None, warnings=[
            f"core {inputs.core.id}: column '{settings.column}' has no usable value; skipped"])
    return column, None


def calibrate_equation(settings: EquationCalibration, inputs: CoreInputs) -> MethodResult:
    """A published equation with its total error, ``shared_error_fraction`` of it systematic."""
    column, empty = _column(settings, inputs)
    if column is None:
        return empty
    eq = published_equation(settings.equation)
    shared = {}
    if eq.needs_seawater:
        shared["d18o_water_vsmow"] = Coefficient(settings.seawater_d18o_vsmow,
                                                 settings.seawater_d18o_error)
    residual = eq.residual_sd if settings.residual_error is None else settings.residual_error
    fraction = EQUATION_SHARED_FRACTION if settings.shared_error_fraction is None \
        else settings.shared_error_fraction
    climate = invert_ensemble(column.values, column.errors, eq.climate_from_proxy,
                              eq.coefficients, residual, inputs.ensemble, inputs.rng, shared,
                              shared_fraction=fraction)
    meta = (settings.variable or eq.variable, settings.units or eq.units,
            settings.reference or eq.reference, eq.name)
    return _finish(settings, column, climate, meta, residual, eq.proxy_range, eq.climate_range,
                   eq.companion)


def _user_form(settings, inputs, function, coefficients, detail):
    column, empty = _column(settings, inputs)
    if column is None:
        return empty
    climate = invert_ensemble(column.values, column.errors, function, coefficients,
                              settings.residual_error, inputs.ensemble, inputs.rng,
                              shared_fraction=settings.shared_fraction(),
                              correlation=settings.coefficient_correlation)
    meta = (settings.variable, settings.units or "", settings.reference or "user-defined",
            detail)
    return _finish(settings, column, climate, meta, settings.residual_error,
                   settings.proxy_range, settings.climate_range)


def calibrate_linear(settings: LinearCalibration, inputs: CoreInputs) -> MethodResult:
    """``proxy = slope climate + intercept``, inverted, with its coefficient errors."""
    coefficients = {"slope": Coefficient(settings.slope, settings.slope_error),
                    "intercept": Coefficient(settings.intercept, settings.intercept_error)}
    detail = f"proxy = {settings.slope:g} {settings.variable} + {settings.intercept:g}"
    return _user_form(settings, inputs, climate_from_linear, coefficients, detail)


def calibrate_exponential(settings: ExponentialCalibration, inputs: CoreInputs) -> MethodResult:
    """``proxy = prefactor exp(exponent climate)``, inverted, with its coefficient errors."""
    coefficients = {"prefactor": Coefficient(settings.prefactor, settings.prefactor_error),
                    "exponent": Coefficient(settings.exponent, settings.exponent_error)}
    detail = f"proxy = {settings.prefactor:g} exp({settings.exponent:g} {settings.variable})"
    return _user_form(settings, inputs, climate_from_exponential, coefficients, detail)


def calibrate_stated(settings: StatedCalibration, inputs: CoreInputs) -> MethodResult:
    """A series already in climate units: value + independent error + shared error.

    The independent 1-sigma error is the ``<column>_error`` cell where given, else ``error``;
    ``shared_error`` is drawn once per member (e.g. the source record's calibration offset).
    """
    column, empty = _column(settings, inputs)
    if column is None:
        return empty
    errors = np.where(column.errors > 0, column.errors, settings.error)
    n, m = column.values.size, inputs.ensemble
    climate = column.values[:, None] + split_error_draws(n, m, errors, 0.0, inputs.rng) \
        + split_error_draws(n, m, settings.shared_error, 1.0, inputs.rng)
    meta = (settings.variable, settings.units or "", settings.reference or "as stated",
            "already in climate units")
    return _finish(settings, column, climate, meta, settings.shared_error, None, None)
