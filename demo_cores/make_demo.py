"""Generate the invented downcore demo scenario from a known true climate history.

Everything written by this script is INVENTED: the Skerravine Islands, their lakes, the
Telvanic Sea, the weather station, every core, every date and the radiocarbon calibration
curve. The invented curve must never be used to date real samples.

The script builds, in order,

1. a true regional climate (summer air temperature and sea-surface temperature, one value per
   year from 14,000 cal BP to 2019 CE = -69 cal BP) with a slow trend, centennial variability,
   one abrupt cold event and an instrumental-era warming;
2. an invented atmospheric radiocarbon curve in the published five-column layout, and an
   invented marine curve (atmosphere smoothed, plus a ~400-yr reservoir age);
3. four cores with known true age-depth relations, forward-modelled proxies and simulated dates:
   ULLA-1 (varved lake, midge counts, two sections, a turbidite), TEL-07 (marine, Mg/Ca and
   UK'37, Excel samples table), CORV-3 (annually laminated lake, biogenic silica, depths in
   mm) and TEL-12 (marine, TEX86, a hiatus, Parquet samples and TSV dates);
4. a modern midge training set of 140 invented lakes;
5. an instrumental summer air-temperature series 1850-2019 CE;

and writes the truth beside the data in ``truth/``. All randomness comes from
``proxies.seeding.rng_for(DEMO_SEED, <part>, ...)`` so each part has its own stream; running
the script twice gives byte-identical files.

Usage::

    python demo_cores/make_demo.py            # regenerate in demo_cores/
    python demo_cores/make_demo.py OUT_DIR    # write the scenario somewhere else

Forward models (coefficients from memory of the papers; see demo_cores/README.md)
--------------------------------------------------------------------------------
- Radiocarbon: conventional age t = -8033 ln(F14C); Delta14C = 1000 (F14C exp(cal BP/8267) - 1)
  (Stuiver & Polach 1977, Radiocarbon 19:355, doi:10.1017/S0033822200003672).
- Mg/Ca = 0.38 exp(0.090 T) [mmol/mol] (Anand, Elderfield & Conte 2003, Paleoceanography
  18:1050, doi:10.1029/2002PA000846).
- UK'37 = 0.033 T + 0.044 (Mueller et al. 1998, Geochim. Cosmochim. Acta 62:1757,
  doi:10.1016/S0016-7037(98)00097-0).
- SST = 68.4 log10(TEX86) + 38.6 (Kim et al. 2010, Geochim. Cosmochim. Acta 74:4639,
  doi:10.1016/j.gca.2010.05.027).
- Midge abundances: Gaussian response curves on July air temperature (ter Braak & Looman 1986,
  Vegetatio 65:3, doi:10.1007/BF00032121), lognormal ecological noise, multinomial counting.
- Biogenic silica: an invented linear response, ``bsi_percent = 2.5 T - 10``.
"""

from __future__ import annotations

import datetime
import io
import pathlib
import re
import sys
import zipfile
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.ndimage import gaussian_filter1d

from proxies.seeding import rng_for

__all__ = ["DEMO_SEED", "main", "true_climate", "invented_curves", "CORE_IDS"]

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


# ---------------------------------------------------------------------------------------------
# 3. cores: true age-depth relations
# ---------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class AgeDepth:
    """A true age-depth relation: piecewise-constant deposition time in event-free depth.

    Attributes
    ----------
    segments : tuple of (thickness_cm, yr_per_cm, gap_yr)
        From the top down: event-free thickness of each segment [cm], its deposition time
        [yr/cm] and a hiatus at its top [yr] (0 for none).
    event_layers : tuple of (top_cm, bottom_cm)
        Instantaneous deposits in composite depth [cm]; the age is constant across them.
    top_age_cal_bp : float
        Age of the core top [cal BP].
    """

    segments: tuple[tuple[float, float, float], ...]
    event_layers: tuple[tuple[float, float], ...] = ()
    top_age_cal_bp: float = float(TOP_AGE_CAL_BP)

    @property
    def bottom_cm(self) -> float:
        """Composite depth of the bottom of the last segment [cm]."""
        return sum(s[0] for s in self.segments) + sum(b - t for t, b in self.event_layers)

    @property
    def hiatus_depths_cm(self) -> tuple[float, ...]:
        """Composite depths of the hiatuses [cm]."""
        tops = np.concatenate([[0.0], np.cumsum([s[0] for s in self.segments])[:-1]])
        return tuple(float(self.composite_from_event_free(t)) for t, s in zip(tops, self.segments) if s[2] > 0)

    def event_free(self, depth_cm) -> np.ndarray:
        """Composite depth -> event-free depth (event layers cut out) [cm]."""
        depth = np.asarray(depth_cm, dtype=float)
        removed = np.zeros_like(depth)
        for top, bottom in self.event_layers:
            removed += np.clip(depth - top, 0.0, bottom - top)
        return depth - removed

    def composite_from_event_free(self, event_free_cm) -> np.ndarray:
        """Event-free depth -> composite depth (just above any event layer there) [cm]."""
        depth = np.asarray(event_free_cm, dtype=float).copy()
        for top, bottom in self.event_layers:
            depth = np.where(depth > self.event_free(top), depth + (bottom - top), depth)
        return depth

    def age(self, depth_cm) -> np.ndarray:
        """True age at composite depth [cal BP]; below a hiatus depth the older side holds."""
        d = self.event_free(depth_cm)
        thickness = np.array([s[0] for s in self.segments])
        rate = np.array([s[1] for s in self.segments])
        gap = np.array([s[2] for s in self.segments])
        seg_top = np.concatenate([[0.0], np.cumsum(thickness)[:-1]])
        seg_top_age = self.top_age_cal_bp + np.cumsum(gap) + np.concatenate([[0.0], np.cumsum(thickness * rate)[:-1]])
        index = np.clip(np.searchsorted(seg_top, d, side="right") - 1, 0, len(thickness) - 1)
        return seg_top_age[index] + (d - seg_top[index]) * rate[index]

    def depth_at_age(self, age_cal_bp: float) -> float:
        """Composite depth of a given true age (no hiatus between) [cm], by bisection."""
        low, high = 0.0, self.bottom_cm
        for _ in range(60):
            middle = 0.5 * (low + high)
            if self.age(middle) < age_cal_bp:
                low = middle
            else:
                high = middle
        return 0.5 * (low + high)


