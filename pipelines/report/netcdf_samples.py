"""The per-sample tables of a run (``<core>/samples_dated.parquet``) as netCDF variables.

Every column of the cores' per-sample tables becomes one variable ``sample_<column>(core,
sample)``: cores have different numbers of samples, so the ``sample`` dimension is as long as
the longest core and shorter cores are padded with the fill value (CF's incomplete
multidimensional array representation, CF-1.8 appendix H). Flags (true/false columns) are
``int8`` with ``flag_values = 0, 1``; text columns (section, event-layer kind, analogue
quality) are categories: ``int16`` codes with ``flag_values``/``flag_meanings`` naming each
category (CF-1.8 section 3.5), -1 where the cell is empty; numbers are ``float64`` with NaN as
fill value. Ages before present carry ``units = "year"`` like the dataset's ``age``
coordinate; raw proxy columns get the units their name ends with when it names one
(``_percent``, ``_permil``, ``_mm``, ``_mmol_mol``, ...), else ``"1"`` with a comment.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import xarray as xr

from pipelines.outputs_schema import Family, table as output_table
from pipelines.report.rundata import RunData

__all__ = ["SAMPLE_TABLE", "cores_with_samples", "sample_variables"]

#: the run-folder table exported here
SAMPLE_TABLE = "samples_dated"


def cores_with_samples(run: RunData) -> list[str]:
    """Ids of the cores that have a per-sample table, in run order."""
    return [c.core_id for c in run.cores if c.table(SAMPLE_TABLE) is not None and len(c.table(SAMPLE_TABLE))]


#: units named by the end of a raw column's name -> udunits form
_NAME_UNITS = {"_percent": "percent", "_pct": "percent", "_permil": "1e-3", "_ppm": "1e-6",
               "_mmol_mol": "mmol mol-1", "_umol_mol": "umol mol-1", "_mm": "mm", "_cm": "cm",
               "_m": "m", "_degc": "degC", "_g_cm3": "g cm-3", "_si": "1"}


def _units(column: str, kind: str) -> tuple[str, str]:
    """(units, comment) of a per-sample variable."""
    from proxies.reconstruction.dated_samples import column_units

    if kind != "number":
        return "1", ""
    if column.endswith("_error"):
        column = column[: -len("_error")]
    stated = column_units(column)
    if stated:
        return ("year" if stated == "year" else stated), ""
    for ending, units in sorted(_NAME_UNITS.items(), key=lambda kv: -len(kv[0])):
        if column.lower().endswith(ending):
            return units, ""
    return "1", "units as the column name in the samples file states them"


def _attrs(column: str, kind: str) -> dict:
    spec = output_table(SAMPLE_TABLE).column(column)
    doc = spec.doc if spec is not None else "as given in the samples file"
    if isinstance(spec, Family) and spec.example == "uk37":  # the raw proxy columns
        doc = f"raw value of {column} as given in the samples file"
    units, comment = _units(column, kind)
    attrs = {"long_name": f"per-sample {column}: {doc}", "units": units}
    if column.endswith("_cal_bp"):
        comment = "calendar years before present (1950 CE); CE year = 1950 - value"
    if comment:
        attrs["comment"] = comment
    return attrs


def _token(text: str) -> str:
    """A category name as one CF flag meaning (letters, digits, '_', '-', '.')."""
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", text).strip("_") or "unnamed"


def _kind(frames: list[pd.DataFrame], column: str) -> str:
    dtypes = [f[column].dtype for f in frames if column in f]
    if all(pd.api.types.is_bool_dtype(d) for d in dtypes):
        return "flag"
    if all(pd.api.types.is_numeric_dtype(d) for d in dtypes):
        return "number"
    return "text"


def sample_variables(run: RunData, core_ids: list[str]) -> dict[str, xr.Variable]:
    """``sample_<column>(core, sample)`` for every column of the per-sample tables.

    Parameters
    ----------
    run : RunData
    core_ids : list of str
        The dataset's ``core`` coordinate (cores without a per-sample table stay fill values).
    """
    frames = {c.core_id: c.table(SAMPLE_TABLE) for c in run.cores if c.core_id in core_ids
              and c.table(SAMPLE_TABLE) is not None}
    if not frames:
        return {}
    n_samples = max(len(f) for f in frames.values())
    columns = list(dict.fromkeys(c for f in frames.values() for c in f.columns))
    out: dict[str, xr.Variable] = {}
    for column in columns:
        kind = _kind(list(frames.values()), column)
        if kind == "flag":
            data = np.full((len(core_ids), n_samples), -1, dtype=np.int8)
            attrs = {"flag_values": np.array([0, 1], dtype=np.int8), "flag_meanings": "no yes",
                     "_FillValue": np.int8(-1)}
        elif kind == "number":
            data = np.full((len(core_ids), n_samples), np.nan)
            attrs = {}
        else:
            categories = sorted({str(v) for f in frames.values() if column in f
                                 for v in f[column] if isinstance(v, str) and v})
            code = {c: i for i, c in enumerate(categories)}
            data = np.full((len(core_ids), n_samples), -1, dtype=np.int16)
            attrs = {"flag_values": np.arange(len(categories), dtype=np.int16),
                     "flag_meanings": " ".join(_token(c) for c in categories), "_FillValue": np.int16(-1)}
        for index, core_id in enumerate(core_ids):
            frame = frames.get(core_id)
            if frame is None or column not in frame:
                continue
            values = frame[column].to_numpy()
            if kind == "flag":
                data[index, :len(frame)] = values.astype(np.int8)
            elif kind == "number":
                data[index, :len(frame)] = pd.to_numeric(frame[column], errors="coerce").to_numpy(float)
            else:
                data[index, :len(frame)] = [code.get(v, -1) if isinstance(v, str) else -1 for v in values]
        out[f"sample_{column}"] = xr.Variable(("core", "sample"), data, {**_attrs(column, kind), **attrs})
    return out
