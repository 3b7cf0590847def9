"""The demo's records: true age-depth relations, simulated dates, the midge response model,
the four invented cores, the modern training set and the instrumental series (parts 3-5 of
:mod:`make_demo`, which writes them; see its docstring for the forward models and their
sources). Everything here is INVENTED."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from proxies.seeding import rng_for


from demo_truth import (COLLECTED_CE, DEMO_SEED, TOP_AGE_CAL_BP, window_mean)

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


