"""Synthetic cores with a known age-depth truth, dated through a calibration curve.

Used by the coverage tests and the chronology benchmark. The truth is a gamma accumulation
process with its own regularity per core (shape 2-8), so the model never sees its own
hyper-parameters; radiocarbon ages are drawn as R ~ N(mu(theta), sigma_c(theta)^2 +
sigma^2), the generative model of calibration (common practice).
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pandas as pd


def simulate_truth(rng, length_cm=300.0, mean_rate=None, shape=None, step_cm=1.0, top_age=-68.0):
    """True ages [cal BP] at depths 0..length_cm (step_cm) from a gamma accumulation process."""
    mean_rate = rng.uniform(8, 40) if mean_rate is None else mean_rate
    shape = rng.uniform(2, 8) if shape is None else shape
    depth = np.arange(0.0, length_cm + step_cm / 2, step_cm)
    increments = rng.gamma(shape, mean_rate * step_cm / shape, depth.size - 1)
    ages = top_age + np.concatenate([[0.0], np.cumsum(increments)])
    return depth, ages


def simulate_dates(rng, depth, ages, curve, n_dates, error_range=(25, 80)):
    """Radiocarbon dates at random depths below the top, through ``curve`` (regular)."""
    chosen = np.sort(rng.choice(np.arange(3, depth.size), size=n_dates, replace=False))
    theta = ages[chosen]
    mu, sc = curve.at(np.clip(theta, curve.cal_range[0], curve.cal_range[1]))
    error = rng.uniform(*error_range, size=n_dates)
    measured = mu + rng.normal(0, 1, n_dates) * np.hypot(sc, error)
    return pd.DataFrame({
        "label": [f"D{i:02d}" for i in range(n_dates)], "depth_cm": depth[chosen], "kind": "radiocarbon",
        "age": np.round(measured), "error": np.round(error), "thickness_cm": 0.0, "curve": None,
        "reservoir_offset": 0.0, "reservoir_error": 0.0, "exclude": False,
        "source_row": np.arange(2, n_dates + 2)})


class _FlatScale:
    """Depth scale with no event layers (event-free depth = composite depth)."""

    def __init__(self, hiatuses=()):
        self.hiatuses_cm = tuple(hiatuses)

    def event_free_depth(self, depth_cm):
        return np.asarray(depth_cm, dtype=float)


def synthetic_core(dates: pd.DataFrame, length_cm: float, collected_ce=2018, hiatuses=()):
    """A minimal duck-typed core with what build_chronology reads."""
    samples = pd.DataFrame({"depth_cm": np.arange(0.0, length_cm + 0.5, 5.0)})
    return SimpleNamespace(id="SYN", folder="", dates=dates, samples=samples, hiatuses_cm=tuple(hiatuses),
                           event_layers=(), depth_scale=_FlatScale(hiatuses), top_age_cal_bp=1950.0 - collected_ce,
                           top_age_error=2.0, collected_ce=collected_ce, top_intact=None, lead210=None)
