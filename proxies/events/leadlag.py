"""Timing of one event across cores: member-wise lead/lag distributions.

For an event found in several cores (same variable, or variables stated as one group; same
kind and direction; onset medians within ``window_yr``), the lag of core ``a`` against core
``b`` is ``onset_a - onset_b`` [yr, cal BP]: positive when ``a``'s onset is older, i.e. ``a``
leads. The age ensembles of two cores are independent unless they share tie points, so the
lag distribution is that of the difference of two independent draws: every member of ``a``
against every member of ``b`` (exact, ``M_a x M_b`` differences, evaluated from the sorted
onsets without forming them). When the cores share their age model (``paired``), member
``i`` is set against member ``i`` instead. Reported: the median and 95 % range of the lag and
the probability that ``a`` leads, ``P(lag > 0) + P(lag = 0) / 2``.

Every member contributes its onset (members that do not detect the event give their fitted
onset at the event's place, :mod:`proxies.events.stage`), so the lag is not biased towards
members where the event happens to stand out.
"""

from __future__ import annotations

from itertools import combinations

import numpy as np
import pandas as pd

__all__ = ["LEAD_LAG_COLUMNS", "difference_quantiles", "lead_probability", "lag_summary",
           "match_events", "lead_lag_table"]

LEAD_LAG_COLUMNS = ["core_a", "event_a", "core_b", "event_b", "variable", "kind", "direction",
                    "lag_median_yr", "lag_q025_yr", "lag_q975_yr", "probability_a_leads", "n_members_a",
                    "n_members_b"]
_LEVELS = (0.5, 0.025, 0.975)


def difference_quantiles(a: np.ndarray, b: np.ndarray, levels=_LEVELS, iterations: int = 60) -> np.ndarray:
    """Quantiles of ``a_i - b_j`` over all pairs (i, j), without forming the pairs.

    The share of pairs with ``a_i - b_j <= d`` is ``sum_i #{b_j >= a_i - d} / (n_a n_b)``,
    counted by binary search in the sorted ``b``; each quantile is found by bisection on
    ``d`` to below 1e-9 of the range, then snapped to the nearest attained difference
    (:func:`_nearest_difference`): the usual lower quantile of a discrete distribution.

    Parameters
    ----------
    a, b : ndarray
        Independent draws (e.g. member onsets of two cores) [yr].
    levels : sequence of float
    iterations : int

    Returns
    -------
    ndarray (len(levels),)
    """
    a = np.sort(np.asarray(a, dtype=float))
    b = np.sort(np.asarray(b, dtype=float))
    total = a.size * b.size
    lo0, hi0 = a[0] - b[-1], a[-1] - b[0]
    out = []
    for level in levels:
        need = level * total
        lo, hi = lo0, hi0
        for _ in range(iterations):
            mid = (lo + hi) / 2
            count = np.sum(b.size - np.searchsorted(b, a - mid, side="left"))
            lo, hi = (lo, mid) if count >= need else (mid, hi)
        out.append(_nearest_difference(a, b, hi))
    return np.array(out)


def _nearest_difference(a: np.ndarray, b: np.ndarray, d: float) -> float:
    """The attained difference ``a_i - b_j`` nearest to ``d`` (``b`` sorted).

    Bisection in floating point stops within rounding of the quantile (``a_i - d`` rounds to
    ``a_i`` for tiny ``d``), so a quantile that is an attained difference such as exactly 0
    could come out as -2e-13; snapping returns the difference itself, so that a true lag
    on the lattice of differences (onsets on a grid) is inside the range when it should be.
    """
    at = np.clip(np.searchsorted(b, a - d), 1, b.size - 1) if b.size > 1 else np.zeros(a.size, int)
    candidates = np.concatenate([a - b[at], a - b[at - 1]]) if b.size > 1 else a - b[0]
    return float(candidates[np.argmin(np.abs(candidates - d))])


def lead_probability(a: np.ndarray, b: np.ndarray) -> float:
    """``P(a_i > b_j) + P(a_i = b_j) / 2`` over all pairs (ties split)."""
    a = np.asarray(a, dtype=float)
    b = np.sort(np.asarray(b, dtype=float))
    below = np.searchsorted(b, a, side="left")
    at_most = np.searchsorted(b, a, side="right")
    return float((below.sum() + 0.5 * (at_most - below).sum()) / (a.size * b.size))


