"""Diagnostics of fossil samples against a training set: analogues and missing taxa."""

from __future__ import annotations

import numpy as np
import pandas as pd

from .mat import nearest_analogues, squared_chord_distances
from .wa import row_profiles

__all__ = ["analogue_thresholds", "nearest_analogue_distance", "missing_taxa",
           "analogue_quality", "DEFAULT_PERCENTILES"]

# common practice: below the 5th percentile of training-set distances a "good" analogue,
# above the 10th percentile "no close" analogue (rule of thumb)
DEFAULT_PERCENTILES = (5.0, 10.0)


def analogue_thresholds(training_proportions, percentiles=DEFAULT_PERCENTILES):
    """Squared-chord distance thresholds from all pairwise distances within a training set.

    Parameters
    ----------
    training_proportions : ndarray (n_train, n_taxa)
        Training abundances (rows are normalised to proportions here).
    percentiles : (float, float)
        Percentiles [%] of the pairwise distances giving the "good" and "no close" limits.

    Returns
    -------
    (good, poor) : tuple of float
    """
    roots = np.sqrt(row_profiles(np.asarray(training_proportions, dtype=float)))
    d = squared_chord_distances(roots, roots)
    upper = d[np.triu_indices(d.shape[0], k=1)]
    good, poor = np.percentile(upper, percentiles)
    return float(good), float(poor)


def nearest_analogue_distance(training, fossil):
    """Squared-chord distance of each fossil sample to its nearest training sample.

    Both tables must have the same taxa columns (fossil taxa absent from the training set
    dropped); proportions are taken of each row's total over those columns.
    """
    train_roots = np.sqrt(row_profiles(np.asarray(training, dtype=float)))
    fossil_roots = np.sqrt(np.nan_to_num(row_profiles(np.asarray(fossil, dtype=float))))
    d, _ = nearest_analogues(fossil_roots, train_roots, 1)
    out = d[:, 0]
    out[np.asarray(fossil, dtype=float).sum(axis=1) <= 0] = np.nan
    return out


def analogue_quality(distance, thresholds):
    """``"good"``, ``"fair"`` or ``"none"`` (no close analogue) for each distance."""
    good, poor = thresholds
    d = np.asarray(distance, dtype=float)
    return np.where(d <= good, "good", np.where(d <= poor, "fair", "none"))


def missing_taxa(fossil_counts: pd.DataFrame, training_taxa) -> pd.DataFrame:
    """Share of each fossil sample in taxa that the training set does not contain.

    Returns
    -------
    pandas.DataFrame
        ``missing_taxa_percent`` (share of the sample's total in absent taxa [%]) and
        ``n_missing_taxa`` (how many absent taxa are present in the sample).
    """
    absent = [c for c in fossil_counts.columns if c not in set(training_taxa)]
    values = fossil_counts.to_numpy(dtype=float)
    totals = values.sum(axis=1)
    missing = fossil_counts[absent].to_numpy(dtype=float) if absent else np.zeros((len(values), 0))
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(totals > 0, 100.0 * missing.sum(axis=1) / np.where(totals > 0, totals, 1),
                         np.nan)
    return pd.DataFrame({"missing_taxa_percent": share,
                         "n_missing_taxa": (missing > 0).sum(axis=1).astype(int)},
                        index=fossil_counts.index)