ULLA_AGE_DEPTH = AgeDepth(
    segments=((70.0, 8.0, 0.0), (250.0, 14.0, 0.0), (380.0, 12.0, 0.0), (200.0, 17.5, 0.0)),
    event_layers=((312.0, 318.5),),
)
ULLA_SECTION_B_TOP_CM = 470.0

TEL07_AGE_DEPTH = AgeDepth(segments=((15.0, 20.0, 0.0), (200.0, 28.0, 0.0), (160.0, 25.0, 0.0), (140.0, 30.0, 0.0)))

CORV_AGE_DEPTH = AgeDepth(segments=((6.0, 5.0, 0.0), (20.0, 6.5, 0.0), (22.0, 7.5, 0.0), (12.0, 7.0, 0.0)))

TEL12_AGE_DEPTH = AgeDepth(segments=((30.0, 40.0, 0.0), (60.0, 45.0, 0.0), (100.0, 40.0, 1500.0), (30.0, 35.0, 0.0)))


def _window_ages(model: AgeDepth, depth_cm: np.ndarray, thickness_cm: np.ndarray):
    """True ages at the top and bottom of each sample slice, rounded as stored [cal BP]."""
    return (np.round(model.age(depth_cm - thickness_cm / 2), 2),
            np.round(model.age(depth_cm + thickness_cm / 2), 2))


def _ages_table(model: AgeDepth, step_cm: float) -> pd.DataFrame:
    depth = np.round(np.arange(0.0, model.bottom_cm + step_cm / 2, step_cm), 4)
    return pd.DataFrame({"depth_cm": depth, "age_cal_bp": np.round(model.age(depth), 2)})


# ---------------------------------------------------------------------------------------------
# 3. cores: simulated dates
# ---------------------------------------------------------------------------------------------

def _curve_mean_sigma(curve: pd.DataFrame, cal_bp: float) -> tuple[float, float]:
    cal = curve["cal_bp"].to_numpy()[::-1]
    return (float(np.interp(cal_bp, cal, curve["c14_age"].to_numpy()[::-1])),
            float(np.interp(cal_bp, cal, curve["sigma"].to_numpy()[::-1])))


def simulate_radiocarbon(rng, curve: pd.DataFrame, true_age: float, lab_error: float,
                         offset_mean: float = 0.0, offset_sd: float = 0.0) -> float:
    """A measured 14C age for a sample of known calendar age [14C yr BP].

    The sample's true 14C age is the curve mean plus a draw from the curve's own uncertainty,
    plus a local reservoir offset drawn from N(offset_mean, offset_sd); the laboratory adds
    Gaussian noise with the quoted error. Rounded to whole years as laboratories report.
    """
    mean, sigma = _curve_mean_sigma(curve, true_age)
    offset = rng.normal(offset_mean, offset_sd) if offset_sd > 0 else offset_mean
    return float(np.round(mean + rng.normal(0.0, sigma) + offset + rng.normal(0.0, lab_error)))


def _lab_error(rng, true_age: float, low: float, high: float, oldest: float) -> float:
    """Quoted 1-sigma laboratory error growing with age, rounded to 5 yr [14C yr]."""
    base = low + (high - low) * min(true_age / oldest, 1.0)
    return float(max(low, 5.0 * np.round((base + rng.normal(0.0, 4.0)) / 5.0)))


def _slice_age(rng, model: AgeDepth, depth_cm: float, thickness_cm: float) -> float:
    """True age of dated material from a random depth within its slice [cal BP]."""
    return float(model.age(depth_cm + thickness_cm * (rng.uniform() - 0.5)))


# ---------------------------------------------------------------------------------------------
# 3. cores: the midge response model (shared with the training set)
# ---------------------------------------------------------------------------------------------

N_TAXA = 30
TAXA = tuple(f"taxon_{k:02d}" for k in range(1, N_TAXA + 1))
ECOLOGICAL_NOISE_SD = 0.8  # lognormal multiplicative noise on each taxon's abundance


def midge_responses() -> pd.DataFrame:
    """Gaussian response curves of the invented taxa on July air temperature.

    Returns
    -------
    DataFrame
        ``taxon``, ``optimum_c`` [degC], ``tolerance_c`` [degC], ``max_abundance`` [-].
    """
    rng = rng_for(DEMO_SEED, "midges", "responses")
    optima = np.linspace(3.5, 18.5, N_TAXA) + rng.normal(0.0, 0.4, N_TAXA)
    tolerance = rng.uniform(1.5, 4.0, N_TAXA)
    height = rng.lognormal(0.0, 0.6, N_TAXA)
    return pd.DataFrame({
        "taxon": TAXA,
        "optimum_c": np.round(optima, 3),
        "tolerance_c": np.round(tolerance, 3),
        "max_abundance": np.round(height, 4),
    })


