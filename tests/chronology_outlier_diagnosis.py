"""Why planted gross outliers are missed in a truth family: a diagnosis, run by hand.

``python tests/chronology_outlier_diagnosis.py old 80`` fits the default age model to the
first 80 cores of a family of ``chronology_families.py`` (the simulation suite's 20, for
``old`` 60, among them) and prints, for the planted outliers (1,500-4,000 14C yr off), the share caught
(outlier probability > 0.5) by shift size, by position (first or last date vs inside), by
sign and by age, how far the model's median bends towards the outlier, and two references:

- *bracket*: the true age of every other date is known, and of the outlier's age only that
  it lies between its neighbours' true ages (uniform there; the core's true top and bottom
  ages bracket the first and last date). Its outlier probability is
  ``p o / (p o + (1 - p) L)`` with ``L`` and ``o`` the date's calibrated and outlier
  densities averaged over the bracket and ``p`` the outlier prior. It shows how many
  outliers the dates can reveal under ordering alone, whatever the accumulation prior;
- *best scale*: each outlier's odds multiplied by the largest gain in its outlier density
  any Student-t (3 d.o.f.) scale could give at its true shift (the density at shift d is
  largest for the scale d), which bounds what tuning ``outlier_shift_scale`` can do.

A third argument, JSON, passes chronology settings (e.g. ``'{"rate_memory": [0.98]}'``).
The calibrated densities here are normalised on a 1-yr grid over the curve's range; not a
test (it takes about a minute of CPU per 80 cores).
"""

from __future__ import annotations

import json
import pathlib
import sys
import warnings

import numpy as np
import pandas as pd
from scipy import stats

sys.path.insert(0, str(pathlib.Path(__file__).parent))
from chronology_families import FAMILIES, simulate_core_dates, truth  # noqa: E402
from chronology_synthetic import synthetic_core  # noqa: E402

from proxies.chronology import ChronologySettings, build_chronology  # noqa: E402
from proxies.chronology.outliers import OUTLIER_DEGREES_OF_FREEDOM, outlier_scale  # noqa: E402


def date_densities(curve, measured: float, error: float, grid: np.ndarray, settings: ChronologySettings):
    """Calibrated density (normal likelihood, flat prior) and outlier density of one date, per yr."""
    mu, sc = curve.at(np.clip(grid, curve.cal_range[0], curve.cal_range[1]))
    like = stats.norm.pdf(measured, mu, np.hypot(sc, error))
    like /= like.sum()
    mean = float((like * grid).sum())
    sd = float(np.sqrt((like * (grid - mean) ** 2).sum()))
    scale = outlier_scale(mean, sd, *settings.outlier_shift_scale)
    broad = stats.t.pdf((grid - mean) / scale, OUTLIER_DEGREES_OF_FREEDOM) / scale
    return like, broad, mean, scale


def bracket_probability(like, broad, grid, low: float, high: float, prior: float) -> float:
    """Outlier probability when the age is only known to lie in [low, high] [cal BP]."""
    inside = (grid >= low) & (grid <= high)
    o, c = broad[inside].mean(), like[inside].mean()
    return float(prior * o / (prior * o + (1 - prior) * c))


def best_scale_gain(shift_yr: float, scale_yr: float) -> float:
    """Largest factor by which any Student-t scale raises the outlier density at ``shift_yr``."""
    def density(s):
        return (1 / s) * (1 + shift_yr**2 / (OUTLIER_DEGREES_OF_FREEDOM * s**2)) ** -2
    return float(density(max(abs(shift_yr), 1e-9)) / density(scale_yr))


