"""A small synthetic run folder written to the run-folder schema (pipelines/outputs_schema.py).

The report and export tests use it so that they do not depend on the whole pipeline. The
numbers come from a simple seeded model, not from fixed values:

* age-depth: a core top at ``1950 - collected`` cal BP and gamma-distributed accumulation
  rates (mean ``rate`` yr/cm) cumulated per member, so every member is monotonic;
* dates: radiocarbon-like dates whose calibrated densities are Gaussian around the true
  age at their depth, one of them an obvious outlier;
* a temperature reconstruction: a smooth truth with a 1.5 degC step near 8200 cal BP plus
  member noise, anomalies against a 0-1000 cal BP reference window;
* events and event probability around the step; a training set's cross-validation.

``make_run_folder`` writes every table through :func:`_put`, which checks it against
:mod:`pipelines.outputs_schema` (the same check the pipeline's writers make) and writes it
with :func:`pipelines.runfolder.atomic_write_parquet`, so the files have the layout of a real
run and a column the schema does not declare fails here.
"""

from __future__ import annotations

import json
import pathlib

import numpy as np
import pandas as pd

from pipelines.outputs_schema import checked, member_column_names, table
from pipelines.runfolder import atomic_write_json, atomic_write_parquet, atomic_write_text

LEVELS = (0.025, 0.16, 0.5, 0.84, 0.975)
STEP_AGE = 8200.0