def draw_midge_counts(rng, responses: pd.DataFrame, temperature_c: float, n_heads: int) -> np.ndarray:
    """One multinomial draw of head capsules from the Gaussian response model.

    Expected abundance of taxon k: h_k exp(-(T - u_k)^2 / (2 t_k^2)), times lognormal
    ecological noise; proportions are the normalised abundances.
    """
    u = responses["optimum_c"].to_numpy()
    t = responses["tolerance_c"].to_numpy()
    h = responses["max_abundance"].to_numpy()
    abundance = h * np.exp(-((temperature_c - u) ** 2) / (2.0 * t**2))
    abundance = abundance * rng.lognormal(0.0, ECOLOGICAL_NOISE_SD, u.size)
    return rng.multinomial(n_heads, abundance / abundance.sum())


# ---------------------------------------------------------------------------------------------
# 3a. ULLA-1: varved lake, midges, two sections, a turbidite
# ---------------------------------------------------------------------------------------------

def _ulla_sample_depths() -> np.ndarray:
    regular = np.arange(2.5, 905.0, 5.0)
    regular = regular[(regular < 728.0) | (regular > 772.0)]
    dense = np.arange(729.0, 772.0, 1.5)
    depth = np.sort(np.concatenate([regular, dense]))
    top, bottom = ULLA_AGE_DEPTH.event_layers[0]
    return depth[(depth + 0.5 <= top) | (depth - 0.5 >= bottom)]


def _section_columns(composite_cm: np.ndarray) -> tuple[list[str], np.ndarray]:
    in_b = composite_cm >= ULLA_SECTION_B_TOP_CM
    return (["B" if b else "A" for b in in_b],
            np.round(np.where(in_b, composite_cm - ULLA_SECTION_B_TOP_CM, composite_cm), 2))


def make_ulla(climate: pd.DataFrame, atmosphere: pd.DataFrame, responses: pd.DataFrame) -> dict:
    """ULLA-1 tables and truth (see module docstring)."""
    model = ULLA_AGE_DEPTH
    rng = rng_for(DEMO_SEED, "core", "ULLA-1")
    depth = _ulla_sample_depths()
    thickness = np.full(depth.size, 1.0)
    young, old = _window_ages(model, depth, thickness)
    temperature = np.array([window_mean(climate, "air_temp_c", y, o) for y, o in zip(young, old)])
    n_heads = rng.integers(150, 301, depth.size)
    counts = np.vstack([draw_midge_counts(rng, responses, t, n) for t, n in zip(temperature, n_heads)])
    section, section_depth = _section_columns(depth)
    samples = pd.DataFrame({"section": section, "depth_cm": section_depth, "thickness_cm": thickness})
    count_table = pd.DataFrame({"section": section, "depth_cm": section_depth})
    count_table = pd.concat([count_table, pd.DataFrame(counts, columns=list(TAXA))], axis=1)

    # 15 radiocarbon dates on terrestrial macrofossils, one reworked (too old) outlier
    date_depth = np.array([38.0, 95.5, 152.0, 210.0, 268.5, 331.0, 392.0, 455.0, 520.5, 584.0,
                           641.0, 703.5, 760.0, 821.0, 884.0])
    outlier_index = 7
    rows, truth = [], []
    for k, z in enumerate(date_depth):
        true_age = _slice_age(rng, model, z, 1.0)
        error = _lab_error(rng, true_age, 25.0, 80.0, 12000.0)
        age = simulate_radiocarbon(rng, atmosphere, true_age, error)
        if k == outlier_index:
            age += 850.0  # reworked older plant remains
        label = f"ULLA1-R{k + 1:02d}"
        rows.append((label, z, 1.0, "radiocarbon", age, error, "atmosphere", "terrestrial plant macrofossil"))
        truth.append((label, z, true_age, k == outlier_index))
    # an invented tephra with an independently known calendar age
    tephra_depth = 240.0  # between R04 and R05
    tephra_true = float(model.age(tephra_depth))
    tephra_error = 35.0
    tephra_age = float(np.round(tephra_true + rng.normal(0.0, tephra_error)))
    rows.append(("ULLA1-Teph-Orvik", tephra_depth, np.nan, "calendar", tephra_age, tephra_error, "",
                 "Orvik tephra (invented), calendar age from elsewhere"))
    truth.append(("ULLA1-Teph-Orvik", tephra_depth, tephra_true, False))
    rows.sort(key=lambda r: r[1])
    truth.sort(key=lambda r: r[1])
    composite = np.array([r[1] for r in rows])
    section, section_depth = _section_columns(composite)
    dates = pd.DataFrame(rows, columns=["label", "depth_cm", "thickness_cm", "kind", "age", "error", "curve", "material"])
    dates["depth_cm"] = section_depth
    dates.insert(0, "section", section)
    truth_dates = pd.DataFrame(truth, columns=["label", "depth_cm", "true_age_cal_bp", "outlier"])
    truth_dates["true_age_cal_bp"] = truth_dates["true_age_cal_bp"].round(2)

    truth_samples = pd.DataFrame({
        "depth_cm": depth, "age_young_cal_bp": np.round(young, 2), "age_old_cal_bp": np.round(old, 2),
        "age_cal_bp": np.round(model.age(depth), 2), "air_temp_c": np.round(temperature, 3),
        "n_head_capsules": n_heads,
    })
    return {"samples": samples, "counts": count_table, "dates": dates,
            "truth_samples": truth_samples, "truth_dates": truth_dates, "ages": _ages_table(model, 0.5)}


