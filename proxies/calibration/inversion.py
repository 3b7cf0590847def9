"""The error model of every calibration, and inverting an equation into an ensemble.

Every calibration error is either **shared** by all samples of an ensemble member (a
systematic offset: the coefficients of the equation, a site or species offset) or
**independent** per sample (measurement, scatter). A member draws the shared part once and
the independent part per sample, so a multi-century mean keeps the shared part in full while
the independent part averages out (../shared/DESIGN.md section 4b).
"""

from __future__ import annotations

from typing import Callable, Mapping

import numpy as np

from .equations import Coefficient

__all__ = ["split_error_draws", "draw_coefficients", "invert_ensemble"]


def split_error_draws(n_samples: int, n_members: int, sigma, shared_fraction: float,
                      rng: np.random.Generator) -> np.ndarray:
    """Draws of an error of total 1-sigma ``sigma`` split into a shared and an independent part.

    ``e_im = sigma_i (sqrt(f) z_m + sqrt(1 - f) w_im)`` with ``z_m, w_im ~ N(0, 1)``: the
    variance share ``f`` is common to all samples of member m, the rest independent.

    Parameters
    ----------
    n_samples, n_members : int
    sigma : float or ndarray (n_samples,)
        Total 1-sigma error [climate units].
    shared_fraction : float
        ``f`` in [0, 1].
    rng : numpy.random.Generator

    Returns
    -------
    ndarray (n_samples, n_members)
    """
    if not 0.0 <= shared_fraction <= 1.0:
        raise ValueError(f"shared_fraction must be in [0, 1], got {shared_fraction}")
    sigma = np.broadcast_to(np.asarray(sigma, dtype=float), (n_samples,))[:, None]
    shared = np.sqrt(shared_fraction) * rng.standard_normal((1, n_members))
    independent = np.sqrt(1.0 - shared_fraction) * rng.standard_normal((n_samples, n_members))
    return sigma * (shared + independent)


def draw_coefficients(coefficients: Mapping[str, Coefficient], n_members: int,
                      rng: np.random.Generator, correlation: float = 0.0) -> dict:
    """One value of every coefficient per member, shape (1, n_members) each.

    With exactly two uncertain coefficients, ``correlation`` is the correlation of their
    errors (fitted slope and intercept are usually strongly correlated).
    """
    names = list(coefficients)
    values = np.array([coefficients[k].value for k in names], dtype=float)
    sigmas = np.array([coefficients[k].sigma for k in names], dtype=float)
    normal = rng.standard_normal((len(names), n_members))
    uncertain = np.flatnonzero(sigmas > 0)
    if correlation and uncertain.size == 2:
        i, j = uncertain
        normal[j] = correlation * normal[i] + np.sqrt(1.0 - correlation ** 2) * normal[j]
    drawn = values[:, None] + sigmas[:, None] * normal
    return {name: drawn[k][None, :] for k, name in enumerate(names)}


def invert_ensemble(proxy, proxy_error, climate_from_proxy: Callable,
                    coefficients: Mapping[str, Coefficient], residual_sd: float, n_members: int,
                    rng: np.random.Generator, shared: Mapping[str, Coefficient] | None = None,
                    shared_fraction: float = 0.0, correlation: float = 0.0):
    """Climate ensemble from proxy values through an inverse calibration equation.

    Member m of sample i is ``f(p_i + e_im; theta_m, z_m) + r_im`` where

    - ``e_im ~ N(0, proxy_error_i^2)`` is the analytical error (independent per sample);
    - ``theta_m`` are the coefficients, drawn once per member (shared by all samples; with
      ``correlation`` between two uncertain ones) -- give them sigmas only when the
      calibration states them *instead of* folding them into ``residual_sd``;
    - ``z_m`` are other shared inputs (e.g. seawater d18O) drawn the same way;
    - ``r_im`` is the calibration error of total 1-sigma ``residual_sd``, of which the
      variance share ``shared_fraction`` is shared by all samples of the member
      (:func:`split_error_draws`).

    Parameters
    ----------
    proxy : array_like (n,)
        Measured proxy values [proxy units]; NaN stays NaN.
    proxy_error : array_like (n,) or float
        1-sigma analytical errors [proxy units]; NaN counts as 0.
    climate_from_proxy : callable
        ``f(proxy, **coefficients, **shared)``, vectorised.
    coefficients, shared : mapping of name -> Coefficient
    residual_sd : float
        Calibration error [climate units, 1 sigma].
    n_members : int
    rng : numpy.random.Generator
    shared_fraction : float
        Share of ``residual_sd**2`` that is systematic.
    correlation : float
        Correlation of the errors of two uncertain coefficients.

    Returns
    -------
    ndarray (n, n_members)
        NaN where the proxy is missing or outside the equation's domain.
    """
    proxy = np.asarray(proxy, dtype=float)
    n = proxy.size
    error = np.nan_to_num(np.broadcast_to(np.asarray(proxy_error, dtype=float), (n,)))
    drawn = proxy[:, None] + error[:, None] * rng.standard_normal((n, n_members))
    kwargs = draw_coefficients(coefficients, n_members, rng, correlation)
    kwargs.update(draw_coefficients(dict(shared or {}), n_members, rng))
    with np.errstate(invalid="ignore", divide="ignore"):
        climate = climate_from_proxy(drawn, **kwargs)
    climate = np.asarray(climate, dtype=float) + split_error_draws(
        n, n_members, residual_sd, shared_fraction, rng)
    climate[~np.isfinite(proxy)] = np.nan
    return climate
