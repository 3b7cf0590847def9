"""The demo's known truth: the true regional climate and the invented radiocarbon curves
(parts 1 and 2 of :mod:`make_demo`, which writes them; see its docstring for the forward
models and their sources). Everything here is INVENTED."""

from __future__ import annotations


import numpy as np
import pandas as pd
from scipy.ndimage import gaussian_filter1d

from proxies.seeding import rng_for


__all__ = ["DEMO_SEED", "true_climate", "invented_curves", "CORE_IDS"]

#: the one seed of the demo; every part draws from rng_for(DEMO_SEED, part, ...)
DEMO_SEED = 20190815

#: the year CE every demo core was collected; its top is 1950 - 2019 = -69 cal BP
COLLECTED_CE = 2019
TOP_AGE_CAL_BP = 1950 - COLLECTED_CE

#: oldest age of the true climate history [cal BP]
OLDEST_CAL_BP = 14000

CORE_IDS = ("ULLA-1", "TEL-07", "CORV-3", "TEL-12")

INVENTED_NOTE = "invented for the downcore demo; no real place, core or measurement"

# ---------------------------------------------------------------------------------------------
# 1. the true climate
# ---------------------------------------------------------------------------------------------

#: the abrupt cold event (ages in cal BP; the cooling starts at onset, ends at end of recovery)
EVENT = {
    "onset_cal_bp": 9300.0,
    "cold_start_cal_bp": 9240.0,
    "recovery_start_cal_bp": 9080.0,
    "end_cal_bp": 9000.0,
    "air_temp_amplitude_c": -2.8,
    "sst_amplitude_c": -2.0,
}

#: interannual (weather) variability of summer air temperature and SST [degC, 1 sigma]
AIR_WEATHER_SD = 0.6
SST_WEATHER_SD = 0.3
#: standard deviation of the centennial variability [degC] and its smoothing scale [yr]
AIR_CENTENNIAL_SD = 0.3
SST_CENTENNIAL_SD = 0.2
CENTENNIAL_SMOOTHING_YR = 40.0


def event_shape(age_cal_bp: np.ndarray) -> np.ndarray:
    """Trapezoid of the cold event: 0 outside, 1 in the cold phase, linear ramps between.

    Parameters
    ----------
    age_cal_bp : ndarray
        Ages [cal BP].

    Returns
    -------
    ndarray
        Fraction of the full event amplitude at each age [-].
    """
    age = np.asarray(age_cal_bp, dtype=float)
    onset, cold = EVENT["onset_cal_bp"], EVENT["cold_start_cal_bp"]
    recovery, end = EVENT["recovery_start_cal_bp"], EVENT["end_cal_bp"]
    cooling = np.clip((onset - age) / (onset - cold), 0.0, 1.0)
    warming = np.clip((age - end) / (recovery - end), 0.0, 1.0)
    return np.minimum(cooling, warming)


def air_temperature_trend(age_cal_bp: np.ndarray) -> np.ndarray:
    """Slow part of the true summer air temperature, without event or warming [degC].

    A gradual deglacial warming (logistic, centred on 11,800 cal BP), a mid-Holocene thermal
    maximum (Gaussian bump at 7,000 cal BP) and a neoglacial cooling since 6,000 cal BP.
    """
    age = np.asarray(age_cal_bp, dtype=float)
    deglacial = 3.6 / (1.0 + np.exp((age - 11800.0) / 700.0))
    thermal_maximum = 0.9 * np.exp(-(((age - 7000.0) / 1500.0) ** 2))
    neoglacial = -1.2 * np.clip((6000.0 - age) / 6000.0, 0.0, 1.0)
    return 8.2 + deglacial + thermal_maximum + neoglacial


def instrumental_warming(year_ce: np.ndarray) -> np.ndarray:
    """Warming since 1880 CE, +1.4 degC by 2019 CE for air temperature [degC]."""
    fraction = np.clip((np.asarray(year_ce, dtype=float) - 1880.0) / 139.0, 0.0, 1.0)
    return 1.4 * fraction**1.6