# ---------------------------------------------------------------------------------------------
# 3b. TEL-07: marine, Mg/Ca and UK'37, Excel samples
# ---------------------------------------------------------------------------------------------

MGCA_A, MGCA_B = 0.38, 0.090  # Anand et al. 2003: Mg/Ca = A exp(B T)
UK37_SLOPE, UK37_INTERCEPT = 0.033, 0.044  # Mueller et al. 1998: UK'37 = slope T + intercept
TEX86_SLOPE, TEX86_INTERCEPT = 68.4, 38.6  # Kim et al. 2010: SST = slope log10(TEX86) + intercept
MGCA_RELATIVE_ERROR = 0.025  # analytical, 1 sigma, relative
UK37_ERROR = 0.008  # analytical, 1 sigma
TEX86_ERROR = 0.01  # analytical, 1 sigma
NONCLIMATE_SD_C = {"mgca_mmol_mol": 0.4, "uk37": 0.5, "tex86": 0.6}  # extra scatter [degC]
RESERVOIR_OFFSET, RESERVOIR_ERROR = 45.0, 30.0  # local offset from the marine curve [14C yr]


def mgca_from_sst(sst_c):
    """Mg/Ca = 0.38 exp(0.090 T) [mmol/mol] (Anand et al. 2003)."""
    return MGCA_A * np.exp(MGCA_B * np.asarray(sst_c, dtype=float))


def uk37_from_sst(sst_c):
    """UK'37 = 0.033 T + 0.044 [-] (Mueller et al. 1998)."""
    return UK37_SLOPE * np.asarray(sst_c, dtype=float) + UK37_INTERCEPT


def tex86_from_sst(sst_c):
    """TEX86 = 10^((T - 38.6) / 68.4) [-] (inverse of Kim et al. 2010)."""
    return 10.0 ** ((np.asarray(sst_c, dtype=float) - TEX86_INTERCEPT) / TEX86_SLOPE)


def _marine_dates(rng, model: AgeDepth, marine: pd.DataFrame, depths, prefix: str,
                  excluded: int | None, oldest: float) -> tuple[pd.DataFrame, pd.DataFrame]:
    rows, truth = [], []
    for k, z in enumerate(depths):
        true_age = _slice_age(rng, model, z, 1.0)
        error = _lab_error(rng, true_age, 30.0, 80.0, oldest)
        age = simulate_radiocarbon(rng, marine, true_age, error, RESERVOIR_OFFSET, RESERVOIR_ERROR)
        flagged = k == excluded
        if flagged:
            age += 620.0  # reworked older shells; the lab flagged the sample
        label = f"{prefix}-R{k + 1:02d}"
        rows.append((label, float(z), 1.0, "radiocarbon", age, error, "marine",
                     RESERVOIR_OFFSET, RESERVOIR_ERROR, "true" if flagged else "false",
                     "planktonic foraminifera"))
        truth.append((label, float(z), round(true_age, 2), flagged))
    dates = pd.DataFrame(rows, columns=["label", "depth_cm", "thickness_cm", "kind", "age", "error", "curve",
                                        "reservoir_offset", "reservoir_error", "exclude", "material"])
    return dates, pd.DataFrame(truth, columns=["label", "depth_cm", "true_age_cal_bp", "outlier"])


def _sst_proxy_samples(rng, climate, model: AgeDepth, depth, thickness, proxies: tuple[str, ...]):
    young, old = _window_ages(model, depth, thickness)
    sst = np.array([window_mean(climate, "sst_c", y, o) for y, o in zip(young, old)])
    truth = pd.DataFrame({
        "depth_cm": depth, "age_young_cal_bp": np.round(young, 2), "age_old_cal_bp": np.round(old, 2),
        "age_cal_bp": np.round(model.age(depth), 2), "sst_c": np.round(sst, 3),
    })
    samples = pd.DataFrame({"depth_cm": depth, "thickness_cm": thickness})
    forward = {"mgca_mmol_mol": mgca_from_sst, "uk37": uk37_from_sst, "tex86": tex86_from_sst}
    for proxy in proxies:
        effective = sst + rng.normal(0.0, NONCLIMATE_SD_C[proxy], sst.size)
        if proxy == "mgca_mmol_mol":
            value = forward[proxy](effective) * (1.0 + rng.normal(0.0, MGCA_RELATIVE_ERROR, sst.size))
            samples[proxy] = np.round(value, 3)
            samples[proxy + "_error"] = np.round(MGCA_RELATIVE_ERROR * samples[proxy], 3)
        else:
            error = UK37_ERROR if proxy == "uk37" else TEX86_ERROR
            samples[proxy] = np.round(forward[proxy](effective) + rng.normal(0.0, error, sst.size), 3)
            samples[proxy + "_error"] = error
        truth[proxy + "_noiseless"] = np.round(forward[proxy](sst), 5)
    return samples, truth


