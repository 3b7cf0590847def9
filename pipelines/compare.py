"""Compare two runs core by core: how the chronology, the reconstruction and the events moved.

Typical use: the same cores before and after a calibration-curve update. For every core in
either run one row reports

- ``status_a``, ``status_b``: the cores' status in each run;
- chronology: ``age_shift_median_yr`` (median over depths of B - A of the median age),
  ``age_shift_max_abs_yr`` and the depth where it occurs, ``age_shift_max_depth_cm``, and
  ``ci95_width_change_median_yr`` (median change of the 95 % interval width), on the depths
  both runs share;
- reconstruction: ``value_change_median`` and ``value_change_max_abs`` of the median value
  on the (age, variable) cells both runs share (variable units), ``variables``;
- events: ``events_a``, ``events_b`` (significant events), ``onset_shift_median_yr`` and
  ``onset_shift_max_abs_yr`` over events matched by variable and kind in onset order.

Missing files give empty cells.
"""

from __future__ import annotations

import os
import pathlib

import numpy as np
import pandas as pd

from pipelines.outputs_schema import TABLES
from pipelines.runfolder import read_parquet

__all__ = ["compare_runs", "COMPARE_COLUMNS"]

COMPARE_COLUMNS = ["core_id", "status_a", "status_b", "age_shift_median_yr", "age_shift_max_abs_yr",
                   "age_shift_max_depth_cm", "ci95_width_change_median_yr", "variables",
                   "value_change_median", "value_change_max_abs", "events_a", "events_b",
                   "onset_shift_median_yr", "onset_shift_max_abs_yr"]


def _read(run: pathlib.Path, key: str, core: str = "") -> pd.DataFrame | None:
    """Table ``key`` of the run-folder schema (``None`` when the run has none)."""
    path = run / TABLES[key].path.replace("<core>", core)
    return read_parquet(path) if path.is_file() else None


def _statuses(run: pathlib.Path) -> dict[str, str]:
    summary = _read(run, "summary")
    if summary is None:
        raise FileNotFoundError(f"{run}: no summary.parquet -- give two downcore run folders")
    return dict(zip(summary["core_id"], summary["status"]))


def _chronology(a: pd.DataFrame | None, b: pd.DataFrame | None) -> dict:
    if a is None or b is None:
        return {}
    both = a.merge(b, on="depth_cm", suffixes=("_a", "_b"))
    if both.empty:
        return {}
    shift = both["age_median_b"] - both["age_median_a"]
    k = int(np.argmax(np.abs(shift.to_numpy())))
    width = (both["age_q975_b"] - both["age_q025_b"]) - (both["age_q975_a"] - both["age_q025_a"])
    return {"age_shift_median_yr": float(shift.median()), "age_shift_max_abs_yr": float(shift.iloc[k]),
            "age_shift_max_depth_cm": float(both["depth_cm"].iloc[k]),
            "ci95_width_change_median_yr": float(width.median())}


def _reconstruction(a: pd.DataFrame | None, b: pd.DataFrame | None) -> dict:
    if a is None or b is None or a.empty or b.empty:
        return {}
    both = a.merge(b, on=["age_cal_bp", "variable"], suffixes=("_a", "_b"))
    change = (both["value_median_b"] - both["value_median_a"]).dropna()
    if change.empty:
        return {"variables": ", ".join(sorted(set(a["variable"]) | set(b["variable"])))}
    k = int(np.argmax(np.abs(change.to_numpy())))
    return {"variables": ", ".join(sorted(set(both["variable"]))),
            "value_change_median": float(change.median()), "value_change_max_abs": float(change.iloc[k])}


def _significant(events: pd.DataFrame) -> pd.DataFrame:
    if "significant" in events.columns:
        events = events[events["significant"].astype(bool)]
    return events


def _events(a: pd.DataFrame | None, b: pd.DataFrame | None) -> dict:
    if a is None or b is None:
        return {}
    a, b = _significant(a), _significant(b)
    out: dict = {"events_a": len(a), "events_b": len(b)}
    shifts = []
    for (variable, kind), group_a in a.groupby(["variable", "kind"], sort=True):
        group_b = b[(b["variable"] == variable) & (b["kind"] == kind)]
        onsets_a = np.sort(group_a["onset_median"].to_numpy(dtype=float))
        onsets_b = np.sort(group_b["onset_median"].to_numpy(dtype=float))
        n = min(onsets_a.size, onsets_b.size)
        shifts += list(onsets_b[:n] - onsets_a[:n])
    if shifts:
        values = np.asarray(shifts)
        out["onset_shift_median_yr"] = float(np.median(values))
        out["onset_shift_max_abs_yr"] = float(values[np.argmax(np.abs(values))])
    return out


def compare_runs(run_a: str | os.PathLike[str], run_b: str | os.PathLike[str]) -> pd.DataFrame:
    """One row per core (see the module docstring), cores sorted by id."""
    a, b = pathlib.Path(run_a), pathlib.Path(run_b)
    status_a, status_b = _statuses(a), _statuses(b)
    rows = []
    for core in sorted(set(status_a) | set(status_b)):
        row: dict = {"core_id": core, "status_a": status_a.get(core, "absent"),
                     "status_b": status_b.get(core, "absent")}
        row |= _chronology(_read(a, "chronology", core), _read(b, "chronology", core))
        row |= _reconstruction(_read(a, "reconstruction", core), _read(b, "reconstruction", core))
        row |= _events(_read(a, "events", core), _read(b, "events", core))
        rows.append(row)
    table = pd.DataFrame(rows, columns=COMPARE_COLUMNS)
    return table.astype({"events_a": "Int64", "events_b": "Int64"})
