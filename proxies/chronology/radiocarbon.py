"""Radiocarbon reporting conversions: F14C, conventional age, pMC and Delta14C.

All formulas follow Stuiver & Polach (1977) with the F14C notation of Reimer, Brown &
Reimer (2004):

- conventional radiocarbon age ``t = -8033 * ln(F14C)`` [14C yr BP], where
  8033 yr is the Libby mean life (Libby half-life 5568 yr / ln 2);
- ``pMC = 100 * F14C`` (common practice);
- ``Delta14C = 1000 * (F14C * exp(cal_bp / 8267) - 1)`` [permil] for a sample of known
  calendar age, 8267 yr being the mean life from the Cambridge half-life 5730 yr.

Uncertainties are propagated to first order (delta method).

References
----------
Stuiver M, Polach HA (1977). Discussion: reporting of 14C data. Radiocarbon 19(3), 355-363.
doi:10.1017/S0033822200003672
Reimer PJ, Brown TA, Reimer RW (2004). Discussion: reporting and calibration of post-bomb
14C data. Radiocarbon 46(3), 1299-1304. doi:10.1017/S0033822200033154
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "LIBBY_MEAN_LIFE",
    "CAMBRIDGE_MEAN_LIFE",
    "age_from_f14c",
    "f14c_from_age",
    "pmc_from_f14c",
    "f14c_from_pmc",
    "delta14c_from_f14c",
    "f14c_from_delta14c",
    "delta14c_from_age",
    "age_from_delta14c",
]

#: Libby mean life [yr] = 5568 / ln 2 (Stuiver & Polach 1977)
LIBBY_MEAN_LIFE = 8033.0
#: Mean life from the Cambridge half-life [yr] = 5730 / ln 2 (Stuiver & Polach 1977)
CAMBRIDGE_MEAN_LIFE = 8267.0


def _positive(values, name: str) -> np.ndarray:
    values = np.asarray(values, dtype=float)
    if np.any(~(values > 0)):
        raise ValueError(f"{name} must be positive and finite, got {values[~(values > 0)][:3]}")
    return values


def age_from_f14c(f14c, f14c_error=None):
    """Conventional radiocarbon age from F14C (Stuiver & Polach 1977, Eq. for t).

    ``t = -8033 ln(F14C)``; ``sigma_t = 8033 sigma_F / F``.

    Parameters
    ----------
    f14c : array_like
        Fraction modern [dimensionless], > 0.
    f14c_error : array_like, optional
        1-sigma error of F14C [dimensionless].

    Returns
    -------
    age : ndarray
        Radiocarbon age [14C yr BP]; with ``f14c_error``, the tuple ``(age, error)``.

    Examples
    --------
    >>> float(age_from_f14c(0.5))  # one Libby half-life
    5568.0...
    """
    f = _positive(f14c, "F14C")
    age = -LIBBY_MEAN_LIFE * np.log(f)
    if f14c_error is None:
        return age
    return age, LIBBY_MEAN_LIFE * np.asarray(f14c_error, dtype=float) / f


def f14c_from_age(age, age_error=None):
    """F14C from a conventional radiocarbon age: ``F = exp(-t / 8033)``.

    Parameters
    ----------
    age : array_like
        Radiocarbon age [14C yr BP].
    age_error : array_like, optional
        1-sigma error [14C yr].

    Returns
    -------
    f14c : ndarray
        Fraction modern; with ``age_error``, the tuple ``(f14c, error)``.
    """
    age = np.asarray(age, dtype=float)
    f = np.exp(-age / LIBBY_MEAN_LIFE)
    if age_error is None:
        return f
    return f, f * np.asarray(age_error, dtype=float) / LIBBY_MEAN_LIFE


def pmc_from_f14c(f14c):
    """Percent modern carbon [%]: ``pMC = 100 F14C`` (common practice)."""
    return 100.0 * np.asarray(f14c, dtype=float)


def f14c_from_pmc(pmc):
    """F14C from percent modern carbon [%]: ``F14C = pMC / 100`` (common practice)."""
    return np.asarray(pmc, dtype=float) / 100.0


def delta14c_from_f14c(f14c, cal_bp):
    """Age-corrected Delta14C [permil] of a sample of known calendar age.

    ``Delta14C = 1000 (F14C exp(cal_bp / 8267) - 1)`` (Stuiver & Polach 1977).

    Parameters
    ----------
    f14c : array_like
        Fraction modern [dimensionless].
    cal_bp : array_like
        Calendar age of the sample [cal BP].
    """
    f = np.asarray(f14c, dtype=float)
    return 1000.0 * (f * np.exp(np.asarray(cal_bp, dtype=float) / CAMBRIDGE_MEAN_LIFE) - 1.0)


def f14c_from_delta14c(delta14c, cal_bp):
    """Inverse of :func:`delta14c_from_f14c`: ``F14C = (1 + D/1000) exp(-cal_bp / 8267)``."""
    d = np.asarray(delta14c, dtype=float)
    return (1.0 + d / 1000.0) * np.exp(-np.asarray(cal_bp, dtype=float) / CAMBRIDGE_MEAN_LIFE)


def delta14c_from_age(age, cal_bp, age_error=None):
    """Delta14C [permil] from a radiocarbon age [14C yr BP] at calendar age ``cal_bp`` [cal BP].

    With ``age_error`` [14C yr] given, uses the mean F14C of a normal age,
    ``E[F] = exp(-t/8033 + sigma^2 / (2 8033^2))``, which is how curves that tabulate a
    mean F14C beside a mean age relate their columns (see the reference curve notes).
    """
    age = np.asarray(age, dtype=float)
    exponent = -age / LIBBY_MEAN_LIFE
    if age_error is not None:
        exponent = exponent + np.asarray(age_error, dtype=float) ** 2 / (2 * LIBBY_MEAN_LIFE**2)
    return delta14c_from_f14c(np.exp(exponent), cal_bp)


def age_from_delta14c(delta14c, cal_bp):
    """Radiocarbon age [14C yr BP] from Delta14C [permil] at calendar age ``cal_bp`` [cal BP]."""
    return age_from_f14c(f14c_from_delta14c(delta14c, cal_bp))