def make_tel07(climate: pd.DataFrame, marine: pd.DataFrame) -> dict:
    """TEL-07 tables and truth: Mg/Ca and UK'37 every 2.5 cm, 12 foraminifera dates."""
    model = TEL07_AGE_DEPTH
    rng = rng_for(DEMO_SEED, "core", "TEL-07")
    depth = np.arange(1.0, 513.0, 2.5)
    samples, truth = _sst_proxy_samples(rng, climate, model, depth, np.full(depth.size, 1.0),
                                        ("mgca_mmol_mol", "uk37"))
    # missing measurements: too few alkenones in some samples, too few shells in three
    no_uk37 = rng.choice(depth.size, 16, replace=False)
    no_mgca = rng.choice(np.setdiff1d(np.arange(depth.size), no_uk37), 3, replace=False)
    samples.loc[no_uk37, ["uk37", "uk37_error"]] = np.nan
    samples.loc[no_mgca, ["mgca_mmol_mol", "mgca_mmol_mol_error"]] = np.nan
    date_depth = np.array([16.0, 48.0, 91.0, 134.5, 178.0, 221.0, 263.5, 306.0, 349.0, 392.5, 436.0, 479.0, 508.0])
    dates, truth_dates = _marine_dates(rng, model, marine, date_depth, "TEL07", excluded=5, oldest=14000.0)
    return {"samples": samples, "dates": dates, "truth_samples": truth, "truth_dates": truth_dates,
            "ages": _ages_table(model, 0.5)}


# ---------------------------------------------------------------------------------------------
# 3c. CORV-3: annually laminated lake, biogenic silica, depths in mm
# ---------------------------------------------------------------------------------------------

BSI_INTERCEPT, BSI_SLOPE = -10.0, 2.5  # invented: bsi_percent = 2.5 T - 10
BSI_NOISE_SD, BSI_ERROR = 0.35, 0.25  # non-climatic scatter and quoted analytical error [%]


def bsi_from_air_temperature(air_temp_c):
    """Invented biogenic-silica response: bsi = 2.5 T - 10 [% dry mass]."""
    return BSI_INTERCEPT + BSI_SLOPE * np.asarray(air_temp_c, dtype=float)


def make_corv(climate: pd.DataFrame) -> dict:
    """CORV-3 tables and truth: contiguous 6-mm samples, varve-count and 137Cs dates."""
    model = CORV_AGE_DEPTH
    rng = rng_for(DEMO_SEED, "core", "CORV-3")
    depth = np.arange(0.3, 60.0, 0.6)  # cm: contiguous 6-mm slices, 3.5-4.5 yr each
    thickness = np.full(depth.size, 0.6)
    young, old = _window_ages(model, depth, thickness)
    air = np.array([window_mean(climate, "air_temp_c", y, o) for y, o in zip(young, old)])
    noiseless = bsi_from_air_temperature(air)
    measured = noiseless + rng.normal(0.0, np.hypot(BSI_NOISE_SD, BSI_ERROR), depth.size)
    samples = pd.DataFrame({
        "depth_mm": np.round(10.0 * depth, 1), "thickness_mm": np.round(10.0 * thickness, 1),
        "bsi_percent": np.round(measured, 2), "bsi_percent_error": BSI_ERROR,
    })
    truth = pd.DataFrame({
        "depth_cm": np.round(depth, 3), "age_young_cal_bp": np.round(young, 2), "age_old_cal_bp": np.round(old, 2),
        "age_cal_bp": np.round(model.age(depth), 2), "air_temp_c": np.round(air, 3),
        "bsi_percent_noiseless": np.round(noiseless, 4),
    })
    # varve counts every 50 mm: counting errors accumulate downwards (random walk)
    rows, truth_dates = [], []
    count_depth_cm = np.arange(5.0, 60.0 + 1e-9, 5.0)
    drift, counted_years = 0.0, 0.0
    for k, z in enumerate(count_depth_cm):
        true_age = float(model.age(z))
        years = true_age - TOP_AGE_CAL_BP
        drift += rng.normal(0.0, 0.15 * np.sqrt(years - counted_years))
        counted_years = years
        error = float(np.round(0.5 + 0.01 * years, 1))
        label = f"CORV3-V{k + 1:02d}"
        rows.append((label, round(10.0 * z, 1), "calendar", float(np.round(true_age + drift)), error, "varve count"))
        truth_dates.append((label, z, round(true_age, 2), False))
    cs_depth = round(model.depth_at_age(1950.0 - 1963.0), 2)  # 137Cs fallout peak, 1963 CE
    rows.append(("CORV3-Cs1963", round(10.0 * cs_depth, 1), "calendar", -13.0, 2.0, "137Cs fallout peak (1963 CE)"))
    truth_dates.append(("CORV3-Cs1963", cs_depth, round(float(model.age(cs_depth)), 2), False))
    rows.sort(key=lambda r: r[1])
    truth_dates.sort(key=lambda r: r[1])
    dates = pd.DataFrame(rows, columns=["label", "depth_mm", "kind", "age", "error", "material"])
    return {"samples": samples, "dates": dates, "truth_samples": truth,
            "truth_dates": pd.DataFrame(truth_dates, columns=["label", "depth_cm", "true_age_cal_bp", "outlier"]),
            "ages": _ages_table(model, 0.1)}


# ---------------------------------------------------------------------------------------------
# 3d. TEL-12: marine, TEX86, a hiatus, Parquet samples and TSV dates
# ---------------------------------------------------------------------------------------------

