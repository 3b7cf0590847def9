"""A small synthetic run folder written to the run-folder contract (DEVELOPERS.md).

The report and export tests use it so that they do not depend on the whole pipeline. The
numbers come from a simple seeded model, not from fixed values:

* age-depth: a core top at ``1950 - collected`` cal BP and gamma-distributed accumulation
  rates (mean ``rate`` yr/cm) cumulated per member, so every member is monotonic;
* dates: radiocarbon-like dates whose calibrated densities are Gaussian around the true
  age at their depth, one of them an obvious outlier;
* a temperature reconstruction: a smooth truth with a 1.5 degC step near 8200 cal BP plus
  member noise, anomalies against a 0-1000 cal BP reference window;
* events and event probability around the step; a training set's cross-validation.

``make_run_folder`` writes the tables with :func:`pipelines.runfolder.atomic_write_parquet`
so the files have the same layout as a real run.
"""

from __future__ import annotations

import json
import pathlib

import numpy as np
import pandas as pd

from pipelines.runfolder import atomic_write_json, atomic_write_parquet

LEVELS = (0.025, 0.16, 0.5, 0.84, 0.975)
STEP_AGE = 8200.0


def _qname(level: float) -> str:
    return "median" if level == 0.5 else f"q{int(round(level * 1000)):03d}"


def _bands(values: np.ndarray, prefix: str) -> dict[str, np.ndarray]:
    q = np.nanquantile(values, LEVELS, axis=1)
    return {f"{prefix}_{_qname(level)}": q[i] for i, level in enumerate(LEVELS)}


def _age_model(rng: np.random.Generator, depth: np.ndarray, top_age: float, rate: float,
               members: int) -> np.ndarray:
    shape = 4.0
    steps = rng.gamma(shape, rate / shape, size=(depth.size - 1, members)) * np.diff(depth)[:, None]
    ages = np.vstack([np.full((1, members), top_age), top_age + np.cumsum(steps, axis=0)])
    ages += rng.normal(0.0, 3.0, size=(1, members))
    return ages


def _truth_temperature(age: np.ndarray) -> np.ndarray:
    return 12.0 + 0.6 * np.sin(age / 1300.0) - 1.5 * (age > STEP_AGE)


