"""A dated series (age and value, e.g. a published ice-core or speleothem record) as an
ensemble on the regular grid, so that it enters events, the stack and lead/lag like a core's
reconstruction.

Age uncertainty is stated, not modelled from dates: either a given age ensemble, or a
one-sigma error ``age_sd_yr + age_sd_fraction * age`` [yr]. Without an ensemble the error of
member ``m`` is ``z_m (age_sd_yr + age_sd_fraction * age)`` with one standard normal ``z_m``
per member: fully correlated along the record, as for a layer-counted timescale whose error
accumulates with depth (our stated assumption; it keeps every member's ages in order). Each
member's samples are then averaged into the grid cells (:func:`proxies.reconstruction.grid.bin_means`).
"""

from __future__ import annotations

import numpy as np

from proxies.reconstruction.grid import (auto_grid_step_yr, bin_means, median_sample_spacing_yr,
                                         regular_grid)
from proxies.reconstruction.settings import ReconstructionSettings
from proxies.reconstruction.stage import (GridSeries, ReconstructionResult, _ensemble_table, _series_table,
                                          filled_share)

__all__ = ["age_ensemble", "dated_series_on_grid", "dated_series_result"]


def age_ensemble(age_yr: np.ndarray, n_members: int, rng: np.random.Generator, age_sd_yr: float = 0.0,
                 age_sd_fraction: float = 0.0) -> np.ndarray:
    """Member ages (n, M) from a stated one-sigma age error (see the module docstring).

    Parameters
    ----------
    age_yr : ndarray (n,)
        Ages [yr BP], increasing.
    n_members : int
    rng : numpy.random.Generator
    age_sd_yr : float
        Constant part of the one-sigma error [yr].
    age_sd_fraction : float
        Part proportional to age (0.01 = 1 % of the age).
    """
    age = np.asarray(age_yr, dtype=float)
    if age_sd_yr < 0 or age_sd_fraction < 0:
        raise ValueError("age errors must be >= 0")
    sd = age_sd_yr + age_sd_fraction * np.abs(age)
    return age[:, None] + sd[:, None] * rng.standard_normal(n_members)[None, :]


def dated_series_on_grid(name: str, age_yr: np.ndarray, value: np.ndarray, rng: np.random.Generator,
                         n_members: int = 200, age_sd_yr: float = 0.0, age_sd_fraction: float = 0.0,
                         member_ages: np.ndarray | None = None, step_yr: float | None = None,
                         units: str = "") -> GridSeries:
    """A dated series as a gridded ensemble.

    Parameters
    ----------
    name : str
        Variable name of the series (e.g. ``temperature``).
    age_yr, value : ndarray (n,)
        Sample ages [yr BP] and values.
    rng : numpy.random.Generator
        Draws the age ensemble.
    n_members : int
        Members drawn when no ensemble is given.
    age_sd_yr, age_sd_fraction : float
        Stated age error (see :func:`age_ensemble`).
    member_ages : ndarray (n, M), optional
        A given age ensemble (then ``n_members`` and the stated errors are not used).
    step_yr : float, optional
        Grid step [yr]; default the record's median spacing rounded to a standard step
        (:func:`proxies.reconstruction.grid.auto_grid_step_yr`).
    units : str

    Returns
    -------
    GridSeries
        ``values`` (T, M) cell means per member; ``anomalies`` relative to each member's mean
        over the record; reference kind ``record``.
    """
    age = np.asarray(age_yr, dtype=float)
    value = np.asarray(value, dtype=float)
    if age.shape != value.shape or age.ndim != 1:
        raise ValueError("age and value must be 1-D arrays of equal length")
    ages = (np.asarray(member_ages, dtype=float) if member_ages is not None
            else age_ensemble(age, n_members, rng, age_sd_yr, age_sd_fraction))
    if ages.shape[0] != age.size:
        raise ValueError("member_ages must have one row per sample")
    young, old = float(np.nanmin(ages)), float(np.nanmax(ages))
    step = step_yr or auto_grid_step_yr(median_sample_spacing_yr(age), old - young)
    grid = regular_grid(young, old, step)
    values, counts = bin_means(ages, np.broadcast_to(value[:, None], ages.shape), grid)
    keep = np.isfinite(values).any(axis=1)
    grid, values, counts = grid[keep], values[keep], counts[keep]
    with np.errstate(invalid="ignore"):
        reference = np.nanmean(values, axis=0)
    n_samples = np.median(counts, axis=1).astype(np.int64) if counts.ndim == 2 else counts
    return GridSeries(variable=name, units=units, age_cal_bp=grid, values=values,
                      anomalies=values - reference[None, :], n_samples=n_samples,
                      reference_window=(young, old), reference_kind="record", proxy=name,
                      climate_variable=name)


def dated_series_result(name: str, age_yr: np.ndarray, value: np.ndarray, rng: np.random.Generator,
                        reconstruction: ReconstructionSettings, n_members: int = 200, age_sd_yr: float = 0.0,
                        age_sd_fraction: float = 0.0, member_ages: np.ndarray | None = None,
                        step_yr: float | None = None, variable: str | None = None,
                        units: str = "") -> ReconstructionResult:
    """A dated series as the reconstruction of a one-record "core" named ``name``, so that it
    goes through events, the stack and lead/lag exactly like a core's reconstruction.

    Parameters
    ----------
    name : str
        The series' name (its id in the run: its folder, its rows in the run tables).
    age_yr, value, rng, n_members, age_sd_yr, age_sd_fraction, member_ages, step_yr, units
        See :func:`dated_series_on_grid`.
    reconstruction : ReconstructionSettings
        ``min_member_share`` (bands) and ``min_filled_share`` (thin record).
    variable : str, optional
        Climate variable (default ``name``): series and cores of one variable are stacked
        together.

    Returns
    -------
    ReconstructionResult
        One series keyed by the variable; the table and ensemble have the columns of a core's
        ``reconstruction.parquet`` / ``reconstruction_ensemble.parquet``.
    """
    variable = variable or name
    series = dated_series_on_grid(variable, age_yr, value, rng, n_members, age_sd_yr, age_sd_fraction,
                                  member_ages, step_yr, units)
    share = filled_share(series, reconstruction.min_member_share)
    warnings, thin = [], []
    if share < reconstruction.min_filled_share:
        thin.append(variable)
        warnings.append(f"{variable}: values cover only {share:.0%} of the record's age span")
    step = float(np.median(np.diff(series.age_cal_bp))) if series.age_cal_bp.size > 1 else float("nan")
    notes = [f"dated series: {age_yr.size} samples, {series.values.shape[1]} members, grid step {step:g} yr"]
    table = _series_table(series, reconstruction.min_member_share)
    return ReconstructionResult(name, table, {variable: series}, _ensemble_table({variable: series}),
                                warnings, notes, {variable: share}, thin)
