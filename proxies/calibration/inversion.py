"""Inverting a calibration equation into an ensemble, propagating every error source."""

from __future__ import annotations

from typing import Callable, Mapping

import numpy as np

from .equations import Coefficient

__all__ = ["invert_ensemble"]


def invert_ensemble(proxy, proxy_error, climate_from_proxy: Callable,
                    coefficients: Mapping[str, Coefficient], residual_sd: float, n_members: int,
                    rng: np.random.Generator, shared: Mapping[str, Coefficient] | None = None):
    """Climate ensemble from proxy values through an inverse calibration equation.

    Member m of sample i is ``f(p_i + e_im; theta_m, z_m) + r_im`` where

    - ``e_im ~ N(0, proxy_error_i^2)`` is the analytical error (independent per sample);
    - ``theta_m ~ N(value, sigma^2)`` per coefficient is the calibration-coefficient error,
      drawn once per member and shared by all samples (a wrong slope shifts every sample);
    - ``z_m`` are other shared inputs (e.g. seawater d18O) drawn the same way;
    - ``r_im ~ N(0, residual_sd^2)`` is the calibration's residual (prediction) error.

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

    Returns
    -------
    ndarray (n, n_members)
        NaN where the proxy is missing or outside the equation's domain.
    """
    proxy = np.asarray(proxy, dtype=float)
    n = proxy.size
    error = np.nan_to_num(np.broadcast_to(np.asarray(proxy_error, dtype=float), (n,)))
    drawn = proxy[:, None] + error[:, None] * rng.standard_normal((n, n_members))
    kwargs = {}
    for name, c in {**dict(coefficients), **dict(shared or {})}.items():
        kwargs[name] = c.value + c.sigma * rng.standard_normal((1, n_members))
    with np.errstate(invalid="ignore", divide="ignore"):
        climate = climate_from_proxy(drawn, **kwargs)
    climate = np.asarray(climate, dtype=float) + residual_sd * rng.standard_normal((n, n_members))
    climate[~np.isfinite(proxy)] = np.nan
    return climate