def make_tel12(climate: pd.DataFrame, marine: pd.DataFrame) -> dict:
    """TEL-12 tables and truth: TEX86 every 2 cm, 9 foraminifera dates, a 1500-yr hiatus."""
    model = TEL12_AGE_DEPTH
    rng = rng_for(DEMO_SEED, "core", "TEL-12")
    depth = np.arange(1.0, 220.0, 2.0)
    samples, truth = _sst_proxy_samples(rng, climate, model, depth, np.full(depth.size, 1.0), ("tex86",))
    date_depth = np.array([8.5, 31.0, 56.0, 80.5, 101.0, 128.0, 157.5, 184.0, 214.0])
    dates, truth_dates = _marine_dates(rng, model, marine, date_depth, "TEL12", excluded=None, oldest=11000.0)
    return {"samples": samples, "dates": dates, "truth_samples": truth, "truth_dates": truth_dates,
            "ages": _ages_table(model, 0.5)}


# ---------------------------------------------------------------------------------------------
# 4. modern training set, 5. instrumental series
# ---------------------------------------------------------------------------------------------

N_TRAINING_LAKES = 140
TRAINING_TEMPERATURE_SD = 0.5  # error of the lakes' July air temperature (interpolated normals) [degC]
STATION_NOISE_SD = 0.25  # local weather and measurement noise of the station [degC]


def make_training(responses: pd.DataFrame) -> pd.DataFrame:
    """140 invented lakes: July air temperature and midge percentages of 150-300 head capsules."""
    rng = rng_for(DEMO_SEED, "training", "midges")
    temperature = np.sort(rng.uniform(4.5, 17.5, N_TRAINING_LAKES))[rng.permutation(N_TRAINING_LAKES)]
    latitude = np.clip(62.3 - 0.55 * (temperature - 4.5) + rng.normal(0.0, 0.6, N_TRAINING_LAKES), 54.0, 62.5)
    longitude = rng.uniform(-38.0, -26.0, N_TRAINING_LAKES)
    n_heads = rng.integers(150, 301, N_TRAINING_LAKES)
    counts = np.vstack([draw_midge_counts(rng, responses, t, n) for t, n in zip(temperature, n_heads)])
    percent = np.round(100.0 * counts / n_heads[:, None], 2)
    reported = temperature + rng.normal(0.0, TRAINING_TEMPERATURE_SD, N_TRAINING_LAKES)
    table = pd.DataFrame({
        "lake_id": [f"SKV-L{k:03d}" for k in range(1, N_TRAINING_LAKES + 1)],
        "latitude": np.round(latitude, 3), "longitude": np.round(longitude, 3),
        "july_air_temp_c": np.round(reported, 2),
    })
    return pd.concat([table, pd.DataFrame(percent, columns=list(TAXA))], axis=1)


def make_station(climate: pd.DataFrame) -> pd.DataFrame:
    """Summer (July) mean air temperature 1850-2019 CE at the invented Ullamere Ridge station."""
    rng = rng_for(DEMO_SEED, "instrumental", "station")
    years = np.arange(1850, COLLECTED_CE + 1)
    truth = climate.set_index("year_ce").loc[years, "air_temp_c"].to_numpy()
    value = np.round(truth + rng.normal(0.0, STATION_NOISE_SD, years.size), 2)
    value[np.isin(years, (1917, 1918))] = np.nan  # station closed (invented gap)
    return pd.DataFrame({"year_ce": years, "air_temp_c": value})


# ---------------------------------------------------------------------------------------------
# writing
# ---------------------------------------------------------------------------------------------

_FIXED_TIME = datetime.datetime(2019, 8, 15, 0, 0, 0)


def _write_text(path: pathlib.Path, text: str) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(text.encode("utf-8"))


def _write_csv(path: pathlib.Path, table: pd.DataFrame, sep: str = ",") -> None:
    _write_text(path, table.to_csv(index=False, sep=sep, lineterminator="\n"))


def _write_xlsx(path: pathlib.Path, table: pd.DataFrame, sheet: str) -> None:
    """Excel workbook with fixed document times and zip-entry times, so bytes repeat."""
    buffer = io.BytesIO()
    with pd.ExcelWriter(buffer, engine="openpyxl") as writer:
        table.to_excel(writer, index=False, sheet_name=sheet)
        properties = writer.book.properties
        properties.creator = "downcore demo (invented data)"
        properties.created = properties.modified = _FIXED_TIME
    repacked = io.BytesIO()
    with zipfile.ZipFile(buffer) as source, zipfile.ZipFile(repacked, "w", zipfile.ZIP_DEFLATED) as target:
        for info in source.infolist():
            entry = zipfile.ZipInfo(info.filename, date_time=(2019, 8, 15, 0, 0, 0))
            entry.compress_type = zipfile.ZIP_DEFLATED
            entry.external_attr = 0o644 << 16
            data = source.read(info.filename)
            if info.filename == "docProps/core.xml":  # openpyxl stamps the save time here
                data = re.sub(rb"(<dcterms:modified[^>]*>)[^<]*(</dcterms:modified>)",
                              rb"\g<1>2019-08-15T00:00:00Z\g<2>", data)
            target.writestr(entry, data)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(repacked.getvalue())


def _write_parquet(path: pathlib.Path, table: pd.DataFrame) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    table.to_parquet(path, index=False, engine="pyarrow", compression="snappy")


def _toml_value(value) -> str:
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(round(value, 6))
    return str(value)