def _put(run: pathlib.Path, key: str, frame: pd.DataFrame, core: str = "", name: str = "") -> None:
    """Write table ``key`` where the schema puts it (``<core>``, ``<name>`` filled in)."""
    relative = table(key).path.replace("<core>", core).replace("<name>", name)
    atomic_write_parquet(run / relative, checked(key, frame))


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
    depth = np.arange(0.0, 301.0, 5.0)
    ens = _age_model(rng, depth, top_age=-68.0, rate=rate, members=members)
    med = np.median(ens, axis=1)
    chron = pd.DataFrame({
        "depth_cm": depth,
        "event_free_depth_cm": depth,
        "age_median": med,
        "age_q025": np.quantile(ens, 0.025, axis=1),
        "age_q975": np.quantile(ens, 0.975, axis=1),
        "age_mean": ens.mean(axis=1),
        "age_sd": ens.std(axis=1, ddof=1),
        "deposition_time_yr_cm": np.gradient(med, depth),
    })
    _put(run, "chronology", chron, core_id)
    members_df = pd.DataFrame(ens, columns=member_column_names(members))
    _put(run, "age_ensemble", pd.concat([pd.DataFrame({"depth_cm": depth}), members_df], axis=1), core_id)

    date_depth = np.array([22.0, 71.0, 118.0, 163.0, 214.0, 262.0, 296.0])
    true_age = np.interp(date_depth, depth, med)
    sd = 40.0 + 0.01 * true_age
    cal_median = true_age + rng.normal(0.0, 0.3, size=true_age.size) * sd
    cal_median[3] += 2500.0  # an outlier: much too old for its depth
    outlier = np.clip(rng.uniform(0.01, 0.08, size=true_age.size), 0, 1)
    outlier[3] = 0.93
    labels = [f"{core_id}-D{i + 1}" for i in range(date_depth.size)]
    dates = pd.DataFrame({
        "label": labels, "depth_cm": date_depth,
        "kind": ["radiocarbon"] * (date_depth.size - 1) + ["calendar"],
        "age": np.round(cal_median * 0.9), "error": np.round(sd * 0.8),
        "exclude": [False, False, False, False, False, True, False],
        "source_row": np.arange(2.0, 2.0 + date_depth.size),
        "curve_used": ["atmosphere"] * (date_depth.size - 1) + [None],
        "event_free_depth_cm": date_depth,
        "cal_median_bp": cal_median, "cal_mode_bp": cal_median, "cal_mean_bp": cal_median,
        "hpd95_young_bp": cal_median - 1.96 * sd, "hpd95_old_bp": cal_median + 1.96 * sd,
        "outlier_prob": outlier, "model_age_median_bp": true_age,
    })
    _put(run, "dates", dates, core_id)
    ranges = pd.DataFrame([(label, level, m - z * s, m + z * s, level)
                           for label, m, s in zip(labels, cal_median, sd)
                           for level, z in ((0.683, 1.0), (0.954, 2.0))],
                          columns=["label", "level", "young_cal_bp", "old_cal_bp", "probability"])
    _put(run, "date_ranges", ranges, core_id)
    grid = np.arange(-100.0, 14000.0, 10.0)
    dens = []
    for label, m, s in zip(labels, cal_median, sd):
        d = np.exp(-0.5 * ((grid - m) / s) ** 2)
        keep = d > 1e-4
        dens.append(pd.DataFrame({"label": label, "age_cal_bp": grid[keep],
                                  "density": d[keep] / (d[keep].sum() * 10.0)}))
    _put(run, "date_densities", pd.concat(dens, ignore_index=True), core_id)
    if not with_calibration:
        return

    sample_depth = np.arange(2.0, 300.0, 4.0)
    sample_age = np.array([np.interp(d, depth, med) for d in sample_depth])
    temp = _truth_temperature(sample_age)[:, None] + rng.normal(0, 0.5, (sample_depth.size, members))
    samples = pd.DataFrame({"depth_cm": sample_depth, "proxy": "mgca_mmol_mol",
                            "variable": "sst", "units": "degC", "method": "exponential equation"})
    q = np.quantile(temp, [0.5, 0.025, 0.975], axis=1)
    samples = samples.assign(value_median=q[0], value_q025=q[1], value_q975=q[2],
                             value_mean=temp.mean(axis=1), value_sd=temp.std(axis=1, ddof=1),
                             source_row=np.arange(2, 2 + sample_depth.size))
    _put(run, "calibrated_samples", samples, core_id)
    skill = pd.DataFrame({"proxy": ["mgca_mmol_mol", "pollen"], "variable": ["sst", "tjul"],
                          "units": ["degC", "degC"],
                          "method": ["exponential equation", "WA-PLS"],
                          "reference": ["equation A", "training set 'meadows'"],
                          "r2": [0.71, 0.64], "rmse": [0.93, 1.21],
                          "re": [0.42, np.nan], "ce": [0.31, np.nan]})
    _put(run, "calibration", skill, core_id)
    distance = rng.gamma(4.0, 0.05, sample_depth.size) + 0.25 * (sample_age > STEP_AGE)
    missing = rng.uniform(0, 10, sample_depth.size)
    diagnostics = pd.DataFrame({"depth_cm": sample_depth, "proxy": "pollen", "training": "meadows",
                                "prediction": _truth_temperature(sample_age),
                                "prediction_error": 1.2,
                                "nearest_analogue_distance": distance,
                                "good_analogue_limit": 0.2,
                                "no_analogue_limit": 0.45,
                                "analogue_quality": np.where(distance < 0.2, "good",
                                                             np.where(distance < 0.45, "fair", "none")),
                                "missing_taxa_percent": missing,
                                "n_missing_taxa": np.round(missing / 2).astype(np.int64)})
    _put(run, "calibration_diagnostics", diagnostics, core_id)
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
    _put(run, "reconstruction", recon, core_id)
    ens_df = pd.concat([
        pd.concat([pd.DataFrame({"age_cal_bp": ages, "variable": "sst", "quantity": quantity}),
                   pd.DataFrame(ens, columns=member_column_names(members))], axis=1)
        for quantity, ens in (("value", values), ("anomaly", anomalies))], ignore_index=True)
    _put(run, "reconstruction_ensemble", ens_df, core_id)

    onsets = STEP_AGE + shift + rng.normal(0, 40, members)
    events = pd.DataFrame({
        "core_id": core_id, "event_id": [f"{core_id}-E1", f"{core_id}-E2"], "variable": ["sst", "sst"],
        "kind": ["ramp", "change point"], "direction": ["down", "up"],
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
        "n_members": [members, members // 5], "tau_yr": [120.0, 120.0],
    })
    _put(run, "events", events, core_id)
    hist, edges = np.histogram(onsets, bins=np.arange(0.0, 12051.0, 50.0))
    prob = pd.DataFrame({"age_cal_bp": ages, "variable": "sst",
                         "probability": np.clip(np.interp(ages, edges[:-1] + 25, hist / members) * 3, 0, 1)})
    _put(run, "event_probability", prob, core_id)
    _put(run, "event_onsets", pd.DataFrame({"event_id": f"{core_id}-E1", "member": np.arange(members),
                                            "onset_cal_bp": onsets}), core_id)


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
    warning = "chronology: date 'TARN-2-D4' is probably an outlier (posterior probability 0.93)"
    rows = [
        {"core_id": "TARN-2", "folder": "/data/study/cores/TARN-2", "status": "ok", "stage_reached": "events",
         "n_warnings": 1, "warnings": warning, "notes": "", "error": ""},
        {"core_id": "FJORD-7", "folder": "/data/study/cores/FJORD-7", "status": "ok",
         "stage_reached": "calibration", "n_warnings": 0, "warnings": "",
         "notes": "reconstruction skipped: no calibrated record", "error": ""},
        {"core_id": "BOG-3", "folder": "/data/study/cores/BOG-3", "status": "ok", "stage_reached": "chronology",
         "n_warnings": 0, "warnings": "", "notes": "", "error": ""},
    ]
    if with_failed_core:
        rows.append({"core_id": "MIRE-9", "folder": "/data/study/cores/MIRE-9", "status": "failed",
                     "stage_reached": "none", "n_warnings": 0, "warnings": "", "notes": "",
                     "error": "ingest: dates.csv, row 4, column 'error': must be > 0 -- fix: give "
                              "the 1-sigma error in 14C yr"})
    _put(run, "summary", pd.DataFrame(rows))
    seconds = {"TARN-2": 4.2, "FJORD-7": 2.1, "BOG-3": 1.0, "MIRE-9": 0.1}
    timings = pd.DataFrame([{"core_id": r["core_id"], "stage": "ingest", "seconds": seconds[r["core_id"]],
                             "reused": False} for r in rows], columns=list(table("timings").names))
    atomic_write_text(run / table("timings").path, timings.to_csv(index=False))

    ages = np.arange(0.0, 12001.0, 100.0)
    stack_members = _truth_temperature(ages[:, None]) + rng.normal(0, 0.3, (ages.size, members))
    stack_members -= stack_members[ages <= 9000].mean(axis=0)  # departures from the window mean
    stack = pd.concat([pd.DataFrame({"age_cal_bp": ages, "variable": "sst", "method": "anomaly"}),
                       pd.DataFrame(_bands(stack_members, "value")),
                       pd.DataFrame({"n_records": np.where(ages < 9000, 2, 1),
                                     "stack_young_cal_bp": 0.0, "stack_old_cal_bp": 9000.0})], axis=1)
    _put(run, "stack", stack)

    observed = rng.uniform(6.0, 18.0, 80)
    predicted = observed + rng.normal(0, 1.1, 80)
    cv = pd.DataFrame({"id": [f"site-{i:02d}" for i in range(80)], "observed": observed,
                       "predicted": predicted, "residual": predicted - observed, "n_components": 2})
    _put(run, "training_cv", cv, name="meadows")
    skill = pd.DataFrame({"training": "meadows", "model": "wapls", "validation": "loo",
                          "n_components": [1, 2], "rmse_apparent": [1.05, 0.98], "rmsep": [1.21, 1.18],
                          "r2_apparent": [0.70, 0.73], "r2_cv": [0.62, 0.64],
                          "mean_bias_cv": [0.02, 0.01], "segment_bias_cv": [1.9, 1.7],
                          "rmsep_vs_fewer_percent": [np.nan, -2.5], "chosen": [False, True]})
    _put(run, "training_skill", skill, name="meadows")

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