def planted_rows(family: str, cores: int, curve, settings: ChronologySettings, seed: int = 13000) -> pd.DataFrame:
    """One row per planted outlier, drawn exactly as the simulation suite draws its cores."""
    grid = np.arange(max(-100.0, curve.cal_range[0]), curve.cal_range[1], 1.0)
    rows = []
    for i in range(1, cores, 2):  # the suite plants its outliers in the odd cores
        rng = np.random.default_rng([seed, FAMILIES.index(family), i])
        depth, ages = truth(family, rng)
        dates, planted = simulate_core_dates(family, rng, depth, ages, curve, plant_outlier=True)
        if planted is None:
            continue
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            result = build_chronology(synthetic_core(dates, depth[-1]), {"atmosphere": curve}, settings, 400, rng)
        z = dates["depth_cm"].to_numpy(float)
        theta = np.interp(z, depth, ages)
        bracket = np.concatenate([[ages[0]], theta, [ages[-1]]])
        like, broad, mean, scale = date_densities(curve, float(dates["age"][planted]), float(dates["error"][planted]),
                                                  grid, settings)
        hyper = result.hyperparameters
        prob = float(result.dates.set_index("label").loc[dates["label"][planted], "outlier_prob"])
        gain = best_scale_gain(mean - theta[planted], scale)
        odds = prob / max(1 - prob, 1e-12) * gain
        rows.append({
            "core": i, "date": planted, "first_or_last": planted in (0, z.size - 1),
            "shift_14c_yr": dates.attrs["planted_shift_14c_yr"], "true_age": theta[planted], "probability": prob,
            "bend_yr": abs(float(np.median(result.age_at(z[[planted]]))) - theta[planted]),
            "bracket": bracket_probability(like, broad, grid, bracket[planted], bracket[planted + 2],
                                           settings.outlier_prior),
            "best_scale": odds / (1 + odds),
            "variability": float((hyper["rate_variability"] * hyper["weight"]).sum()),
            "memory": float((hyper["rate_memory"] * hyper["weight"]).sum())})
    return pd.DataFrame(rows)


def summary(rows: pd.DataFrame) -> str:
    caught = rows.assign(caught=rows["probability"] > 0.5, bracket_caught=rows["bracket"] > 0.5,
                         best_scale_caught=rows["best_scale"] > 0.5)
    groups = {
        "shift": np.where(caught["shift_14c_yr"].abs() < 2500, "1.5-2.5k", "2.5-4k"),
        "position": np.where(caught["first_or_last"], "first/last", "inside"),
        "sign": np.where(caught["shift_14c_yr"] > 0, "older", "younger"),
        "age": np.where(caught["true_age"] < 15000, "<15 kyr", ">=15 kyr")}
    lines = [f"{len(caught)} planted outliers: caught {caught['caught'].mean():.3f}, bracket reference "
             f"{caught['bracket_caught'].mean():.3f}, best scale {caught['best_scale_caught'].mean():.3f}"]
    for name, labels in groups.items():
        table = caught.groupby(labels).agg(n=("caught", "size"), caught=("caught", "mean"),
                                           bracket=("bracket_caught", "mean"), bend_yr=("bend_yr", "median"),
                                           variability=("variability", "mean"), memory=("memory", "mean"))
        lines.append(f"by {name}:\n{table.round(2).to_string()}")
    lines.append("median bend [yr], missed vs caught: "
                 f"{caught.loc[~caught['caught'], 'bend_yr'].median():.0f} vs "
                 f"{caught.loc[caught['caught'], 'bend_yr'].median():.0f}")
    means = caught.groupby("caught")[["variability", "memory"]].mean().round(2)
    lines.append(f"posterior mean rate variability and memory, missed (False) vs caught (True):\n{means.to_string()}")
    return "\n".join(lines)


if __name__ == "__main__":
    from pipelines.curvefiles import read_curve_file

    curve = read_curve_file(pathlib.Path(__file__).parents[1].parent / "shared" / "reference" / "intcal20.14c",
                            name="atmosphere").on_grid(1.0)
    family = sys.argv[1] if len(sys.argv) > 1 else "old"
    cores = int(sys.argv[2]) if len(sys.argv) > 2 else 80
    keys = json.loads(sys.argv[3]) if len(sys.argv) > 3 else {}
    settings = ChronologySettings(**{k: tuple(v) if isinstance(v, list) else v for k, v in keys.items()})
    print(summary(planted_rows(family, cores, curve, settings)))