def _centennial_noise(rng: np.random.Generator, n: int, sd: float) -> np.ndarray:
    """White noise smoothed by a Gaussian kernel, rescaled to standard deviation ``sd``."""
    smooth = gaussian_filter1d(rng.normal(size=n), CENTENNIAL_SMOOTHING_YR, mode="reflect")
    smooth -= smooth.mean()
    return sd * smooth / smooth.std()


def true_climate() -> pd.DataFrame:
    """The true annual climate of the invented Skerravine Islands.

    Returns
    -------
    DataFrame
        One row per year from -69 cal BP (2019 CE) to 14,000 cal BP, columns ``age_cal_bp``,
        ``year_ce``, ``air_temp_c`` and ``sst_c`` (that year's summer means, weather
        included), ``air_temp_signal_c`` and ``sst_signal_c`` (the climate without the
        year-to-year weather) [degC].
    """
    rng = rng_for(DEMO_SEED, "truth", "climate")
    age = np.arange(TOP_AGE_CAL_BP, OLDEST_CAL_BP + 1)
    year = 1950 - age
    n = age.size
    trend = air_temperature_trend(age)
    shape = event_shape(age)
    warming = instrumental_warming(year)
    air_centennial = _centennial_noise(rng, n, AIR_CENTENNIAL_SD)
    sst_own = _centennial_noise(rng, n, SST_CENTENNIAL_SD)
    air_signal = trend + air_centennial + EVENT["air_temp_amplitude_c"] * shape + warming
    sst_signal = (
        7.5 + 0.8 * (trend - 8.2) + 0.5 * air_centennial + sst_own
        + EVENT["sst_amplitude_c"] * shape + 0.8 * warming
    )
    air_weather = rng.normal(0.0, AIR_WEATHER_SD, n)
    sst_weather = 0.25 * air_weather + rng.normal(0.0, np.sqrt(SST_WEATHER_SD**2 - (0.25 * AIR_WEATHER_SD) ** 2), n)
    air_signal, sst_signal = np.round(air_signal, 3), np.round(sst_signal, 3)
    return pd.DataFrame({
        "age_cal_bp": age,
        "year_ce": year,
        "air_temp_c": np.round(air_signal + air_weather, 3),
        "sst_c": np.round(sst_signal + sst_weather, 3),
        "air_temp_signal_c": air_signal,
        "sst_signal_c": sst_signal,
    })


def window_mean(climate: pd.DataFrame, column: str, young_cal_bp: float, old_cal_bp: float) -> float:
    """Mean of a true annual series over the years a sample integrates.

    The years counted are the integer ages in ``[young, old)`` (at least the one nearest the
    middle), each with equal weight, so adjacent samples share no year.
    """
    values = climate[column].to_numpy()
    first = int(np.ceil(young_cal_bp)) - TOP_AGE_CAL_BP
    last = int(np.ceil(old_cal_bp)) - 1 - TOP_AGE_CAL_BP
    if last < first:
        first = last = int(round(0.5 * (young_cal_bp + old_cal_bp))) - TOP_AGE_CAL_BP
    return float(values[first : last + 1].mean())


# ---------------------------------------------------------------------------------------------
# 2. the invented radiocarbon curves
# ---------------------------------------------------------------------------------------------

LIBBY_MEAN_LIFE = 8033.0  # yr, 5568 / ln 2 (Stuiver & Polach 1977)
CAMBRIDGE_MEAN_LIFE = 8267.0  # yr, 5730 / ln 2 (Stuiver & Polach 1977)
CURVE_STEP_YR = 5
CURVE_OLDEST_CAL_BP = 20000
MARINE_RESERVOIR_YR = 400.0
MARINE_SMOOTHING_YR = 60.0

CURVE_HEADER = """\
# ============================================================================================
# INVENTED {kind} RADIOCARBON CALIBRATION CURVE -- FOR THE downcore DEMO ONLY.
# NEVER USE IT TO DATE REAL SAMPLES: it is made up and follows no real record.
# ============================================================================================
# Generated by demo_cores/make_demo.py (seed {seed}).
# 14C age = -8033 ln(F14C), F14C = exp(-calBP/8267) (1 + Delta14C/1000), and the Delta14C column
# is the same conversion of the rounded 14C age (Stuiver & Polach 1977, Radiocarbon 19:355).
# {how}
# Columns (comma-separated): cal BP, 14C age [14C yr BP], sigma [14C yr], Delta14C [permil], sigma [permil]
"""


