"""``reconstructions.nc``: every reconstruction of a run in one CF netCDF file.

Layout (CF-1.8, written with xarray's h5netcdf engine; see the README section "Exports")::

    dimensions: core (C), age (T), quantile (Q), bound (2), sample (S, the most samples of a core)
    age(age)              float64  "year", calendar years before present (1950 CE)
    time(age)             float64  "days since 1950-01-01 00:00:00", calendar "365_day",
                                   standard_name "time", axis "T"  (= -365 * age)
    quantile(quantile)    float64  "1", probability of the ensemble quantile (0.5 = median)
    core(core)            string   cf_role "timeseries_id"
    <v>(core, quantile, age)          reconstructed variable, its units, long_name,
                                      standard_name where CF has one
    <v>_anomaly(core, quantile, age)  anomaly against the core's reference window
    <v>_n_samples(core, age)          samples behind each grid point
    <v>_reference_window(core, bound) reference window [cal BP]
    stack_<v>(quantile, age), stack_<v>_n_records(age)   regional composite
    sample_<column>(core, sample)     every column of the cores' per-sample tables
                                      (samples_dated.parquet; see netcdf_samples.py)

Why two time coordinates: ages before present run backwards and CF's ``since`` units only
run forwards, so the dimension coordinate ``age`` carries plain years (``units = "year"``,
udunits-parsable, left alone by xarray's time decoding) and the auxiliary coordinate ``time``
is the same axis as a CF time in a 365-day calendar, in which one cal BP year is exactly 365
days; xarray decodes it to ``cftime.DatetimeNoLeap`` (year = 1950 - age, astronomical year
numbering) without warnings.
"""

from __future__ import annotations

import pathlib
import re

import numpy as np
import pandas as pd
import xarray as xr

from pipelines.report.rundata import (RunData, Series, downcore_version, quantile_columns,
                                      reconstruction_series)
from pipelines.report.netcdf_samples import cores_with_samples, sample_variables
from pipelines.runfolder import atomic_write_bytes

__all__ = ["NETCDF_NAME", "build_dataset", "write_netcdf", "cf_units", "standard_name_for",
           "DAYS_PER_YEAR"]

NETCDF_NAME = "reconstructions.nc"
#: days per year of the 365_day calendar used by the ``time`` coordinate
DAYS_PER_YEAR = 365.0

_UNIT_ALIASES = {"°c": "degC", "degc": "degC", "deg c": "degC", "celsius": "degC", "c": "degC",
                 "degrees celsius": "degC", "k": "K", "kelvin": "K", "‰": "1e-3", "permil": "1e-3",
                 "per mil": "1e-3", "%": "percent", "percent": "percent", "mm": "mm",
                 "mm/yr": "mm year-1", "mm yr-1": "mm year-1", "m": "m", "psu": "1e-3",
                 "": "1", "1": "1", "none": "1", "dimensionless": "1", "ph": "1"}
_TEMPERATURE_UNITS = {"degC", "K"}
_STANDARD_NAMES = {
    "sst": "sea_surface_temperature", "sea_surface_temperature": "sea_surface_temperature",
    "air_temperature": "air_temperature", "tair": "air_temperature", "sat": "air_temperature",
    "maat": "air_temperature", "mat": "air_temperature", "tjul": "air_temperature",
    "tjan": "air_temperature", "mtwa": "air_temperature", "mtco": "air_temperature",
    "july_temperature": "air_temperature", "summer_temperature": "air_temperature",
    "lake_temperature": "lake_surface_water_temperature",
}
_ENCODING = {"zlib": True, "complevel": 4, "shuffle": True}


def cf_units(units: str) -> str:
    """A udunits-parsable form of a units string from the run tables (``""`` -> ``"1"``).

    Unknown strings are kept as they are (they may already be udunits).
    """
    text = (units or "").strip()
    return _UNIT_ALIASES.get(text.lower(), text)


def standard_name_for(variable: str, units: str) -> str | None:
    """The CF standard name of a reconstructed variable, when one fits its name and units."""
    key = variable.strip().lower()
    matches = [k for k in _STANDARD_NAMES if key == k or key.startswith(k + "_")]
    if not matches:
        return None
    name = _STANDARD_NAMES[max(matches, key=len)]
    if name.endswith("temperature") and cf_units(units) not in _TEMPERATURE_UNITS:
        return None
    return name


def _safe_name(text: str) -> str:
    name = re.sub(r"[^A-Za-z0-9_]+", "_", text).strip("_") or "variable"
    return name if name[0].isalpha() else f"v_{name}"


def _series_by_core(run: RunData) -> list[tuple[str, Series]]:
    out = []
    for core in run.cores:
        for series in reconstruction_series(core.table("reconstruction")):
            out.append((core.core_id, series))
    return out