def _write_core(run: pathlib.Path, core_id: str, rng: np.random.Generator, members: int,
                rate: float, with_calibration: bool, with_reconstruction: bool) -> None:
    folder = run / core_id
    depth = np.arange(0.0, 301.0, 5.0)
    ens = _age_model(rng, depth, top_age=-68.0, rate=rate, members=members)
    med = np.median(ens, axis=1)
    chron = pd.DataFrame({
        "depth_cm": depth,
        "age_median": med,
        "age_q025": np.quantile(ens, 0.025, axis=1),
        "age_q975": np.quantile(ens, 0.975, axis=1),
        "age_mean": ens.mean(axis=1),
        "age_sd": ens.std(axis=1, ddof=1),
        "deposition_time_yr_cm": np.gradient(med, depth),
    })
    atomic_write_parquet(folder / "chronology.parquet", chron)
    members_df = pd.DataFrame({f"m{m:04d}": ens[:, m] for m in range(members)})
    atomic_write_parquet(folder / "age_ensemble.parquet",
                         pd.concat([pd.DataFrame({"depth_cm": depth}), members_df], axis=1))

    date_depth = np.array([22.0, 71.0, 118.0, 163.0, 214.0, 262.0, 296.0])
    true_age = np.interp(date_depth, depth, med)
    sd = 40.0 + 0.01 * true_age
    cal_median = true_age + rng.normal(0.0, 0.3, size=true_age.size) * sd
    cal_median[3] += 2500.0  # an outlier: much too old for its depth
    outlier = np.clip(rng.uniform(0.01, 0.08, size=true_age.size), 0, 1)
    outlier[3] = 0.93
    labels = [f"{core_id}-D{i + 1}" for i in range(date_depth.size)]
    hpd = [f"{m - 1.96 * s:.0f}-{m + 1.96 * s:.0f}" for m, s in zip(cal_median, sd)]
    dates = pd.DataFrame({
        "label": labels, "depth_cm": date_depth,
        "kind": ["radiocarbon"] * (date_depth.size - 1) + ["calendar"],
        "age": np.round(cal_median * 0.9), "error": np.round(sd * 0.8),
        "exclude": [False, False, False, False, False, True, False],
        "cal_median": cal_median, "hpd95": hpd, "outlier_prob": outlier,
    })
    atomic_write_parquet(folder / "dates.parquet", dates)
    grid = np.arange(-100.0, 14000.0, 10.0)
    dens = []
    for label, m, s in zip(labels, cal_median, sd):
        d = np.exp(-0.5 * ((grid - m) / s) ** 2)
        keep = d > 1e-4
        dens.append(pd.DataFrame({"label": label, "age_cal_bp": grid[keep],
                                  "density": d[keep] / (d[keep].sum() * 10.0)}))
    atomic_write_parquet(folder / "date_densities.parquet", pd.concat(dens, ignore_index=True))
    if not with_calibration:
        return

    sample_depth = np.arange(2.0, 300.0, 4.0)
    sample_ens = np.vstack([np.interp(d, depth, ens[:, 0]) for d in sample_depth])
    sample_age = np.array([np.interp(d, depth, med) for d in sample_depth])
    temp = _truth_temperature(sample_age)[:, None] + rng.normal(0, 0.5, (sample_depth.size, members))
    samples = pd.DataFrame({"depth_cm": sample_depth, "proxy": "mgca_mmol_mol",
                            "variable": "sst", "units": "degC"})
    samples = pd.concat([samples, pd.DataFrame(_bands(temp, "value"))], axis=1)
    atomic_write_parquet(folder / "calibrated_samples.parquet", samples)
    del sample_ens
    skill = pd.DataFrame({"proxy": ["mgca_mmol_mol", "pollen"], "variable": ["sst", "tjul"],
                          "method": ["exponential equation", "WA-PLS"],
                          "reference": ["equation A", "training set 'meadows'"],
                          "training": ["", "meadows"],
                          "r2": [0.71, 0.64], "rmse": [0.93, 1.21],
                          "RE": [0.42, np.nan], "CE": [0.31, np.nan]})
    atomic_write_parquet(folder / "calibration.parquet", skill)
    distance = rng.gamma(4.0, 0.05, sample_depth.size) + 0.25 * (sample_age > STEP_AGE)
    diagnostics = pd.DataFrame({"depth_cm": sample_depth, "proxy": "pollen",
                                "min_distance": distance,
                                "distance_threshold_good": 0.2,
                                "distance_threshold_poor": 0.45,
                                "missing_taxa_share": rng.uniform(0, 0.1, sample_depth.size)})
    atomic_write_parquet(folder / "calibration_diagnostics.parquet", diagnostics)
    if not with_reconstruction:
        return

    ages = np.arange(0.0, 12001.0, 50.0)
    shift = rng.normal(0, 60.0, members)
    values = _truth_temperature(ages[:, None] + shift[None, :]) + rng.normal(0, 0.35, (ages.size, members))
    values[ages > 11500, : members // 2] = np.nan  # the oldest grid points lack some members
    ref = (ages >= 0) & (ages <= 1000)
    anomalies = values - np.nanmean(values[ref], axis=0)
    recon = pd.DataFrame({"age_cal_bp": ages, "year_ce": 1950.0 - ages, "variable": "sst",
                          "proxy": "mgca_mmol_mol", "units": "degC"})
    recon = pd.concat([recon, pd.DataFrame(_bands(values, "value")),
                       pd.DataFrame({"member_share": np.ones(ages.size)}),
                       pd.DataFrame(_bands(anomalies, "anomaly")),
                       pd.DataFrame({"n_samples": np.where(ages < 11000, 2, 0),
                                     "reference_young_cal_bp": 0.0,
                                     "reference_old_cal_bp": 1000.0})], axis=1)
    atomic_write_parquet(folder / "reconstruction.parquet", recon)
    ens_df = pd.concat([
        pd.concat([pd.DataFrame({"age_cal_bp": ages, "variable": "sst", "quantity": quantity}),
                   pd.DataFrame({f"m{m:04d}": ens[:, m] for m in range(members)})], axis=1)
        for quantity, ens in (("value", values), ("anomaly", anomalies))], ignore_index=True)
    atomic_write_parquet(folder / "reconstruction_ensemble.parquet", ens_df)

    onsets = STEP_AGE + shift + rng.normal(0, 40, members)
    events = pd.DataFrame({
        "event_id": [1, 2], "variable": ["sst", "sst"], "kind": ["ramp", "change point"],
        "onset_median": [np.median(onsets), 4100.0],
        "onset_q025": [np.quantile(onsets, 0.025), 3700.0],
        "onset_q975": [np.quantile(onsets, 0.975), 4600.0],
        "end_median": [np.median(onsets) - 150, 3900.0],
        "end_q025": [np.quantile(onsets, 0.025) - 200, 3500.0],
        "end_q975": [np.quantile(onsets, 0.975) - 100, 4400.0],
        "duration_median": [150.0, 200.0], "duration_q025": [60.0, 50.0],
        "duration_q975": [260.0, 420.0],
        "amplitude_median": [1.5, 0.3], "amplitude_q025": [1.2, 0.05],
        "amplitude_q975": [1.8, 0.6],
        "probability": [0.97, 0.22], "p_value": [0.002, 0.31], "significant": [True, False],
    })
    atomic_write_parquet(folder / "events.parquet", events)
    hist, edges = np.histogram(onsets, bins=np.arange(0.0, 12051.0, 50.0))
    prob = pd.DataFrame({"age_cal_bp": ages, "variable": "sst",
                         "probability": np.clip(np.interp(ages, edges[:-1] + 25, hist / members) * 3, 0, 1)})
    atomic_write_parquet(folder / "event_probability.parquet", prob)


def make_run_folder(run: pathlib.Path, seed: int = 7, members: int = 40,
                    with_failed_core: bool = True) -> pathlib.Path:
    """Write a synthetic finished run into ``run`` and return it.

    Cores: ``TARN-2`` (everything), ``FJORD-7`` (chronology and calibration, no
    reconstruction), ``BOG-3`` (chronology only) and, unless ``with_failed_core`` is False,
    ``MIRE-9`` (failed: listed in the summary with its reason, no folder).
    """
    rng = np.random.default_rng(seed)
    run = pathlib.Path(run)
    run.mkdir(parents=True, exist_ok=True)
    _write_core(run, "TARN-2", rng, members, 38.0, True, True)
    _write_core(run, "FJORD-7", rng, members, 45.0, True, False)
    _write_core(run, "BOG-3", rng, members, 30.0, False, False)
    rows = [
        {"core_id": "TARN-2", "status": "ok", "stage_reached": "events",
         "warnings": ["date TARN-2-D4 is probably an outlier (p = 0.93)"], "seconds": 4.2},
        {"core_id": "FJORD-7", "status": "ok", "stage_reached": "calibration",
         "warnings": [], "seconds": 2.1},
        {"core_id": "BOG-3", "status": "ok", "stage_reached": "chronology",
         "warnings": [], "seconds": 1.0},
    ]
    if with_failed_core:
        rows.append({"core_id": "MIRE-9", "status": "failed", "stage_reached": "ingest",
                     "warnings": [], "seconds": 0.1,
                     "error": "dates.csv, row 4, column 'error': must be > 0 -- fix: give "
                              "the 1-sigma error in 14C yr"})
    summary = pd.DataFrame(rows)
    summary["warnings"] = summary["warnings"].map(lambda w: "\n".join(w))
    atomic_write_parquet(run / "summary.parquet", summary)

    ages = np.arange(0.0, 12001.0, 100.0)
    stack_members = _truth_temperature(ages[:, None]) + rng.normal(0, 0.3, (ages.size, members))
    stack_members -= stack_members[ages <= 9000].mean(axis=0)  # departures from the window mean
    stack = pd.DataFrame({"age_cal_bp": ages, "variable": "sst", "method": "anomaly",
                          "value_median": np.median(stack_members, axis=1),
                          "value_q025": np.quantile(stack_members, 0.025, axis=1),
                          "value_q975": np.quantile(stack_members, 0.975, axis=1),
                          "n_records": np.where(ages < 9000, 2, 1),
                          "stack_young_cal_bp": 0.0, "stack_old_cal_bp": 9000.0})
    atomic_write_parquet(run / "stack.parquet", stack)

    observed = rng.uniform(6.0, 18.0, 80)
    cv = pd.DataFrame({"observed": observed, "predicted": observed + rng.normal(0, 1.1, 80)})
    atomic_write_parquet(run / "training" / "meadows_cv.parquet", cv)
    perf = pd.DataFrame({"component": [1, 2], "rmsep": [1.21, 1.18], "r2": [0.62, 0.64],
                         "max_bias": [1.9, 1.7]})
    atomic_write_parquet(run / "training" / "meadows_skill.parquet", perf)

    manifest = {
        "format": "downcore-manifest/1",
        "created_utc": "2026-12-01T12:00:00Z",
        "started_utc": "2026-12-01T11:59:00Z",
        "seconds": 60.0,
        "config": {"path": "/data/study/run.toml", "text": "[run]\nseed = 20261201\n",
                   "resolved": {"run": {"seed": 20261201, "ensemble": members},
                                "reconstruction": {"reference_young": 0.0,
                                                   "reference_old": 1000.0}}},
        "inputs": [],
        "seeds": {"run_seed": 20261201},
        "versions": {"downcore": "0.1.0", "python": "3.11"},
        "cores": rows,
        "outputs": {},
    }
    atomic_write_json(run / "manifest.json", json.loads(json.dumps(manifest, default=str)))
    return run