def _toml(comment: str, tables: list[tuple[str, dict]]) -> str:
    """Minimal TOML writer: ``[name]`` for a table, ``[[name]]`` when the name is given so."""
    lines = [f"# {line}" if line else "#" for line in comment.splitlines()]
    for name, mapping in tables:
        lines.append("")
        lines.append(name)
        lines.extend(f"{key} = {_toml_value(value)}" for key, value in mapping.items())
    return "\n".join(lines) + "\n"


CORE_SITES = {
    "ULLA-1": dict(archive="lake", latitude=61.482, longitude=-27.315,
                   site="Lake Ullamere, Skerravine Islands (invented site; varved lake)"),
    "TEL-07": dict(archive="marine", latitude=60.875, longitude=-29.040,
                   site="Telvanic Sea, southern slope, 1140 m water depth (invented site)"),
    "CORV-3": dict(archive="lake", latitude=61.737, longitude=-27.902,
                   site="Lake Corvallen, Skerravine Islands (invented site; annual laminations)"),
    "TEL-12": dict(archive="marine", latitude=60.214, longitude=-30.660,
                   site="Telvanic Sea, outer shelf basin, 410 m water depth (invented site)"),
}


def _core_toml(core_id: str, files: dict, depth_unit: str = "cm", extra_core: dict | None = None,
               sections=(), event_layers=(), hiatuses=()) -> str:
    core = {"id": core_id, **{k: CORE_SITES[core_id][k] for k in ("archive", "latitude", "longitude")},
            "collected": COLLECTED_CE, "depth_unit": depth_unit, "site": CORE_SITES[core_id]["site"]}
    core.update(extra_core or {})
    tables = [("[core]", core), ("[files]", files)]
    tables += [("[[sections]]", {"name": n, "top": float(t)}) for n, t in sections]
    tables += [("[[event_layers]]", {"top": float(t), "bottom": float(b), "kind": k}) for t, b, k in event_layers]
    tables += [("[[hiatuses]]", {"depth": float(d)}) for d in hiatuses]
    comment = (f"Demo core {core_id}: INVENTED data ({INVENTED_NOTE}).\n"
               "Generated by demo_cores/make_demo.py; the true ages and climate are in demo_cores/truth/.")
    return _toml(comment, tables)


def _event_toml() -> str:
    comment = ("The true abrupt cold event of the INVENTED demo climate (demo_cores/truth/climate.csv).\n"
               "Ages in cal BP (older = larger). The cooling starts at onset_cal_bp, the full cold is\n"
               "reached at cold_start_cal_bp, recovery starts at recovery_start_cal_bp and ends at end_cal_bp.\n"
               "Amplitudes are the full-cold departure from the climate without the event [degC];\n"
               "duration_yr = onset - end (whole event), cold_phase_yr = cold_start - recovery_start.")
    e = EVENT
    event = {
        "onset_cal_bp": e["onset_cal_bp"], "cold_start_cal_bp": e["cold_start_cal_bp"],
        "recovery_start_cal_bp": e["recovery_start_cal_bp"], "end_cal_bp": e["end_cal_bp"],
        "onset_year_ce": 1950.0 - e["onset_cal_bp"],
        "duration_yr": e["onset_cal_bp"] - e["end_cal_bp"],
        "cooling_yr": e["onset_cal_bp"] - e["cold_start_cal_bp"],
        "cold_phase_yr": e["cold_start_cal_bp"] - e["recovery_start_cal_bp"],
        "recovery_yr": e["recovery_start_cal_bp"] - e["end_cal_bp"],
        "air_temp_amplitude_c": e["air_temp_amplitude_c"], "sst_amplitude_c": e["sst_amplitude_c"],
    }
    return _toml(comment, [("[event]", event)])


def _forward_toml(responses_file: str) -> str:
    comment = ("Forward models and noise levels used by demo_cores/make_demo.py for the INVENTED demo.\n"
               "Temperatures in degC; every 1-sigma noise is Gaussian unless said otherwise.")
    tables = [
        ("[climate]", {"air_weather_sd_c": AIR_WEATHER_SD, "sst_weather_sd_c": SST_WEATHER_SD,
                       "air_centennial_sd_c": AIR_CENTENNIAL_SD, "sst_centennial_sd_c": SST_CENTENNIAL_SD,
                       "centennial_smoothing_yr": CENTENNIAL_SMOOTHING_YR}),
        ("[mgca_mmol_mol]", {"equation": "Mg/Ca = 0.38 exp(0.090 T) (Anand et al. 2003)", "a": MGCA_A, "b": MGCA_B,
                             "analytical_relative_sd": MGCA_RELATIVE_ERROR,
                             "nonclimate_sd_c": NONCLIMATE_SD_C["mgca_mmol_mol"], "variable": "sst_c"}),
        ("[uk37]", {"equation": "UK'37 = 0.033 T + 0.044 (Mueller et al. 1998)", "slope": UK37_SLOPE,
                    "intercept": UK37_INTERCEPT, "analytical_sd": UK37_ERROR,
                    "nonclimate_sd_c": NONCLIMATE_SD_C["uk37"], "variable": "sst_c"}),
        ("[tex86]", {"equation": "SST = 68.4 log10(TEX86) + 38.6 (Kim et al. 2010)", "slope": TEX86_SLOPE,
                     "intercept": TEX86_INTERCEPT, "analytical_sd": TEX86_ERROR,
                     "nonclimate_sd_c": NONCLIMATE_SD_C["tex86"], "variable": "sst_c"}),
        ("[bsi_percent]", {"equation": "bsi_percent = 2.5 T - 10 (invented)", "intercept": BSI_INTERCEPT,
                           "slope": BSI_SLOPE, "nonclimate_sd": BSI_NOISE_SD, "analytical_sd": BSI_ERROR,
                           "variable": "air_temp_c"}),
        ("[midges]", {"model": "Gaussian response on July air temperature, lognormal noise, multinomial counts",
                      "responses_file": responses_file, "ecological_lognormal_sd": ECOLOGICAL_NOISE_SD,
                      "head_capsules_min": 150, "head_capsules_max": 300,
                      "training_values": "percent of the head capsules counted",
                      "training_temperature_sd_c": TRAINING_TEMPERATURE_SD, "variable": "air_temp_c"}),
        ("[radiocarbon]", {"reservoir_offset_mean": RESERVOIR_OFFSET, "reservoir_offset_sd": RESERVOIR_ERROR,
                           "ulla1_outlier_shift_14c_yr": 850.0, "tel07_excluded_shift_14c_yr": 620.0,
                           "note": "each date: curve mean + N(0, curve sigma) + offset + N(0, lab error)"}),
        ("[station]", {"noise_sd_c": STATION_NOISE_SD, "missing_years": "1917, 1918"}),
    ]
    return _toml(comment, tables)


