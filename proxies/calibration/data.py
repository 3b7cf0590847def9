"""Auxiliary data a calibration needs: modern training sets and instrumental series.

Both are plain containers built by the readers in :mod:`pipelines.auxiliary` (or by hand in a
notebook); they validate their shapes on construction and never touch files.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

__all__ = ["TrainingSet", "InstrumentalSeries"]


@dataclass(frozen=True)
class TrainingSet:
    """A modern training set: taxon abundances at sites with a measured climate variable.

    Attributes
    ----------
    name : str
        Name of the set (the ``<name>`` of ``[training.<name>]``).
    taxa : pandas.DataFrame
        Abundances, shape (n_sites, n_taxa), one column per taxon (counts or percentages,
        non-negative).
    target : numpy.ndarray
        Observed climate variable at each site, shape (n_sites,) [units].
    target_name : str
        Name of the climate variable, e.g. ``"july_temperature"``.
    units : str
        Units of ``target``, e.g. ``"degC"``.
    ids : numpy.ndarray
        Site identifiers, shape (n_sites,).
    latitude, longitude : numpy.ndarray or None
        Site coordinates [decimal degrees], shape (n_sites,), needed by h-block
        cross-validation only.
    """

    name: str
    taxa: pd.DataFrame
    target: np.ndarray
    target_name: str
    units: str
    ids: np.ndarray | None = None
    latitude: np.ndarray | None = None
    longitude: np.ndarray | None = None

    def __post_init__(self):
        n = len(self.taxa)
        target = np.asarray(self.target, dtype=float)
        if target.shape != (n,):
            raise ValueError(f"training set '{self.name}': target has shape {target.shape}, "
                             f"expected ({n},) to match the taxa table")
        object.__setattr__(self, "target", target)
        ids = np.arange(1, n + 1) if self.ids is None else np.asarray(self.ids)
        if ids.shape != (n,):
            raise ValueError(f"training set '{self.name}': ids must have shape ({n},)")
        object.__setattr__(self, "ids", ids)
        for attr in ("latitude", "longitude"):
            value = getattr(self, attr)
            if value is not None:
                value = np.asarray(value, dtype=float)
                if value.shape != (n,):
                    raise ValueError(f"training set '{self.name}': {attr} must have shape ({n},)")
                object.__setattr__(self, attr, value)

    @property
    def has_coordinates(self) -> bool:
        return self.latitude is not None and self.longitude is not None


@dataclass(frozen=True)
class InstrumentalSeries:
    """An annual instrumental climate series.

    Attributes
    ----------
    name : str
        The ``<name>`` of its ``[instrumental.<name>]`` section.
    variable : str
        Climate variable, e.g. ``"summer_temperature"``.
    units : str
        Units of ``values``.
    year_ce : numpy.ndarray
        Calendar years CE, integers, strictly increasing, shape (n_years,).
    values : numpy.ndarray
        Annual values [units], shape (n_years,); NaN for missing years.
    """

    name: str
    variable: str
    units: str
    year_ce: np.ndarray = field(repr=False)
    values: np.ndarray = field(repr=False)

    def __post_init__(self):
        years = np.asarray(self.year_ce, dtype=float)
        values = np.asarray(self.values, dtype=float)
        if years.ndim != 1 or values.shape != years.shape:
            raise ValueError(f"instrumental series '{self.name}': year_ce and values must be "
                             f"1-D of equal length, got {years.shape} and {values.shape}")
        if years.size == 0:
            raise ValueError(f"instrumental series '{self.name}' is empty")
        if np.any(years != np.round(years)):
            raise ValueError(f"instrumental series '{self.name}': years must be whole years CE")
        if np.any(np.diff(years) <= 0):
            raise ValueError(f"instrumental series '{self.name}': years must be strictly "
                             "increasing")
        object.__setattr__(self, "year_ce", years.astype(np.int64))
        object.__setattr__(self, "values", values)
