"""The outlier part of a date's likelihood: a broad density centred on the date.

A date that is an outlier (reworked material, contamination, a wrong depth) still carries
some information about where it came from: it is shifted from the true age by an unknown
amount. We state the shift's prior as a Student-t with 3 degrees of freedom and scale

    w_d = hypot(base, fraction * |mean_d|)      [yr],

so the outlier density of date d is the calibrated density widened by that shift. We use the
moment form: a Student-t (3 d.o.f.) centred on the calibrated mean m_d with scale
sqrt(s_d^2 + w_d^2), s_d the calibrated standard deviation. It is a density in calendar age,
integrated over each grid cell and *not* renormalised to the model's grid, so that a date's
outlier probability does not change when the grid is longer (a hiatus below it, a deeper
core): mass beyond the grid simply counts as incompatible with the model.

The heavy tails (t with 3 d.o.f.) keep a gross outlier (thousands of years off) from
pulling the age model, while a moderately shifted date (a few hundred years) is still
explained by the outlier part more cheaply than by bending the model.
"""

from __future__ import annotations

import numpy as np
from scipy import stats

from proxies.chronology.calibrate import CalibratedDates

__all__ = ["OUTLIER_DEGREES_OF_FREEDOM", "outlier_scale", "outlier_density"]

#: degrees of freedom of the Student-t shift prior of an outlier
OUTLIER_DEGREES_OF_FREEDOM = 3.0


def outlier_scale(mean_cal_bp, sd_yr, base_yr: float, fraction: float) -> np.ndarray:
    """Scale of each date's outlier density [yr]: ``sqrt(s_d^2 + base^2 + (fraction m_d)^2)``.

    Parameters
    ----------
    mean_cal_bp : array_like, shape (n,)
        Calibrated mean of each date [cal BP].
    sd_yr : array_like, shape (n,)
        Calibrated standard deviation of each date [yr].
    base_yr : float
        Age-independent part of the shift scale [yr].
    fraction : float
        Part of the shift scale proportional to the date's age [dimensionless].
    """
    mean = np.asarray(mean_cal_bp, dtype=float)
    sd = np.asarray(sd_yr, dtype=float)
    return np.sqrt(sd**2 + base_yr**2 + (fraction * mean) ** 2)


def outlier_density(dates: CalibratedDates, origin: float, step: float, size: int,
                    base_yr: float, fraction: float) -> np.ndarray:
    """Outlier density of each date as probability mass per cell of a regular grid.

    Cell c is ``[origin + (c - 1/2) step, origin + (c + 1/2) step)`` [cal BP]; its mass is the
    Student-t (3 d.o.f.) probability of that interval, so rows sum to less than 1 where the
    density reaches beyond the grid (never renormalised: see the module notes).

    Parameters
    ----------
    dates : CalibratedDates
        Calibrated densities (for their mean and standard deviation).
    origin, step : float
        Centre of cell 0 [cal BP] and cell width [yr].
    size : int
        Number of cells G.
    base_yr, fraction : float
        See :func:`outlier_scale`.

    Returns
    -------
    ndarray, shape (n, G)
    """
    mean = dates.mean()
    row, col = dates._row_col()
    ages = dates.step * (dates.start[row] + col)
    second = np.bincount(row, dates.values * ages**2, minlength=len(dates))
    sd = np.sqrt(np.maximum(second - mean**2, 0.0) + dates.step**2 / 12.0)
    scale = outlier_scale(mean, sd, base_yr, fraction)
    edges = origin + (np.arange(size + 1) - 0.5) * step
    cdf = stats.t.cdf((edges[None, :] - mean[:, None]) / scale[:, None], OUTLIER_DEGREES_OF_FREEDOM)
    return np.diff(cdf, axis=1)
