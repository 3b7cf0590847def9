"""Regional composite of several cores, member by member.

Each record's member series is expressed relative to the common stack window (departure
from its window mean, or z-score over the window); the composite member ``m`` is the mean
over the records that have a value at that time step. Members of different cores are
independent draws, so pairing member ``m`` of one core with member ``m`` of another is a
valid joint draw; when ensemble sizes differ, members are drawn with replacement (seeded by
the record's stable name, ``rng_for(seed, "stack", core_id, series)``). The composite keeps
every member (:func:`stack_ensembles`), so that events found in the stack have an onset
distribution: the regional onset (:mod:`proxies.events.regional`).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, replace

import numpy as np
import pandas as pd

from proxies.reconstruction.grid import bin_means, regular_grid
from proxies.reconstruction.quantiles import BAND_LEVELS, band_name, ensemble_bands
from proxies.reconstruction.settings import ReconstructionSettings
from proxies.seeding import rng_for
from proxies.warning_sinks import quiet_warnings

__all__ = ["stack_records", "stack_ensembles", "StackEnsemble", "composite_members", "standardise_over_window",
           "coarsen_series"]


def standardise_over_window(age_cal_bp: np.ndarray, values: np.ndarray, window: tuple[float, float],
                            method: str) -> np.ndarray:
    """Departures (``"anomaly"``) or z-scores (``"zscore"``) of each member over a window.

    Parameters
    ----------
    age_cal_bp : ndarray (T,) [cal BP]
    values : ndarray (T, M)
    window : (young, old) [cal BP]
    method : {"anomaly", "zscore"}

    Returns
    -------
    ndarray (T, M)
        NaN for members without at least two values in the window (``zscore``) or one
        (``anomaly``).
    """
    inside = (age_cal_bp >= window[0]) & (age_cal_bp <= window[1])
    with quiet_warnings(RuntimeWarning):
        mean = np.nanmean(values[inside], axis=0)
        out = values - mean[None, :]
        if method == "zscore":
            sd = np.nanstd(values[inside], axis=0, ddof=1)
            sd[~(sd > 0)] = np.nan
            out = out / sd[None, :]
        elif method != "anomaly":
            raise ValueError(f"stack method must be 'anomaly' or 'zscore', got {method!r}")
    return out


def composite_members(aligned) -> tuple[np.ndarray, np.ndarray]:
    """Member-by-member mean over records, accumulated one record at a time.

    Parameters
    ----------
    aligned : iterable of ndarray (T, M)
        Records on the same grid and with the same number of members (a generator is fine:
        only one record, a running sum and counts are held at once, so 100 cores x 500
        members stay small).

    Returns
    -------
    composite : ndarray (T, M)
        Mean over records with a value (NaN where none has).
    n_records : ndarray (T,)
        Number of records whose member-median has a value at each step.
    """
    total = count = n_records = None
    for record in aligned:
        record = np.asarray(record, dtype=float)
        have = np.isfinite(record)
        if total is None:
            total, count = np.zeros(record.shape), np.zeros(record.shape, dtype=np.int64)
            n_records = np.zeros(record.shape[0], dtype=np.int64)
        total += np.where(have, record, 0.0)
        count += have
        with quiet_warnings(RuntimeWarning):
            n_records += np.isfinite(np.nanmedian(record, axis=1))
    if total is None:
        raise ValueError("no record to composite")
    with np.errstate(invalid="ignore", divide="ignore"):
        composite = np.where(count > 0, total / np.maximum(count, 1), np.nan)
    return composite, n_records


def _step_of(series) -> float | None:
    return round(float(np.diff(series.age_cal_bp)[0]), 9) if series.age_cal_bp.size > 1 else None


def coarsen_series(age_cal_bp: np.ndarray, values: np.ndarray, step_yr: float) -> tuple[np.ndarray, np.ndarray]:
    """A member series on a coarser regular grid: the mean of the fine cells whose centres
    fall in each coarse cell (cells centred on multiples of ``step_yr``).

    Parameters
    ----------
    age_cal_bp : ndarray (T,)
        Fine cell centres [cal BP].
    values : ndarray (T, M)
    step_yr : float
        Coarse cell width [yr].

    Returns
    -------
    coarse_age_cal_bp : ndarray (T',), coarse_values : ndarray (T', M)
    """
    grid = regular_grid(float(age_cal_bp[0]), float(age_cal_bp[-1]), step_yr)
    ages = np.repeat(np.asarray(age_cal_bp, dtype=float)[:, None], values.shape[1], axis=1)
    means, _ = bin_means(ages, values, grid)
    return grid, means


def _on_common_steps(series_list) -> tuple[list, list[str]]:
    """Series with one grid step: those on finer grids are averaged onto the coarsest step
    (cores with an automatic grid step can differ); returns (series, notes)."""
    steps = {_step_of(s) for s in series_list} - {None}
    if len(steps) <= 1:
        return list(series_list), []
    coarsest = max(steps)
    out = []
    for s in series_list:
        if _step_of(s) not in (None, coarsest):
            age, values = coarsen_series(s.age_cal_bp, s.values, coarsest)
            s = replace(s, age_cal_bp=age, values=values, anomalies=values, n_samples=np.zeros(age.size, int))
        out.append(s)
    note = (f"records on grid steps of {', '.join(f'{v:g}' for v in sorted(steps))} yr are stacked on "
            f"the coarsest, {coarsest:g} yr (finer records averaged into its cells)")
    return out, [note]


def _common_grid(series_list) -> np.ndarray:
    return np.unique(np.concatenate([s.age_cal_bp for s in series_list]))


def _on_grid(series, grid, values):
    out = np.full((grid.size, values.shape[1]), np.nan)
    out[np.searchsorted(grid, series.age_cal_bp)] = values
    return out


def _overlap(series_list) -> tuple[float, float]:
    # a time step counts when any member has a value there (its median is then finite)
    young = max(float(s.age_cal_bp[np.isfinite(s.values).any(axis=1)].min()) for s in series_list)
    old = min(float(s.age_cal_bp[np.isfinite(s.values).any(axis=1)].max()) for s in series_list)
    if young > old:
        raise ValueError("the records to stack do not overlap in time; state a stack window "
                         "([reconstruction] stack_young_cal_bp / stack_old_cal_bp)")
    return young, old


@dataclass(frozen=True)
class StackEnsemble:
    """The regional composite of one climate variable, every member kept.

    Attributes
    ----------
    variable : str
    age_cal_bp : ndarray (T,)
        Common grid [cal BP].
    values : ndarray (T, M)
        Composite member ``m``: the mean over records of each record's member (its own
        draw when ensemble sizes differ), standardised over the window.
    n_records : ndarray (T,)
        Records contributing at each step.
    window : (young, old)
        Stack window [cal BP].
    records : tuple of str
        ``core_id/series`` of the records in the composite.
    """

    variable: str
    age_cal_bp: np.ndarray
    values: np.ndarray
    n_records: np.ndarray
    window: tuple[float, float]
    records: tuple[str, ...] = ()


def _member_draw(values: np.ndarray, n_members: int, rng: np.random.Generator | None, seed: int | None,
                 core_id: str, name: str) -> np.ndarray:
    """The record's members for an ``n_members`` composite: its own when sizes agree, else
    drawn with replacement by ``rng_for(seed, "stack", core_id, name)`` (stable names: the
    same draw whatever the other records) or, without a seed, by ``rng``."""
    if values.shape[1] == n_members:
        return values
    draw = rng_for(seed, "stack", core_id, name) if seed is not None else rng
    return values[:, draw.integers(0, values.shape[1], n_members)]


def stack_ensembles(results: dict, settings: ReconstructionSettings, rng: np.random.Generator | None = None,
                    seed: int | None = None) -> dict[str, StackEnsemble]:
    """Regional composite of every climate variable, every member kept (see
    :func:`stack_records` for the rules); ``seed`` seeds the member draws of records whose
    ensemble size differs by their stable names (else ``rng`` draws them in record order).

    Returns
    -------
    dict
        variable -> :class:`StackEnsemble`, variables sorted.
    """
    by_variable: dict[str, list] = {}
    for core_id in sorted(results):
        for name, s in results[core_id].series.items():
            if np.isfinite(s.values).any():  # a record without any value is not a record
                by_variable.setdefault(s.climate_variable or name, []).append((f"{core_id}/{name}", s))
    out = {}
    for variable in sorted(by_variable):
        labels = tuple(label for label, _ in by_variable[variable])
        series_list, notes = _on_common_steps([s for _, s in by_variable[variable]])
        for note in notes:
            warnings.warn(f"stack of {variable}: {note}", UserWarning, stacklevel=2)
        grid = _common_grid(series_list)
        window = settings.stack_window or _overlap(series_list)
        n_members = max(s.values.shape[1] for s in series_list)

        def aligned(series_list=series_list, labels=labels, grid=grid, window=window, n_members=n_members):
            for label, s in zip(labels, series_list):
                values = _member_draw(s.values, n_members, rng, seed, *label.split("/", 1))
                standard = standardise_over_window(s.age_cal_bp, values, window, settings.stack_method)
                yield _on_grid(s, grid, standard)

        composite, n_records = composite_members(aligned())
        out[variable] = StackEnsemble(variable, grid, composite, n_records, window, labels)
    return out


def stack_records(results: dict, settings: ReconstructionSettings,
                  rng: np.random.Generator | None = None, seed: int | None = None,
                  ensembles: dict[str, StackEnsemble] | None = None) -> pd.DataFrame:
    """Regional composite of every climate variable, over all records of all cores.

    Parameters
    ----------
    results : dict[str, ReconstructionResult]
        Core id -> reconstruction result.
    settings : ReconstructionSettings
        ``stack_method``, ``stack_window``, ``min_member_share``.
    rng : numpy.random.Generator, optional
        Draws member indices when cores have different ensemble sizes (without ``seed``).
    seed : int, optional
        Run seed: member draws by stable names instead (see :func:`stack_ensembles`).
    ensembles : dict, optional
        The result of :func:`stack_ensembles` when already made (then ``results`` is unused).

    Returns
    -------
    DataFrame (``stack.parquet``)
        ``age_cal_bp, variable, method, value_median, value_q025, value_q160, value_q840,
        value_q975, n_records, stack_young_cal_bp, stack_old_cal_bp``. Records are grouped by
        ``GridSeries.climate_variable`` (so two proxies of one variable in one core are two
        records); a variable with a single record is still reported (``n_records`` <= 1).
        Records without any value are left out; records on finer grid steps are averaged
        onto the coarsest step of the variable (with a warning saying so).
    """
    if ensembles is None:
        ensembles = stack_ensembles(results, settings, rng, seed)
    frames = []
    for variable, stack in ensembles.items():
        bands = ensemble_bands(stack.values, settings.min_member_share)
        frame = {"age_cal_bp": stack.age_cal_bp, "variable": variable, "method": settings.stack_method}
        for level in BAND_LEVELS:
            frame[f"value_{band_name(level)}"] = bands[band_name(level)]
        frame["n_records"] = stack.n_records.astype(np.int64)
        frame["stack_young_cal_bp"] = stack.window[0]
        frame["stack_old_cal_bp"] = stack.window[1]
        frames.append(pd.DataFrame(frame))
    if not frames:
        return pd.DataFrame(columns=["age_cal_bp", "variable", "method", "value_median",
                                     "value_q025", "value_q975", "n_records"])
    return pd.concat(frames, ignore_index=True)
