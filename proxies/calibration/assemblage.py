"""Preparing assemblage data for transfer functions: percentages, transforms, rare taxa."""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["counts_to_percentages", "transform_abundances", "rare_taxa_mask", "TRANSFORMS"]

TRANSFORMS = ("none", "sqrt", "log")


def counts_to_percentages(counts: pd.DataFrame) -> pd.DataFrame:
    """Each row as percentages of its total [%]; rows with a zero total become NaN.

    Parameters
    ----------
    counts : pandas.DataFrame
        Non-negative counts (or abundances), one column per taxon.
    """
    values = counts.to_numpy(dtype=float)
    if np.any(values < 0):
        raise ValueError("counts must be non-negative")
    totals = values.sum(axis=1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        percent = np.where(totals > 0, 100.0 * values / np.where(totals > 0, totals, 1.0), np.nan)
    return pd.DataFrame(percent, index=counts.index, columns=counts.columns)


def transform_abundances(percentages, kind: str = "none"):
    """Transform abundances: ``"none"``, ``"sqrt"`` (square root) or ``"log"`` (``ln(1 + x)``).

    Both transforms down-weight dominant taxa (common practice); they keep zeros at zero so
    the result is still a valid non-negative abundance table.
    """
    x = np.asarray(percentages, dtype=float) if not isinstance(percentages, pd.DataFrame) \
        else percentages
    if kind == "none":
        return x
    if kind == "sqrt":
        return np.sqrt(x)
    if kind == "log":
        return np.log1p(x)
    raise ValueError(f"unknown transform '{kind}'; use one of {TRANSFORMS}")


def rare_taxa_mask(percentages, min_occurrences: int = 2, min_max_percent: float = 0.0):
    """Boolean mask of the taxa to keep.

    A taxon is kept when it is present (> 0) in at least ``min_occurrences`` samples and its
    maximum abundance reaches ``min_max_percent`` [%] (common practice: 2 occurrences, 1-2 %).
    """
    x = np.asarray(percentages, dtype=float)
    occurrences = np.sum(x > 0, axis=0)
    maxima = np.max(x, axis=0) if x.shape[0] else np.zeros(x.shape[1])
    return (occurrences >= min_occurrences) & (maxima >= min_max_percent) & (maxima > 0)