def main(out_dir) -> list[pathlib.Path]:
    """Write the whole invented scenario under ``out_dir``.

    Parameters
    ----------
    out_dir : str or path-like
        Target folder (created if needed). Existing files of the same names are replaced;
        nothing else is touched.

    Returns
    -------
    list of pathlib.Path
        The files written, relative to ``out_dir``, in writing order.
    """
    out = pathlib.Path(out_dir)
    written: list[pathlib.Path] = []

    def text(rel: str, content: str) -> None:
        _write_text(out / rel, content)
        written.append(pathlib.Path(rel))

    def csv(rel: str, table: pd.DataFrame, sep: str = ",") -> None:
        _write_csv(out / rel, table, sep)
        written.append(pathlib.Path(rel))

    climate = true_climate()
    atmosphere, marine = invented_curves()
    responses = midge_responses()

    text("curves/invented_atmosphere.14c", _curve_text(
        atmosphere, "ATMOSPHERIC", "Delta14C: invented slow decline from +150 permil at 20 ka to 0, plus wiggles."))
    text("curves/invented_marine.14c", _curve_text(
        marine, "MARINE", "Marine = invented atmosphere smoothed (60-yr Gaussian) + ~400-yr reservoir age (490 yr near 13.5 ka)."))

    csv("truth/climate.csv", climate)
    text("truth/event.toml", _event_toml())
    csv("truth/midge_responses.csv", responses)
    text("truth/forward_models.toml", _forward_toml("midge_responses.csv"))

    ulla = make_ulla(climate, atmosphere, responses)
    text("cores/ULLA-1/core.toml", _core_toml(
        "ULLA-1", {"samples": "samples.csv", "dates": "dates.csv", "counts": "counts.csv"},
        sections=(("A", 0.0), ("B", ULLA_SECTION_B_TOP_CM)),
        event_layers=tuple((t, b, "turbidite") for t, b in ULLA_AGE_DEPTH.event_layers)))
    csv("cores/ULLA-1/samples.csv", ulla["samples"])
    csv("cores/ULLA-1/counts.csv", ulla["counts"])
    csv("cores/ULLA-1/dates.csv", ulla["dates"])

    tel07 = make_tel07(climate, marine)
    text("cores/TEL-07/core.toml", _core_toml("TEL-07", {"samples": "samples.xlsx", "dates": "dates.csv"}))
    _write_xlsx(out / "cores/TEL-07/samples.xlsx", tel07["samples"], "samples")
    written.append(pathlib.Path("cores/TEL-07/samples.xlsx"))
    csv("cores/TEL-07/dates.csv", tel07["dates"])

    corv = make_corv(climate)
    text("cores/CORV-3/core.toml", _core_toml(
        "CORV-3", {"samples": "samples.csv", "dates": "dates.csv"}, depth_unit="mm",
        extra_core={"top_age_error": 1.0}))
    csv("cores/CORV-3/samples.csv", corv["samples"])
    csv("cores/CORV-3/dates.csv", corv["dates"])

    tel12 = make_tel12(climate, marine)
    text("cores/TEL-12/core.toml", _core_toml(
        "TEL-12", {"samples": "samples.parquet", "dates": "dates.tsv"}, hiatuses=TEL12_AGE_DEPTH.hiatus_depths_cm))
    _write_parquet(out / "cores/TEL-12/samples.parquet", tel12["samples"])
    written.append(pathlib.Path("cores/TEL-12/samples.parquet"))
    csv("cores/TEL-12/dates.tsv", tel12["dates"], sep="\t")

    for core_id, result in (("ULLA-1", ulla), ("TEL-07", tel07), ("CORV-3", corv), ("TEL-12", tel12)):
        csv(f"truth/{core_id}_ages.csv", result["ages"])
        csv(f"truth/{core_id}_samples.csv", result["truth_samples"])
        csv(f"truth/{core_id}_dates.csv", result["truth_dates"])

    csv("training/midges_modern.csv", make_training(responses))
    csv("instrumental/invented_station.csv", make_station(climate))
    return written


if __name__ == "__main__":
    target = pathlib.Path(sys.argv[1]) if len(sys.argv) > 1 else pathlib.Path(__file__).resolve().parent
    for relative in main(target):
        print(target / relative)
