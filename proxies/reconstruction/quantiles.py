"""Quantile bands of an ensemble, computed at the end (never mean +- sigma)."""

from __future__ import annotations


import numpy as np
from proxies.warning_sinks import quiet_warnings

__all__ = ["BAND_LEVELS", "band_name", "ensemble_bands"]

#: Probabilities of the reported bands: median, 68 % (16-84) and 95 % (2.5-97.5) ranges.
BAND_LEVELS = (0.025, 0.16, 0.5, 0.84, 0.975)


def band_name(level: float) -> str:
    """Column suffix of a quantile in per mille: 0.025 -> ``"q025"``, 0.5 -> ``"median"``."""
    if level == 0.5:
        return "median"
    return f"q{int(round(level * 1000)):03d}"


def ensemble_bands(values: np.ndarray, min_member_share: float = 0.5,
                   levels=BAND_LEVELS) -> dict[str, np.ndarray]:
    """Quantiles over the member axis, ignoring members without a value.

    Parameters
    ----------
    values : ndarray of shape (T, M)
        Ensemble (last axis = member), NaN where a member has no value.
    min_member_share : float
        Rows where fewer than this share of members has a value get NaN quantiles.
    levels : sequence of float
        Probabilities in (0, 1).

    Returns
    -------
    dict
        ``band_name(level) -> ndarray (T,)``, plus ``"member_share"`` (T,).
    """
    values = np.asarray(values, dtype=float)
    share = np.isfinite(values).mean(axis=1)
    keep = share >= min_member_share
    out = {band_name(q): np.full(values.shape[0], np.nan) for q in levels}
    if keep.any():
        with quiet_warnings(RuntimeWarning):
            q = np.nanquantile(values[keep], levels, axis=1)
        for i, level in enumerate(levels):
            out[band_name(level)][keep] = q[i]
    out["member_share"] = share
    return out
