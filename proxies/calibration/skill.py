"""Skill statistics of a proxy-climate calibration and its verification.

All functions ignore nothing silently: inputs with NaN give NaN.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "r_squared", "root_mean_square_error", "reduction_of_error", "coefficient_of_efficiency",
    "durbin_watson", "lag1_autocorrelation", "effective_sample_size",
]


def r_squared(observed, predicted) -> float:
    """Squared Pearson correlation between observed and predicted values [unitless]."""
    o = np.asarray(observed, dtype=float)
    p = np.asarray(predicted, dtype=float)
    if o.size < 3 or np.std(o) == 0 or np.std(p) == 0:
        return float("nan")
    return float(np.corrcoef(o, p)[0, 1] ** 2)


def root_mean_square_error(observed, predicted) -> float:
    """``sqrt(mean((predicted - observed)^2))`` [units of the variable]."""
    o = np.asarray(observed, dtype=float)
    p = np.asarray(predicted, dtype=float)
    return float(np.sqrt(np.mean((p - o) ** 2))) if o.size else float("nan")


def reduction_of_error(observed, predicted, calibration_mean) -> float:
    """Reduction of error over the verification period.

    ``RE = 1 - sum((o - p)^2) / sum((o - mean_calibration)^2)``; RE > 0 means the
    reconstruction beats the calibration-period mean.

    References
    ----------
    Cook, E. R., Briffa, K. R. & Jones, P. D. (1994). Spatial regression methods in
    dendroclimatology: a review and comparison of two techniques. Int. J. Climatol. 14,
    379-402. doi:10.1002/joc.3370140404
    """
    o = np.asarray(observed, dtype=float)
    p = np.asarray(predicted, dtype=float)
    denominator = np.sum((o - calibration_mean) ** 2)
    if o.size == 0 or denominator == 0:
        return float("nan")
    return float(1.0 - np.sum((o - p) ** 2) / denominator)


def coefficient_of_efficiency(observed, predicted) -> float:
    """Coefficient of efficiency over the verification period (Cook et al. 1994).

    ``CE = 1 - sum((o - p)^2) / sum((o - mean_verification)^2)``; stricter than RE.
    """
    o = np.asarray(observed, dtype=float)
    return reduction_of_error(o, predicted, np.mean(o)) if o.size else float("nan")


def durbin_watson(residuals) -> float:
    """Durbin-Watson statistic ``sum(diff(e)^2) / sum(e^2)`` of time-ordered residuals.

    Near 2: no lag-1 autocorrelation; well below 2: positive autocorrelation.

    References
    ----------
    Durbin, J. & Watson, G. S. (1950). Testing for serial correlation in least squares
    regression I. Biometrika 37, 409-428. doi:10.1093/biomet/37.3-4.409
    """
    e = np.asarray(residuals, dtype=float)
    denominator = np.sum(e * e)
    if e.size < 2 or denominator == 0:
        return float("nan")
    return float(np.sum(np.diff(e) ** 2) / denominator)


def lag1_autocorrelation(series) -> float:
    """Lag-1 autocorrelation of a time-ordered series (sample estimator, mean removed)."""
    x = np.asarray(series, dtype=float)
    if x.size < 3:
        return float("nan")
    x = x - x.mean()
    denominator = np.sum(x * x)
    if denominator == 0:
        return float("nan")
    return float(np.sum(x[1:] * x[:-1]) / denominator)


def effective_sample_size(n: int, r1_x: float, r1_y: float) -> float:
    """Effective number of independent pairs for correlating two autocorrelated series.

    ``n_eff = n (1 - r1_x r1_y) / (1 + r1_x r1_y)``, capped to ``[2, n]``.

    Parameters
    ----------
    n : int
        Number of pairs.
    r1_x, r1_y : float
        Lag-1 autocorrelations of the two series.

    References
    ----------
    Bretherton, C. S., Widmann, M., Dymnikov, V. P., Wallace, J. M. & Blade, I. (1999). The
    effective number of spatial degrees of freedom of a time-varying field. J. Climate 12,
    1990-2009, eq. 31. doi:10.1175/1520-0442(1999)012<1990:TENOSD>2.0.CO;2
    """
    if not np.isfinite(r1_x) or not np.isfinite(r1_y):
        return float(n)
    product = r1_x * r1_y
    n_eff = n * (1.0 - product) / (1.0 + product)
    return float(min(max(n_eff, 2.0), n))
