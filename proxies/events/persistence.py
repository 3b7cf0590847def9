"""Persistence of (unevenly spaced) series as AR(1) red noise, and red-noise surrogates.

An AR(1) process on arbitrary times t_1 < ... < t_n has
``x_i = a_i x_{i-1} + sqrt(1 - a_i^2) e_i`` with ``a_i = exp(-(t_i - t_{i-1}) / tau)``
and unit marginal variance (Mudelsee 2002, Eq. 1). The persistence time ``tau`` is
estimated by least squares: minimise ``S(a) = sum_i (x_i - a^{d_i} x_{i-1})^2`` with
``d_i = (t_i - t_{i-1}) / dbar`` over ``0 < a < 1`` on the standardised series; then
``tau = -dbar / ln(a)`` (Mudelsee 2002, Eqs. 2-3). On an even grid the minimiser is the
closed form ``a = sum x_i x_{i-1} / sum x_{i-1}^2``.

References
----------
Mudelsee, M. (2002). TAUEST: a computer program for estimating persistence in unevenly
spaced weather/climate time series. Computers & Geosciences 28, 69-72.
doi:10.1016/S0098-3004(01)00041-3
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import minimize_scalar

__all__ = ["ar1_tau_uneven", "ar1_coefficient_even", "ar1_surrogates"]

# Bounds of the search for a = exp(-dbar/tau): a in [1e-6, 1 - 1e-6] keeps tau finite.
_A_MIN, _A_MAX = 1e-6, 1.0 - 1e-6


def _standardise(x: np.ndarray) -> np.ndarray:
    x = x - x.mean()
    sd = x.std()
    return x / sd if sd > 0 else x


def ar1_tau_uneven(times: np.ndarray, values: np.ndarray) -> float:
    """Least-squares AR(1) persistence time of an unevenly spaced series (Mudelsee 2002).

    Parameters
    ----------
    times : ndarray (n,)
        Strictly increasing times [yr] (any direction of calendar; only spacings are used).
    values : ndarray (n,)
        The series (standardised internally).

    Returns
    -------
    float
        ``tau`` [yr]; a value near 0 means no persistence at the sampling scale.
    """
    t = np.asarray(times, dtype=float)
    x = np.asarray(values, dtype=float)
    ok = np.isfinite(t) & np.isfinite(x)
    t, x = t[ok], x[ok]
    if t.size < 3:
        raise ValueError("need at least three points to estimate persistence")
    if np.any(np.diff(t) <= 0):
        raise ValueError("times must be strictly increasing")
    x = _standardise(x)
    spacing = np.diff(t)
    dbar = spacing.mean()
    d = spacing / dbar

    def sum_of_squares(a: float) -> float:
        return float(np.sum((x[1:] - a ** d * x[:-1]) ** 2))

    best = minimize_scalar(sum_of_squares, bounds=(_A_MIN, _A_MAX), method="bounded",
                           options={"xatol": 1e-10})
    return float(-dbar / np.log(best.x))


def ar1_coefficient_even(values: np.ndarray) -> np.ndarray:
    """Least-squares lag-1 coefficient of each column of an evenly spaced ensemble.

    The even-spacing case of Mudelsee (2002): ``a = sum x_i x_{i-1} / sum x_{i-1}^2`` of the
    centred series, clipped to [1e-6, 1 - 1e-6].

    Parameters
    ----------
    values : ndarray (T,) or (T, M)

    Returns
    -------
    ndarray (M,) or float
        ``a``; the persistence time is ``-step / ln(a)``.
    """
    x = np.asarray(values, dtype=float)
    x = x - x.mean(axis=0)
    num = np.sum(x[1:] * x[:-1], axis=0)
    den = np.sum(x[:-1] ** 2, axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        a = np.where(den > 0, num / den, _A_MIN)
    return np.clip(a, _A_MIN, _A_MAX)


def ar1_surrogates(times: np.ndarray, tau: float, n_surrogates: int,
                   rng: np.random.Generator) -> np.ndarray:
    """Unit-variance AR(1) red-noise surrogates on given times (Mudelsee 2002, Eq. 1).

    Parameters
    ----------
    times : ndarray (n,)
        Increasing times [yr].
    tau : float
        Persistence time [yr], >= 0.
    n_surrogates : int
    rng : numpy.random.Generator

    Returns
    -------
    ndarray (n, n_surrogates)
    """
    t = np.asarray(times, dtype=float)
    if tau < 0:
        raise ValueError(f"tau must be >= 0 yr, got {tau}")
    a = np.exp(-np.diff(t) / tau) if tau > 0 else np.zeros(t.size - 1)
    noise = rng.standard_normal((t.size, n_surrogates))
    out = np.empty_like(noise)
    out[0] = noise[0]
    scale = np.sqrt(1.0 - a ** 2)
    for i in range(1, t.size):
        out[i] = a[i - 1] * out[i - 1] + scale[i - 1] * noise[i]
    return out