def _names(pairs: list[tuple[str, Series]]) -> dict[tuple[str, str | None], str]:
    proxies: dict[str, set] = {}
    for _, s in pairs:
        proxies.setdefault(s.variable, set()).add(s.proxy)
    names = {}
    for _, s in pairs:
        several = len(proxies[s.variable]) > 1
        names[(s.variable, s.proxy)] = _safe_name(
            f"{s.variable}_{s.proxy}" if several and s.proxy else s.variable)
    return names


def _quantile_levels(tables: list[pd.DataFrame]) -> np.ndarray:
    levels: set[float] = set()
    for table in tables:
        levels.update(quantile_columns(table, "value"))
        levels.update(quantile_columns(table, "anomaly"))
    return np.array(sorted(levels), dtype=float)


def _fill(target: np.ndarray, age_index: dict[float, int], ages: np.ndarray,
          values: np.ndarray) -> None:
    idx = np.array([age_index[float(a)] for a in ages], dtype=int)
    target[..., idx] = values


def _quantile_block(rows: pd.DataFrame, prefix: str, levels: np.ndarray) -> np.ndarray:
    cols = quantile_columns(rows, prefix)
    block = np.full((levels.size, len(rows)), np.nan)
    for i, level in enumerate(levels):
        if level in cols:
            block[i] = pd.to_numeric(rows[cols[level]], errors="coerce").to_numpy(float)
    return block


def _history(run: RunData) -> str:
    created = run.manifest.get("created_utc") or run.manifest.get("started_utc")
    when = f"{created}: " if created else ""
    return (f"{when}downcore run; reconstructions.nc written from the run folder's "
            "reconstruction.parquet and stack.parquet tables")


