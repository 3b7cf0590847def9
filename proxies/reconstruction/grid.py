"""A regular time grid, and member-by-member transfer of sample ensembles onto it.

Every member of a record has its own sample ages (age path ``m``) and its own values
(calibration draw ``m``); the grid is shared. Cells of the grid are centred on multiples of
the grid step, so the grids of different cores line up and can be stacked.
"""

from __future__ import annotations

import numpy as np

from proxies.cores.model import BP_ZERO_CE

__all__ = ["cal_bp_to_ce", "ce_to_cal_bp", "regular_grid", "bin_means", "interpolate_members",
           "fill_gaps"]


def cal_bp_to_ce(age_cal_bp):
    """Calendar year CE of an age in cal BP: ``CE = 1950 - BP`` [yr]."""
    return float(BP_ZERO_CE) - np.asarray(age_cal_bp, dtype=float)


def ce_to_cal_bp(year_ce):
    """Age in cal BP of a calendar year CE: ``BP = 1950 - CE`` [yr]."""
    return float(BP_ZERO_CE) - np.asarray(year_ce, dtype=float)


def regular_grid(young_cal_bp: float, old_cal_bp: float, step_yr: float) -> np.ndarray:
    """Grid-cell centres on multiples of ``step_yr`` covering ``young..old``.

    Parameters
    ----------
    young_cal_bp, old_cal_bp : float
        Range to cover [cal BP]; ``young < old``... or equal for a one-cell grid.
    step_yr : float
        Cell width [yr], > 0.

    Returns
    -------
    ndarray of shape (T,)
        Cell centres [cal BP], increasing; cell ``k`` spans ``centre +- step/2``.
    """
    if not step_yr > 0:
        raise ValueError(f"grid step must be > 0 yr, got {step_yr}")
    if not young_cal_bp <= old_cal_bp:
        raise ValueError(f"grid range young {young_cal_bp} must not exceed old {old_cal_bp} cal BP")
    first = np.round(young_cal_bp / step_yr)
    last = np.round(old_cal_bp / step_yr)
    return np.arange(first, last + 1) * step_yr


def _cell_index(ages: np.ndarray, grid: np.ndarray) -> np.ndarray:
    step = grid[1] - grid[0] if grid.size > 1 else 1.0
    # Half-open cells [centre - step/2, centre + step/2).
    return np.floor((ages - (grid[0] - step / 2)) / step).astype(np.int64)


def bin_means(ages: np.ndarray, values: np.ndarray, grid: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mean of each member's samples falling in each grid cell.

    Parameters
    ----------
    ages : ndarray of shape (n, M)
        Sample ages per member [cal BP].
    values : ndarray of shape (n, M)
        Sample values per member (NaN = missing).
    grid : ndarray of shape (T,)
        Cell centres from :func:`regular_grid` [cal BP].

    Returns
    -------
    means : ndarray of shape (T, M)
        Cell means; NaN where the member has no sample in the cell.
    counts : ndarray of shape (T, M)
        Number of samples in each cell and member.
    """
    ages = np.asarray(ages, dtype=float)
    values = np.asarray(values, dtype=float)
    if ages.shape != values.shape or ages.ndim != 2:
        raise ValueError(f"ages {ages.shape} and values {values.shape} must both be (n, M)")
    n_cells, n_members = grid.size, ages.shape[1]
    cell = _cell_index(ages, grid)
    ok = (cell >= 0) & (cell < n_cells) & np.isfinite(values) & np.isfinite(ages)
    flat = (cell * n_members + np.arange(n_members)[None, :])[ok]
    sums = np.bincount(flat, weights=values[ok], minlength=n_cells * n_members)
    counts = np.bincount(flat, minlength=n_cells * n_members).reshape(n_cells, n_members)
    with np.errstate(invalid="ignore", divide="ignore"):
        means = sums.reshape(n_cells, n_members) / counts
    means[counts == 0] = np.nan
    return means, counts


def interpolate_members(ages: np.ndarray, values: np.ndarray, grid: np.ndarray) -> np.ndarray:
    """Linear interpolation of each member at the grid points inside its age range.

    Parameters
    ----------
    ages, values : ndarray of shape (n, M)
        Sample ages [cal BP] and values per member (NaN values are skipped).
    grid : ndarray of shape (T,)
        Grid points [cal BP].

    Returns
    -------
    ndarray of shape (T, M)
        Interpolated values; NaN outside the member's oldest and youngest sample (no
        extrapolation).
    """
    ages = np.asarray(ages, dtype=float)
    values = np.asarray(values, dtype=float)
    out = np.full((grid.size, ages.shape[1]), np.nan)
    for m in range(ages.shape[1]):
        ok = np.isfinite(ages[:, m]) & np.isfinite(values[:, m])
        if ok.sum() < 2:
            continue
        order = np.argsort(ages[ok, m], kind="stable")
        a, v = ages[ok, m][order], values[ok, m][order]
        inside = (grid >= a[0]) & (grid <= a[-1])
        out[inside, m] = np.interp(grid[inside], a, v)
    return out


def fill_gaps(values: np.ndarray) -> np.ndarray:
    """Fill NaNs of each member (column) by linear interpolation; edges take the nearest value.

    Used only to hand complete series to the event detectors; the reconstruction itself
    keeps empty cells empty.

    Parameters
    ----------
    values : ndarray of shape (T, M)

    Returns
    -------
    ndarray of shape (T, M)
        No NaN, except in members that have no value at all.
    """
    values = np.array(values, dtype=float)
    index = np.arange(values.shape[0])
    for m in np.flatnonzero(~np.isfinite(values).all(axis=0)):
        ok = np.isfinite(values[:, m])
        if ok.any():
            values[:, m] = np.interp(index, index[ok], values[ok, m])
    return values