def lag_summary(onsets_a: np.ndarray, onsets_b: np.ndarray, paired: bool = False) -> dict:
    """Median, 95 % range [yr] and lead probability of ``onset_a - onset_b``.

    Parameters
    ----------
    onsets_a, onsets_b : ndarray
        Member onsets [cal BP] of one event in two cores.
    paired : bool
        The cores share their age model: member ``i`` against member ``i`` only (equal sizes).
    """
    a = np.asarray(onsets_a, dtype=float)
    b = np.asarray(onsets_b, dtype=float)
    a, b = a[np.isfinite(a)], b[np.isfinite(b)]
    if a.size == 0 or b.size == 0:
        return {"lag_median_yr": np.nan, "lag_q025_yr": np.nan, "lag_q975_yr": np.nan,
                "probability_a_leads": np.nan}
    if paired:
        if a.size != b.size:
            raise ValueError("paired lags need the same members in both cores")
        d = a - b
        q = np.quantile(d, _LEVELS)
        lead = float(np.mean(d > 0) + 0.5 * np.mean(d == 0))
    else:
        q = difference_quantiles(a, b)
        lead = lead_probability(a, b)
    return {"lag_median_yr": float(q[0]), "lag_q025_yr": float(q[1]), "lag_q975_yr": float(q[2]),
            "probability_a_leads": lead}


def match_events(events: pd.DataFrame, window_yr: float, groups: dict[str, str] | None = None) -> list:
    """Pairs of events of two cores that are one event: same variable group, kind and
    direction, onset medians at most ``window_yr`` apart, each core's event closest to the
    other's (mutual nearest).

    Parameters
    ----------
    events : DataFrame
        The run's events (``core_id, event_id, variable, kind, direction, onset_median``).
    window_yr : float
    groups : dict, optional
        variable -> group name, for different variables taken as one event (default: each
        variable its own group).

    Returns
    -------
    list of (row_a, row_b) index pairs into ``events`` (core_a < core_b).
    """
    if len(events) == 0:
        return []
    table = events.assign(_group=[(groups or {}).get(v, v) for v in events["variable"]])
    pairs = []
    for (_, _, _), same in table.groupby(["_group", "kind", "direction"], sort=True):
        cores = sorted(same["core_id"].unique())
        for core_a, core_b in combinations(cores, 2):
            ea, eb = same[same["core_id"] == core_a], same[same["core_id"] == core_b]
            gap = np.abs(ea["onset_median"].to_numpy()[:, None] - eb["onset_median"].to_numpy()[None, :])
            best_b, best_a = gap.argmin(axis=1), gap.argmin(axis=0)
            for i, j in enumerate(best_b):
                if best_a[j] == i and gap[i, j] <= window_yr:
                    pairs.append((ea.index[i], eb.index[j]))
    return pairs


def lead_lag_table(events: pd.DataFrame, onsets: pd.DataFrame, window_yr: float,
                   groups: dict[str, str] | None = None, paired_cores: set | None = None) -> pd.DataFrame:
    """Lead/lag of every event found in several cores, for every pair of those cores.

    Parameters
    ----------
    events : DataFrame
        Significant events of the run (one row per core and event).
    onsets : DataFrame
        ``core_id, event_id, member, onset_cal_bp`` of every member.
    window_yr : float
        Largest difference of onset medians for two cores' events to be one event [yr].
    groups : dict, optional
        See :func:`match_events`.
    paired_cores : set of frozenset, optional
        Pairs of cores that share their age model (lags member by member).

    Returns
    -------
    DataFrame
        ``LEAD_LAG_COLUMNS``.
    """
    rows = []
    grouped = {key: g["onset_cal_bp"].to_numpy(dtype=float)
               for key, g in onsets.groupby(["core_id", "event_id"], sort=False)} if len(onsets) else {}
    for ia, ib in match_events(events, window_yr, groups):
        ra, rb = events.loc[ia], events.loc[ib]
        a = grouped.get((ra["core_id"], ra["event_id"]), np.zeros(0))
        b = grouped.get((rb["core_id"], rb["event_id"]), np.zeros(0))
        paired = frozenset((ra["core_id"], rb["core_id"])) in (paired_cores or set())
        rows.append({"core_a": ra["core_id"], "event_a": ra["event_id"], "core_b": rb["core_id"],
                     "event_b": rb["event_id"], "variable": ra["variable"], "kind": ra["kind"],
                     "direction": ra["direction"], **lag_summary(a, b, paired),
                     "n_members_a": int(a.size), "n_members_b": int(b.size)})
    if not rows:
        return pd.DataFrame({c: pd.Series(dtype=object if c in LEAD_LAG_COLUMNS[:7] else float)
                             for c in LEAD_LAG_COLUMNS})
    return pd.DataFrame(rows)[LEAD_LAG_COLUMNS]