def build_dataset(run: RunData) -> xr.Dataset | None:
    """The CF dataset of a run's reconstructions and composite, or None if there are none."""
    pairs = _series_by_core(run)
    stack = run.stack if run.stack is not None and len(run.stack) else None
    dated = cores_with_samples(run)
    if not pairs and stack is None and not dated:
        return None
    tables = [s.rows for _, s in pairs] + ([stack] if stack is not None else [])
    ages = np.unique(np.concatenate([t["age_cal_bp"].to_numpy(float) for t in tables] or [np.zeros(0)]))
    ages = ages[np.isfinite(ages)]
    age_index = {float(a): i for i, a in enumerate(ages)}
    levels = _quantile_levels(tables)
    reconstructed = {cid for cid, _ in pairs}
    core_ids = [c.core_id for c in run.cores if c.core_id in reconstructed or c.core_id in dated]
    core_ids += [cid for cid, _ in pairs if cid not in core_ids]
    core_ids = list(dict.fromkeys(core_ids))
    core_index = {c: i for i, c in enumerate(core_ids)}
    names = _names(pairs)
    units_by_variable: dict[str, str] = {}
    data_vars: dict[str, xr.Variable] = {}
    for name in dict.fromkeys(names.values()):
        members = [(cid, s) for cid, s in pairs if names[(s.variable, s.proxy)] == name]
        first = members[0][1]
        units = cf_units(first.units)
        units_by_variable.setdefault(first.variable, units)
        value = np.full((len(core_ids), levels.size, ages.size), np.nan)
        anomaly = np.full_like(value, np.nan)
        count = np.full((len(core_ids), ages.size), -1, dtype=np.int32)
        window = np.full((len(core_ids), 2), np.nan)
        has_anomaly = has_count = False
        for cid, s in members:
            c = core_index[cid]
            row_ages = s.rows["age_cal_bp"].to_numpy(float)
            keep = np.isfinite(row_ages)
            rows = s.rows[keep]
            _fill(value[c], age_index, row_ages[keep], _quantile_block(rows, "value", levels))
            if quantile_columns(rows, "anomaly"):
                has_anomaly = True
                _fill(anomaly[c], age_index, row_ages[keep], _quantile_block(rows, "anomaly", levels))
            if "n_samples" in rows.columns:
                has_count = True
                n = pd.to_numeric(rows["n_samples"], errors="coerce").fillna(-1).to_numpy()
                _fill(count[c], age_index, row_ages[keep], n.astype(np.int32))
            if s.reference_window is not None:
                window[c] = s.reference_window
        label = first.variable + (f" from {first.proxy}" if first.proxy and name != _safe_name(first.variable) else "")
        attrs = {"long_name": f"reconstructed {label}", "units": units,
                 "cell_methods": "quantile: ensemble quantile of the reconstruction members",
                 "comment": "quantiles over the run's ensemble members; NaN where the core "
                            "has no value or too few members have one"}
        std = standard_name_for(first.variable, units)
        if std:
            attrs["standard_name"] = std
        data_vars[name] = xr.Variable(("core", "quantile", "age"), value, attrs)
        if has_anomaly:
            anomaly_units = "K" if units in _TEMPERATURE_UNITS else units
            data_vars[f"{name}_anomaly"] = xr.Variable(
                ("core", "quantile", "age"), anomaly,
                {"long_name": f"anomaly of reconstructed {label} relative to the core's "
                              f"reference window ({name}_reference_window)",
                 "units": anomaly_units,
                 "comment": "computed per ensemble member, then summarised by quantiles"})
        if has_count:
            data_vars[f"{name}_n_samples"] = xr.Variable(
                ("core", "age"), count,
                {"long_name": f"number of proxy samples behind each grid point of {name}",
                 "units": "1", "_FillValue": np.int32(-1)})
        if np.isfinite(window).any():
            data_vars[f"{name}_reference_window"] = xr.Variable(
                ("core", "bound"), window,
                {"long_name": f"reference window of {name}_anomaly (young, old) in calendar "
                              "years before present (1950 CE)", "units": "year"})
    if stack is not None:
        for variable in dict.fromkeys(stack["variable"].astype(str)):
            rows = stack[stack["variable"].astype(str) == variable]
            rows = rows[np.isfinite(rows["age_cal_bp"].to_numpy(float))]
            name = f"stack_{_safe_name(variable)}"
            method = str(rows["method"].iloc[0]) if "method" in rows.columns else "anomaly"
            values = np.full((levels.size, ages.size), np.nan)
            _fill(values, age_index, rows["age_cal_bp"].to_numpy(float),
                  _quantile_block(rows, "value", levels))
            base_units = units_by_variable.get(variable, "1")
            units = "1" if method == "zscore" else ("K" if base_units in _TEMPERATURE_UNITS else base_units)
            data_vars[name] = xr.Variable(
                ("quantile", "age"), values,
                {"long_name": f"regional composite of {variable} "
                              f"({'z-scores' if method == 'zscore' else 'departures from the common window mean'})",
                 "units": units})
            if "n_records" in rows.columns:
                n = np.full(ages.size, -1, dtype=np.int32)
                _fill(n, age_index, rows["age_cal_bp"].to_numpy(float),
                      pd.to_numeric(rows["n_records"], errors="coerce").fillna(-1).to_numpy().astype(np.int32))
                data_vars[f"{name}_n_records"] = xr.Variable(
                    ("age",), n, {"long_name": f"number of cores in the composite of {variable}",
                                  "units": "1", "_FillValue": np.int32(-1)})
    data_vars.update(sample_variables(run, core_ids))
    coords = {
        "age": ("age", ages, {"long_name": "age in calendar years before present (1950 CE)",
                              "units": "year",
                              "comment": "cal BP: years before 1950 CE; CE year = 1950 - age"}),
        "time": ("age", -DAYS_PER_YEAR * ages,
                 {"standard_name": "time", "long_name": "time of the age, as a CF time",
                  "units": "days since 1950-01-01 00:00:00", "calendar": "365_day",
                  "axis": "T"}),
        "quantile": ("quantile", levels,
                     {"long_name": "probability of the ensemble quantile (0.5 = median)",
                      "units": "1"}),
    }
    if core_ids:
        coords["core"] = ("core", np.array(core_ids, dtype=object),
                          {"long_name": "core identifier", "cf_role": "timeseries_id"})
    version = (run.manifest.get("versions") or {}).get("downcore") or downcore_version()
    attrs = {
        "Conventions": "CF-1.8",
        "title": f"downcore reconstructions of run {run.folder.name}",
        "source": f"downcore {version}".strip()
                  + ": age-depth ensembles, proxy calibration and reconstruction members",
        "history": _history(run),
        "comment": "Values are quantiles over ensemble members (quantile dimension). Ages are "
                   "calendar years before present (1950 CE) in coordinate 'age'; coordinate "
                   "'time' is the same axis as a CF time in a 365-day calendar.",
    }
    seed = (run.manifest.get("seeds") or {}).get("run_seed")
    if seed is not None:
        attrs["downcore_run_seed"] = int(seed)
    return xr.Dataset(data_vars, coords=coords, attrs=attrs)


def write_netcdf(run: RunData) -> pathlib.Path | None:
    """Write ``reconstructions.nc`` into the run folder (atomically); None if nothing to write."""
    dataset = build_dataset(run)
    if dataset is None:
        return None
    encoding = {name: dict(_ENCODING) for name in dataset.data_vars}
    for name in dataset.data_vars:
        if "_FillValue" in dataset[name].attrs:
            encoding[name]["_FillValue"] = dataset[name].attrs.pop("_FillValue")
        elif dataset[name].dtype.kind == "f":
            encoding[name]["_FillValue"] = np.nan
    for name in ("age", "time", "quantile"):
        encoding[name] = {"_FillValue": None}
    if "core" in dataset.coords:
        encoding["core"] = {"dtype": str}
    target = run.folder / NETCDF_NAME
    temp = target.with_name(f".{target.name}.writing.tmp")
    try:
        dataset.to_netcdf(temp, engine="h5netcdf", encoding=encoding)
        data = temp.read_bytes()
    finally:
        temp.unlink(missing_ok=True)
    return atomic_write_bytes(target, data)
