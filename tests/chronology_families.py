"""Truth families for the chronology simulation suite (our own, not the model's prior).

Each family draws a true age-depth curve by a process the age models do not assume, then
radiocarbon dates through a calibration curve as R ~ N(mu(theta), sigma_c(theta)^2 + sigma^2)
(the generative model of calibration, common practice). Some cores get one planted gross
outlier, 1,500-4,000 14C yr off.

- ``regimes``: 3-5 regimes of constant deposition time, each drawn log-uniform in 5-50 yr/cm,
  with 10 % wiggles from cm to cm;
- ``compacted_top``: an uncompacted top (~5 yr/cm over the first 40-80 cm) over compacted
  sediment (~30 yr/cm), joined over 10 cm;
- ``few_dates``: smooth rate changes, only 3-4 dates;
- ``clustered``: 10 dates, all in one half of the core;
- ``old``: regimes as above, scaled so that the core reaches 25-45 kyr (larger radiocarbon
  errors, 80-400 14C yr);
- ``own``: the independent gamma increments of the ``accumulation`` model (shape 2-8).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

TOP_AGE = -68.0
FAMILIES = ("regimes", "compacted_top", "few_dates", "clustered", "old", "own")


def _ages_from_rates(rates_yr_cm: np.ndarray) -> np.ndarray:
    return TOP_AGE + np.concatenate([[0.0], np.cumsum(rates_yr_cm)])


def truth(family: str, rng: np.random.Generator, length_cm: float = 300.0):
    """Depths 0..length_cm (1-cm steps) and their true ages [cal BP]."""
    n = int(length_cm)
    depth = np.arange(n + 1, dtype=float)
    if family in ("regimes", "old"):
        cuts = np.sort(rng.choice(np.arange(20, n - 20), size=rng.integers(2, 5), replace=False))
        levels = np.exp(rng.uniform(np.log(5), np.log(50), cuts.size + 1))
        rate = levels[np.searchsorted(cuts, np.arange(n), side="right")]
        rate = rate * np.exp(rng.normal(0, 0.1, n))
        if family == "old":  # the same regimes, scaled to reach 25-45 kyr at the base
            rate = rate * (rng.uniform(25000, 45000) - TOP_AGE) / rate.sum()
    elif family == "compacted_top":
        soft = rng.uniform(40, 80)
        mix = 1 / (1 + np.exp(-(np.arange(n) - soft) / 2.5))
        rate = (rng.uniform(4, 6) * (1 - mix) + rng.uniform(25, 35) * mix) * np.exp(rng.normal(0, 0.1, n))
    elif family in ("few_dates", "clustered"):
        knots = np.exp(rng.uniform(np.log(8), np.log(40), 5))
        rate = np.interp(np.arange(n), np.linspace(0, n, 5), knots) * np.exp(rng.normal(0, 0.1, n))
    elif family == "own":
        shape = rng.uniform(2, 8)
        rate = rng.gamma(shape, rng.uniform(8, 40) / shape, n)
    else:
        raise ValueError(family)
    return depth, _ages_from_rates(rate)


def date_depths(family: str, rng: np.random.Generator, length_cm: float) -> np.ndarray:
    if family == "few_dates":
        count = int(rng.integers(3, 5))
        return np.sort(rng.choice(np.arange(10, int(length_cm)), count, replace=False)).astype(float)
    if family == "clustered":
        half = (5, int(length_cm) // 2) if rng.random() < 0.5 else (int(length_cm) // 2, int(length_cm))
        return np.sort(rng.choice(np.arange(*half), 10, replace=False)).astype(float)
    return np.sort(rng.choice(np.arange(5, int(length_cm)), 10 if family != "compacted_top" else 8,
                              replace=False)).astype(float)


def simulate_core_dates(family: str, rng, depth, ages, curve, plant_outlier: bool):
    """Dates table and the index of the planted outlier (or None)."""
    where = date_depths(family, rng, depth[-1])
    theta = np.interp(where, depth, ages)
    mu, sc = curve.at(np.clip(theta, curve.cal_range[0], curve.cal_range[1]))
    low, high = (80, 400) if family == "old" else (25, 80)
    error = rng.uniform(low, high, where.size)
    measured = mu + rng.normal(0, 1, where.size) * np.hypot(sc, error)
    planted = None
    if plant_outlier and where.size >= 4:
        planted = int(rng.integers(where.size))
        shift = rng.uniform(1500, 4000) * rng.choice([-1, 1])
        if measured[planted] + shift < 200:
            shift = abs(shift)
        measured[planted] += shift
    table = pd.DataFrame({
        "label": [f"S{i:02d}" for i in range(where.size)], "depth_cm": where, "kind": "radiocarbon",
        "age": np.round(measured), "error": np.round(error), "thickness_cm": 0.0, "curve": None,
        "reservoir_offset": 0.0, "reservoir_error": 0.0, "exclude": False,
        "source_row": np.arange(2, where.size + 2)})
    table.attrs["planted_shift_14c_yr"] = float(shift) if planted is not None else 0.0
    return table, planted
