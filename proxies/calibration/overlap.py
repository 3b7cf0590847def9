"""Calibration against an instrumental series that overlaps the top of a core.

Each proxy sample integrates a time window; for every age-ensemble member the instrumental
series is averaged over the sample's window, a proxy-climate line is fitted, and the fit is
verified on a split period (Cook et al. 1994).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .data import InstrumentalSeries
from .skill import (coefficient_of_efficiency, durbin_watson, effective_sample_size,
                    lag1_autocorrelation, r_squared, reduction_of_error,
                    root_mean_square_error)

__all__ = [
    "aggregate_windows", "OverlapFit", "fit_inverse", "fit_classical",
    "fit_errors_in_variables", "FITS", "split_period_skill", "OverlapCalibration",
    "calibrate_overlap", "inflate_for_autocorrelation", "with_residual_sd",
]


def aggregate_windows(series: InstrumentalSeries, young_ce, old_ce, min_coverage=0.5):
    """Mean of the annual series over each window ``[old_ce, young_ce]`` (years CE).

    Year ``y`` covers ``[y, y + 1)``; a window covers the years from ``floor(old_ce)`` to
    ``floor(young_ce)`` (at least one year). A window whose share of years with a valid value
    is below ``min_coverage`` gives NaN.

    Parameters
    ----------
    series : InstrumentalSeries
    young_ce, old_ce : array_like, same shape
        Window limits [yr CE]; ``old_ce <= young_ce``.
    min_coverage : float
        Minimum fraction of the window's years with data.

    Returns
    -------
    ndarray, same shape as the limits [series units]
    """
    young = np.asarray(young_ce, dtype=float)
    old = np.asarray(old_ce, dtype=float)
    first, last = int(series.year_ce[0]), int(series.year_ce[-1])
    grid = np.full(last - first + 1, np.nan)
    grid[series.year_ce - first] = series.values
    valid = np.isfinite(grid)
    csum = np.concatenate([[0.0], np.cumsum(np.where(valid, grid, 0.0))])
    ccount = np.concatenate([[0], np.cumsum(valid)])
    ok = np.isfinite(young) & np.isfinite(old)
    lo_year = np.floor(np.where(ok, np.minimum(old, young), 0.0))
    hi_year = np.floor(np.where(ok, np.maximum(old, young), 0.0))
    n_years = hi_year - lo_year + 1
    lo = np.clip(lo_year - first, 0, grid.size).astype(np.int64)
    hi = np.clip(hi_year - first + 1, 0, grid.size).astype(np.int64)
    hi = np.maximum(hi, lo)
    total = csum[hi] - csum[lo]
    count = ccount[hi] - ccount[lo]
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = total / count
    enough = ok & (count > 0) & (count >= min_coverage * n_years)
    return np.where(enough, mean, np.nan)


@dataclass(frozen=True)
class OverlapFit:
    """A fitted proxy-climate line.

    For ``"inverse"`` and ``"errors_in_variables"`` the line is
    ``climate = intercept + slope * proxy``; for ``"classical"`` it is
    ``proxy = intercept + slope * climate`` and climate is found by inverting it.
    ``covariance`` is that of (intercept, slope); ``residual_sd`` is the scatter of the line's
    dependent variable (climate, or proxy for classical).
    """

    method: str
    intercept: float
    slope: float
    covariance: np.ndarray
    residual_sd: float
    n: int

    def climate(self, proxy):
        """Point estimate of climate from proxy values."""
        proxy = np.asarray(proxy, dtype=float)
        if self.method == "classical":
            return (proxy - self.intercept) / self.slope
        return self.intercept + self.slope * proxy

    def draw_climate(self, proxy, rng):
        """One draw of climate for every proxy value, with parameter and residual error."""
        proxy = np.asarray(proxy, dtype=float)
        intercept, slope = rng.multivariate_normal([self.intercept, self.slope], self.covariance,
                                                   method="cholesky") \
            if np.all(np.isfinite(self.covariance)) else (self.intercept, self.slope)
        noise = self.residual_sd * rng.standard_normal(proxy.shape)
        if self.method == "classical":
            return (proxy - intercept - noise) / slope
        return intercept + slope * proxy + noise


def _ols(x, y):
    """Closed-form OLS ``y = a + b x``: (a, b, covariance, residual sd)."""
    n = x.size
    xm, ym = x.mean(), y.mean()
    sxx = np.sum((x - xm) ** 2)
    b = np.sum((x - xm) * (y - ym)) / sxx
    a = ym - b * xm
    resid = y - a - b * x
    s2 = np.sum(resid ** 2) / (n - 2)
    cov = s2 * np.array([[1.0 / n + xm * xm / sxx, -xm / sxx], [-xm / sxx, 1.0 / sxx]])
    return a, b, cov, np.sqrt(s2)


def fit_inverse(proxy, climate) -> OverlapFit:
    """Inverse calibration: ordinary least squares of climate on proxy."""
    a, b, cov, sd = _ols(np.asarray(proxy, float), np.asarray(climate, float))
    return OverlapFit("inverse", a, b, cov, sd, len(proxy))


def fit_classical(proxy, climate) -> OverlapFit:
    """Classical calibration: least squares of proxy on climate, inverted for prediction."""
    a, b, cov, sd = _ols(np.asarray(climate, float), np.asarray(proxy, float))
    return OverlapFit("classical", a, b, cov, sd, len(proxy))


def _deming(x, y, ratio):
    """Deming line through (x, y); x and y may be (n,) or (k, n) (one line per row)."""
    xm = x.mean(axis=-1, keepdims=True)
    ym = y.mean(axis=-1, keepdims=True)
    sxx = np.mean((x - xm) ** 2, axis=-1)
    syy = np.mean((y - ym) ** 2, axis=-1)
    sxy = np.mean((x - xm) * (y - ym), axis=-1)
    delta = syy / sxx if ratio is None else ratio
    b = (syy - delta * sxx + np.sqrt((syy - delta * sxx) ** 2 + 4 * delta * sxy ** 2)) / (2 * sxy)
    return ym[..., 0] - b * xm[..., 0], b


def fit_errors_in_variables(proxy, climate, error_ratio=None) -> OverlapFit:
    """Errors-in-variables (Deming) regression of climate on proxy.

    ``error_ratio`` is var(climate errors) / var(proxy errors); by default the ratio of the
    two sample variances, which gives the reduced major axis line. Parameter covariance by
    the jackknife.

    References
    ----------
    Deming, W. E. (1943). Statistical adjustment of data. Wiley, New York.
    """
    x = np.asarray(proxy, float)
    y = np.asarray(climate, float)
    a, b = _deming(x, y, error_ratio)
    n = x.size
    keep = ~np.eye(n, dtype=bool)
    # all n leave-one-out fits at once: row k of the (n, n - 1) arrays leaves out pair k
    jack = np.column_stack(_deming(np.broadcast_to(x, (n, n))[keep].reshape(n, n - 1),
                                   np.broadcast_to(y, (n, n))[keep].reshape(n, n - 1),
                                   error_ratio))
    cov = (n - 1) / n * ((jack - jack.mean(0)).T @ (jack - jack.mean(0)))
    sd = np.sqrt(np.sum((y - a - b * x) ** 2) / (n - 2))
    return OverlapFit("errors_in_variables", a, b, cov, sd, n)


FITS = {"inverse": fit_inverse, "classical": fit_classical,
        "errors_in_variables": fit_errors_in_variables}


def _fit(method, proxy, climate, error_ratio):
    if method == "errors_in_variables":
        return fit_errors_in_variables(proxy, climate, error_ratio)
    return FITS[method](proxy, climate)


def split_period_skill(proxy, climate, method="inverse", verify="early", error_ratio=None):
    """Calibrate on one half of the time-ordered overlap, verify on the other.

    Parameters
    ----------
    proxy, climate : ndarray (n,)
        Pairs ordered from oldest to youngest.
    verify : {"early", "late"}
        Which half is held out for verification.

    Returns
    -------
    dict
        ``n_calibration, n_verification, r2`` (calibration period), ``rmse, re, ce``
        (verification period), ``durbin_watson, n_effective`` (calibration period).
    """
    n = proxy.size
    half = n // 2
    early, late = np.arange(half), np.arange(half, n)
    cal, ver = (late, early) if verify == "early" else (early, late)
    fit = _fit(method, proxy[cal], climate[cal], error_ratio)
    fitted = fit.climate(proxy[cal])
    predicted = fit.climate(proxy[ver])
    return {
        "n_calibration": cal.size, "n_verification": ver.size,
        "r2": r_squared(climate[cal], fitted),
        "rmse": root_mean_square_error(climate[ver], predicted),
        "re": reduction_of_error(climate[ver], predicted, climate[cal].mean()),
        "ce": coefficient_of_efficiency(climate[ver], predicted),
        "durbin_watson": durbin_watson(climate[cal] - fitted),
        "n_effective": effective_sample_size(cal.size, lag1_autocorrelation(proxy[cal]),
                                             lag1_autocorrelation(climate[cal])),
    }


def _full_skill(proxy, climate, fit):
    fitted = fit.climate(proxy)
    return {
        "n_calibration": proxy.size, "n_verification": 0,
        "r2": r_squared(climate, fitted), "rmse": root_mean_square_error(climate, fitted),
        "re": np.nan, "ce": np.nan, "durbin_watson": durbin_watson(climate - fitted),
        "n_effective": effective_sample_size(proxy.size, lag1_autocorrelation(proxy),
                                             lag1_autocorrelation(climate)),
    }


@dataclass(frozen=True)
class OverlapCalibration:
    """Result of :func:`calibrate_overlap`.

    Attributes
    ----------
    values : ndarray (n, M)
        Climate ensemble for every proxy sample (NaN where the proxy is missing, and for
        every sample of a member that could not be fitted at all).
    skill : pandas.DataFrame
        One row per period (``full``, ``verify_early``, ``verify_late``): medians over the
        members of ``n_calibration, n_verification, r2, rmse, re, ce, durbin_watson,
        n_effective``, the members used (``n_members``), those fitted on fewer than
        ``min_pairs`` pairs (``n_members_few_pairs``) and those that could not be fitted
        (``n_members_failed``: fewer than 3 pairs or no spread).
    has_skill : bool
        False when the median verification RE (and CE, with ``skill_test = "re_and_ce"``)
        of either split is <= 0 or not computable.
    median_pairs : float
        Median number of overlap pairs over the members.
    """

    values: np.ndarray
    skill: pd.DataFrame
    has_skill: bool
    median_pairs: float = float("nan")

    @property
    def n_failed(self) -> int:
        return int(self.skill["n_members_failed"].iloc[0])


def inflate_for_autocorrelation(fit: OverlapFit, n_effective: float) -> OverlapFit:
    """The fit with its coefficient covariance scaled by ``n / n_eff``.

    Autocorrelated pairs carry less information than their number says; the standard
    errors of the coefficients grow like ``sqrt(n / n_eff)`` (Bretherton et al. 1999).
    """
    scale = max(fit.n / max(n_effective, 2.0), 1.0)
    return OverlapFit(fit.method, fit.intercept, fit.slope, fit.covariance * scale,
                      fit.residual_sd, fit.n)


def with_residual_sd(fit: OverlapFit, residual_sd: float) -> OverlapFit:
    """The fit with another residual scatter [units of the line's dependent variable]."""
    return OverlapFit(fit.method, fit.intercept, fit.slope, fit.covariance, float(residual_sd),
                      fit.n)


#: quantile of the members' residual scatter used for every member (see calibrate_overlap)
ALIGNED_QUANTILE = 0.05


def _member_fit(p, c, method, error_ratio):
    """The fit of one member with its covariance scaled for autocorrelation: the effective
    sample size of the regressor and the residuals (the two series whose products make up
    the slope's error; Bretherton et al. 1999, eq. 31)."""
    fit = _fit(method, p, c, error_ratio)
    regressor, dependent = (c, p) if method == "classical" else (p, c)
    residual = dependent - (fit.intercept + fit.slope * regressor)
    n_eff = effective_sample_size(p.size, lag1_autocorrelation(regressor),
                                  lag1_autocorrelation(residual))
    return inflate_for_autocorrelation(fit, n_eff)


def calibrate_overlap(proxy, climate, age_cal_bp, method, rng, error_ratio=None, min_pairs=8,
                      skill_test="re_and_ce"):
    """Fit, verify and apply a proxy-climate line for every age-ensemble member.

    No member is dropped: a member with fewer than ``min_pairs`` pairs is fitted on the
    pairs it has (its coefficient covariance is then wider); one that cannot be fitted at
    all (fewer than 3 pairs, or no spread) is counted in ``n_members_failed`` -- the caller
    refuses the record then, because keeping only the other members would bias the ages.
    The coefficient covariance is scaled by ``n / n_eff`` (effective sample size of the
    autocorrelated pairs). A member whose ages are off pairs each proxy value with the
    climate of the wrong years, which inflates its scatter by age error that the members
    already carry; the scatter of the best-aligned members (the ``ALIGNED_QUANTILE`` of the
    members' residual SDs, our choice checked by the coverage simulation in
    tests/test_overlap_coverage.py) is used for every member instead. Coefficients are drawn
    once per member (shared by its samples), the residual scatter per sample.

    Parameters
    ----------
    proxy : ndarray (n,)
        Proxy values of all samples.
    climate : ndarray (n, M)
        Instrumental value aggregated over each sample's window for member m (NaN outside the
        instrumental period).
    age_cal_bp : ndarray (n, M)
        Sample ages of member m, used to order the pairs in time.
    method : {"inverse", "classical", "errors_in_variables"}
    rng : numpy.random.Generator
    error_ratio : float or None
        For errors-in-variables, see :func:`fit_errors_in_variables`.
    min_pairs : int
        Members with fewer overlap pairs are counted in ``n_members_few_pairs``.
    skill_test : {"re_and_ce", "re"}
    """
    proxy = np.asarray(proxy, dtype=float)
    n, M = climate.shape
    values = np.full((n, M), np.nan)
    rows = {"full": [], "verify_early": [], "verify_late": []}
    has_proxy = np.isfinite(proxy)
    failed = few = 0
    pairs_per_member = np.zeros(M)
    fits = {}
    for m in range(M):
        pair = has_proxy & np.isfinite(climate[:, m])
        pairs_per_member[m] = pair.sum()
        order = np.flatnonzero(pair)[np.argsort(-age_cal_bp[pair, m], kind="stable")]
        p, c = proxy[order], climate[order, m]
        if p.size < 3 or np.ptp(p) == 0 or np.ptp(c) == 0:
            failed += 1
            continue
        few += int(p.size < min_pairs)
        fits[m] = _member_fit(p, c, method, error_ratio)
        rows["full"].append(_full_skill(p, c, fits[m]))
        if p.size >= 6:
            rows["verify_early"].append(split_period_skill(p, c, method, "early", error_ratio))
            rows["verify_late"].append(split_period_skill(p, c, method, "late", error_ratio))
    if fits:
        aligned = float(np.quantile([f.residual_sd for f in fits.values()], ALIGNED_QUANTILE))
        for m, fit in fits.items():
            fit = with_residual_sd(fit, min(fit.residual_sd, aligned))
            values[has_proxy, m] = fit.draw_climate(proxy[has_proxy], rng)
    table = []
    for period, stats in rows.items():
        frame = pd.DataFrame(stats)
        row = {"period": period, "n_members": len(stats), "n_members_few_pairs": few,
               "n_members_failed": failed}
        for column in ("n_calibration", "n_verification", "r2", "rmse", "re", "ce",
                       "durbin_watson", "n_effective"):
            row[column] = float(frame[column].median()) if len(frame) else np.nan
        table.append(row)
    skill = pd.DataFrame(table)
    verify = skill.loc[skill["period"] != "full"]
    tests = ("re", "ce") if skill_test == "re_and_ce" else ("re",)
    scores = verify[list(tests)].to_numpy()
    has_skill = bool(np.all(np.isfinite(scores)) and np.all(scores > 0))
    return OverlapCalibration(values, skill, has_skill, float(np.median(pairs_per_member)))
