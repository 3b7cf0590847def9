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

__all__ = ["ar1_tau_uneven", "ar1_tau_uneven_members", "ar1_coefficient_even", "ar1_surrogates"]

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


def ar1_tau_uneven_members(times: np.ndarray, values: np.ndarray, iterations: int = 45) -> np.ndarray:
    """:func:`ar1_tau_uneven` for every member of an ensemble at once; NaN = not observed.

    Each member is its own unevenly spaced series: the times where it has a value. The
    least-squares criterion of Mudelsee (2002, Eq. 2) is minimised over ``a`` in
    [1e-6, 1 - 1e-6] by golden-section search, vectorised over members (the criterion is
    unimodal in practice; agreement with the bounded scalar search is tested).

    Parameters
    ----------
    times : ndarray (T,)
        Increasing times [yr].
    values : ndarray (T, M)
        Member values, NaN where the member has none.
    iterations : int
        Golden-section steps (45 narrow the bracket by 0.618**45 ~ 4e-10).

    Returns
    -------
    ndarray (M,)
        ``tau`` [yr]; NaN for members with fewer than three values.
    """
    t = np.asarray(times, dtype=float)
    x = np.asarray(values, dtype=float)
    observed = np.isfinite(x)
    count = observed.sum(axis=0)
    mean = np.nansum(x, axis=0) / np.maximum(count, 1)
    z = np.where(observed, x - mean, 0.0)
    sd = np.sqrt(np.sum(z * z, axis=0) / np.maximum(count, 1))
    z = z / np.where(sd > 0, sd, 1.0)
    # Index of the previous observed time of each member (forward fill of indices).
    index = np.where(observed, np.arange(t.size)[:, None], -1)
    previous = np.maximum.accumulate(index, axis=0)
    prev = np.vstack([np.full((1, x.shape[1]), -1), previous[:-1]])
    pair = observed & (prev >= 0)
    gap = np.where(pair, t[:, None] - t[np.maximum(prev, 0)], 0.0)
    dbar = np.sum(gap, axis=0) / np.maximum(pair.sum(axis=0), 1)
    d = gap / np.where(dbar > 0, dbar, 1.0)
    x_prev = np.take_along_axis(z, np.maximum(prev, 0), axis=0)
    sum_of_squares = _criterion(z, x_prev, pair, gap, d, dbar)

    ratio = (np.sqrt(5.0) - 1) / 2
    lo = np.full(x.shape[1], _A_MIN)
    hi = np.full(x.shape[1], _A_MAX)
    c, e = hi - ratio * (hi - lo), lo + ratio * (hi - lo)
    fc, fe = sum_of_squares(c), sum_of_squares(e)
    for _ in range(iterations):
        left = fc < fe  # minimum in [lo, e]: e <- c, new c; else in [c, hi]: c <- e, new e
        hi = np.where(left, e, hi)
        lo = np.where(left, lo, c)
        new = np.where(left, hi - ratio * (hi - lo), lo + ratio * (hi - lo))
        f_new = sum_of_squares(new)
        c, e, fc, fe = (np.where(left, new, e), np.where(left, c, new),
                        np.where(left, f_new, fe), np.where(left, fc, f_new))
    a = (lo + hi) / 2
    tau = -dbar / np.log(a)
    return np.where(pair.sum(axis=0) >= 2, tau, np.nan)


#: at most this many distinct spacings: the criterion is then summed per spacing (see
#: :func:`_criterion`); more (irregular real times), it is summed over every pair
_MAX_SPACINGS = 16


def _criterion(z, x_prev, pair, gap, d, dbar):
    """The least-squares criterion ``S(a) = sum over pairs (z_i - a**d_i z_{i-1})**2`` of every
    member as a function of ``a`` (M,).

    On a grid the spacings take a few values g_k only, so ``S(a) = sum_k S_zz,k - 2 a**(g_k /
    dbar) S_zx,k + a**(2 g_k / dbar) S_xx,k`` with the sums per spacing computed once: each
    evaluation costs (spacings x M) powers instead of (T x M)."""
    spacings = np.unique(gap[pair])
    if spacings.size > _MAX_SPACINGS:
        def over_pairs(a):
            return np.sum(np.where(pair, (z - a[None, :] ** d * x_prev) ** 2, 0.0), axis=0)

        return over_pairs
    masks = [pair & (gap == g) for g in spacings]
    s_zz = np.array([np.sum(np.where(m, z * z, 0.0), axis=0) for m in masks])
    s_zx = np.array([np.sum(np.where(m, z * x_prev, 0.0), axis=0) for m in masks])
    s_xx = np.array([np.sum(np.where(m, x_prev * x_prev, 0.0), axis=0) for m in masks])
    exponents = spacings[:, None] / np.where(dbar > 0, dbar, 1.0)[None, :]

    def per_spacing(a):
        power = a[None, :] ** exponents
        return np.sum(s_zz - 2.0 * power * s_zx + power * power * s_xx, axis=0)

    return per_spacing


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