def invented_delta14c(cal_bp: np.ndarray) -> np.ndarray:
    """The invented atmospheric Delta14C history [permil].

    A slow decline from +150 permil at 20,000 cal BP to 0 at 0 cal BP, plus five sinusoidal
    wiggles (periods 2300, 1000, 510, 205 and 88 yr; amplitudes 8, 5, 3.5, 2.5, 1 permil)
    with phases drawn once from the demo seed.
    """
    rng = rng_for(DEMO_SEED, "curves", "wiggles")
    theta = np.asarray(cal_bp, dtype=float)
    decline = 150.0 * (1.0 - np.exp(-theta / 9000.0)) / (1.0 - np.exp(-20000.0 / 9000.0))
    periods = (2300.0, 1000.0, 510.0, 205.0, 88.0)
    amplitudes = (8.0, 5.0, 3.5, 2.5, 1.0)
    phases = rng.uniform(0.0, 2.0 * np.pi, len(periods))
    wiggles = sum(a * np.sin(2.0 * np.pi * theta / p + ph) for a, p, ph in zip(amplitudes, periods, phases))
    return decline + wiggles


def delta14c_from_c14_age(c14_age: np.ndarray, cal_bp: np.ndarray) -> np.ndarray:
    """Delta14C of a sample of known calendar age (Stuiver & Polach 1977) [permil]."""
    f14c = np.exp(-np.asarray(c14_age, dtype=float) / LIBBY_MEAN_LIFE)
    return 1000.0 * (f14c * np.exp(np.asarray(cal_bp, dtype=float) / CAMBRIDGE_MEAN_LIFE) - 1.0)


def _curve_table(cal_bp: np.ndarray, c14: np.ndarray, sigma: np.ndarray) -> pd.DataFrame:
    c14_int = np.round(c14).astype(int)
    sigma_int = np.round(sigma).astype(int)
    d14c = delta14c_from_c14_age(c14_int, cal_bp)
    d14c_sigma = (1000.0 + d14c) * sigma_int / LIBBY_MEAN_LIFE
    table = pd.DataFrame({
        "cal_bp": cal_bp.astype(int),
        "c14_age": c14_int,
        "sigma": sigma_int,
        "delta14c": np.round(d14c, 1),
        "delta14c_sigma": np.round(d14c_sigma, 1),
    })
    return table.iloc[::-1].reset_index(drop=True)  # oldest first, as in the published files


def invented_curves() -> tuple[pd.DataFrame, pd.DataFrame]:
    """The invented atmospheric and marine curves, oldest row first.

    Returns
    -------
    (atmosphere, marine) : tuple of DataFrame
        Columns ``cal_bp``, ``c14_age`` [14C yr BP], ``sigma`` [14C yr], ``delta14c`` [permil],
        ``delta14c_sigma`` [permil] on a 5-yr grid 0-20,000 cal BP.
    """
    cal = np.arange(0, CURVE_OLDEST_CAL_BP + 1, CURVE_STEP_YR, dtype=float)
    f14c = np.exp(-cal / CAMBRIDGE_MEAN_LIFE) * (1.0 + invented_delta14c(cal) / 1000.0)
    c14 = -LIBBY_MEAN_LIFE * np.log(f14c)
    sigma = 10.0 + 12.0 * (cal / 10000.0) ** 1.5
    # marine: the ocean damps the atmospheric wiggles and lags by a reservoir age that was a
    # little larger in the deglaciation (an invented, smooth offset)
    reservoir = MARINE_RESERVOIR_YR + 90.0 * np.exp(-(((cal - 13500.0) / 2000.0) ** 2))
    c14_marine = gaussian_filter1d(c14, MARINE_SMOOTHING_YR / CURVE_STEP_YR, mode="nearest") + reservoir
    sigma_marine = np.sqrt(sigma**2 + 20.0**2)
    return _curve_table(cal, c14, sigma), _curve_table(cal, c14_marine, sigma_marine)


def _curve_text(table: pd.DataFrame, kind: str, how: str) -> str:
    body = table.to_csv(index=False, header=False, lineterminator="\n")
    return CURVE_HEADER.format(kind=kind, seed=DEMO_SEED, how=how) + body


