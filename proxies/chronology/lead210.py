"""210Pb dating of recent sediment: the CRS and CIC models with Monte Carlo errors.

Unsupported ("excess") 210Pb is the total activity minus the supported part (in equilibrium
with 226Ra: measured 226Ra per sample, or the mean total activity of the deepest samples,
where the excess has decayed: the "background"). With decay constant
lambda = ln 2 / 22.23 yr^-1 (Appleby & Oldfield 1978):

- CRS (constant rate of supply): the excess inventory below cumulative dry mass m,
  A(m) = integral_m^inf C(m') dm', decays like the sediment's age, so
  t(m) = ln(A(0) / A(m)) / lambda;
- CIC (constant initial concentration): every layer started with the same excess activity
  C0, so t(m) = ln(C0 / C(m)) / lambda, C0 taken from a least-squares fit of ln C against m
  (its intercept).

The inventory is integrated by the trapezoid rule over the samples' cumulative dry mass (from
0 at the surface, where the excess is taken equal to the first sample's); below the deepest
sample with excess the tail is extrapolated with the fitted exponential (C_last / slope).
Errors: the activities are drawn from normals with their 1-sigma errors (``draws`` times) and
the ages recomputed; the ages of one core are therefore strongly correlated (they share the
inventory), which the age model does not know (see the README's caution).

References
----------
Appleby PG, Oldfield F (1978). The calculation of lead-210 dates assuming a constant rate of
supply of unsupported 210Pb to the sediment. Catena 5(1), 1-8.
doi:10.1016/S0341-8162(78)80002-2
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["PB210_HALF_LIFE_YR", "PB210_DECAY_PER_YR", "crs_ages", "cic_ages", "excess_activity", "lead210_ages"]

#: half-life of 210Pb [yr] (Appleby & Oldfield 1978)
PB210_HALF_LIFE_YR = 22.23
#: decay constant [1/yr]
PB210_DECAY_PER_YR = np.log(2.0) / PB210_HALF_LIFE_YR
MODELS = ("crs", "cic")


def _log_fit(mass, excess):
    """Slope b and intercept of ln C = intercept - b m over the samples with excess > 0."""
    keep = excess > 0
    if keep.sum() < 2:
        raise ValueError("210Pb dating needs at least two samples with unsupported activity")
    slope, intercept = np.polyfit(mass[keep], np.log(excess[keep]), 1)
    return -slope, intercept


def crs_ages(mass_g_cm2, excess_bq_kg) -> np.ndarray:
    """CRS ages [yr before collection] of each sample (NaN where no excess is left).

    Parameters
    ----------
    mass_g_cm2 : array_like, shape (n,)
        Cumulative dry mass at each sample [g cm-2], increasing.
    excess_bq_kg : array_like, shape (n,)
        Unsupported 210Pb activity [Bq kg-1].
    """
    m = np.asarray(mass_g_cm2, dtype=float)
    c = np.asarray(excess_bq_kg, dtype=float)
    positive = np.flatnonzero(c > 0)
    last = positive[-1] if positive.size else -1
    slope, _ = _log_fit(m, c)
    tail = c[last] / slope if slope > 0 else 0.0
    # inventory between the surface and each sample (trapezoid; C at m = 0 taken as C of sample 0)
    grid = np.concatenate([[0.0], m[: last + 1]])
    values = np.concatenate([[c[0]], np.maximum(c[: last + 1], 0.0)])
    above = np.concatenate([[0.0], np.cumsum(np.diff(grid) * 0.5 * (values[1:] + values[:-1]))])[1:]
    total = above[-1] + tail
    ages = np.full(m.size, np.nan)
    remaining = total - above
    ages[: last + 1] = np.log(total / remaining) / PB210_DECAY_PER_YR
    return ages


def cic_ages(mass_g_cm2, excess_bq_kg) -> np.ndarray:
    """CIC ages [yr before collection]: ln(C0 / C) / lambda, C0 from the log-linear fit."""
    m = np.asarray(mass_g_cm2, dtype=float)
    c = np.asarray(excess_bq_kg, dtype=float)
    _, intercept = _log_fit(m, c)
    with np.errstate(divide="ignore", invalid="ignore"):
        ages = (intercept - np.log(c)) / PB210_DECAY_PER_YR
    return np.where(c > 0, np.maximum(ages, 0.0), np.nan)


def excess_activity(total, supported) -> np.ndarray:
    """Unsupported 210Pb = total - supported [Bq kg-1] (may be <= 0 at depth)."""
    return np.asarray(total, dtype=float) - np.asarray(supported, dtype=float)


def lead210_ages(table: pd.DataFrame, model: str, draws: int, rng: np.random.Generator,
                 background_samples: int = 3) -> pd.DataFrame:
    """Ages of every 210Pb sample with Monte Carlo errors.

    Parameters
    ----------
    table : DataFrame
        ``depth_cm``, ``dry_mass_g_cm2`` (cumulative), ``pb210_bq_kg``, ``pb210_error``, and
        optionally ``ra226_bq_kg``, ``ra226_error`` (supported 210Pb); sorted by depth.
    model : str
        ``"crs"`` or ``"cic"``.
    draws : int
        Monte Carlo draws of the activities.
    rng : numpy.random.Generator
    background_samples : int
        Without 226Ra, the supported activity is the mean of this many deepest samples.

    Returns
    -------
    DataFrame
        ``depth_cm``, ``age_yr`` (median years before collection), ``error_yr`` (1 sigma over
        the draws), ``excess_bq_kg``; samples without excess are left out.
    """
    if model not in MODELS:
        raise ValueError(f"unknown 210Pb model {model!r}; use one of {MODELS}")
    mass = table["dry_mass_g_cm2"].to_numpy(float)
    total, total_err = table["pb210_bq_kg"].to_numpy(float), table["pb210_error"].to_numpy(float)
    if "ra226_bq_kg" in table and table["ra226_bq_kg"].notna().all():
        supported = table["ra226_bq_kg"].to_numpy(float)
        supported_err = table["ra226_error"].to_numpy(float) if "ra226_error" in table else np.zeros(mass.size)
        draw_supported = lambda: supported + supported_err * rng.standard_normal(mass.size)  # noqa: E731
    else:
        deep = slice(mass.size - background_samples, mass.size)
        level = float(np.mean(total[deep]))
        level_err = float(np.sqrt(np.sum(total_err[deep] ** 2))) / background_samples
        draw_supported = lambda: np.full(mass.size, level + level_err * rng.standard_normal())  # noqa: E731
        supported = np.full(mass.size, level)
    dating = crs_ages if model == "crs" else cic_ages
    central = excess_activity(total, supported)
    samples = np.full((draws, mass.size), np.nan)
    for j in range(draws):
        drawn = total + total_err * rng.standard_normal(mass.size)
        samples[j] = dating(mass, excess_activity(drawn, draw_supported()))
    keep = (central > 2 * total_err) & (np.mean(np.isfinite(samples), axis=0) > 0.9)
    return pd.DataFrame({"depth_cm": table["depth_cm"].to_numpy(float)[keep],
                         "age_yr": np.nanmedian(samples[:, keep], axis=0),
                         "error_yr": np.nanstd(samples[:, keep], axis=0, ddof=1),
                         "excess_bq_kg": central[keep]})
