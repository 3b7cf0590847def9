"""Reference windows and anomalies, computed per ensemble member.

Climate is a 30-year mean: the WMO climatological standard normals (WMO-No. 1203) are the
default reference for records that reach the instrumental era; otherwise the user states a
window in cal BP. The reference value of a member is the time mean over the window of the
member's piecewise-linear record (its own sample ages and values), so that a 30-yr normal
is meaningful even on a coarser grid.

References
----------
World Meteorological Organization (2017). WMO Guidelines on the Calculation of Climate
Normals. WMO-No. 1203.
"""

from __future__ import annotations

import numpy as np

from proxies.reconstruction.grid import ce_to_cal_bp
from proxies.reconstruction.settings import WMO_NORMAL_PERIODS

__all__ = ["normal_window_cal_bp", "window_mean_per_member", "window_coverage",
           "anomalies_from_reference"]

_POINTS_PER_WINDOW = 257


def normal_window_cal_bp(period: str) -> tuple[float, float]:
    """The WMO standard normal as a (young, old) window [cal BP].

    The period 1961-1990 runs from 1 January 1961 to 31 December 1990, i.e. decimal years
    1961.0-1991.0 CE, which is -41..-11 cal BP (CE = 1950 - BP).

    >>> normal_window_cal_bp("1961-1990")
    (-41.0, -11.0)
    """
    if period not in WMO_NORMAL_PERIODS:
        raise ValueError(f"unknown normal period {period!r}; use one of {sorted(WMO_NORMAL_PERIODS)}")
    first, last = WMO_NORMAL_PERIODS[period]
    return (float(ce_to_cal_bp(last + 1)), float(ce_to_cal_bp(first)))


def window_coverage(ages: np.ndarray, window: tuple[float, float]) -> np.ndarray:
    """Whether each member's record spans the whole window.

    Parameters
    ----------
    ages : ndarray of shape (n, M)
        Sample ages per member [cal BP] (samples with a value only).
    window : (young, old) [cal BP]

    Returns
    -------
    ndarray of bool, shape (M,)
    """
    ages = np.asarray(ages, dtype=float)
    young, old = window
    return (np.nanmin(ages, axis=0) <= young) & (np.nanmax(ages, axis=0) >= old)


def window_mean_per_member(ages: np.ndarray, values: np.ndarray,
                           window: tuple[float, float]) -> np.ndarray:
    """Time mean of each member's piecewise-linear record over a window.

    Parameters
    ----------
    ages, values : ndarray of shape (n, M)
        Sample ages [cal BP] and values per member; NaN values are skipped.
    window : (young, old) [cal BP]

    Returns
    -------
    ndarray of shape (M,)
        Mean over the window (trapezoid rule on 257 points); NaN for members whose record
        does not span the whole window.
    """
    ages = np.asarray(ages, dtype=float)
    values = np.asarray(values, dtype=float)
    young, old = window
    points = np.linspace(young, old, _POINTS_PER_WINDOW)
    out = np.full(ages.shape[1], np.nan)
    for m in range(ages.shape[1]):
        ok = np.isfinite(ages[:, m]) & np.isfinite(values[:, m])
        if ok.sum() == 0:
            continue
        order = np.argsort(ages[ok, m], kind="stable")
        a, v = ages[ok, m][order], values[ok, m][order]
        if a[0] > young or a[-1] < old:
            continue
        curve = np.interp(points, a, v)
        out[m] = curve.mean() if young == old else np.trapezoid(curve, points) / (old - young)
    return out


def anomalies_from_reference(grid_values: np.ndarray, reference: np.ndarray) -> np.ndarray:
    """Member-by-member anomalies: ``values[:, m] - reference[m]``.

    Parameters
    ----------
    grid_values : ndarray of shape (T, M)
    reference : ndarray of shape (M,)

    Returns
    -------
    ndarray of shape (T, M)
    """
    return np.asarray(grid_values, dtype=float) - np.asarray(reference, dtype=float)[None, :]
