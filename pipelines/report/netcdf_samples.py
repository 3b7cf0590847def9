"""The per-sample tables of a run (``<core>/samples_dated.parquet``) as netCDF variables.

Every column of the cores' per-sample tables becomes one variable ``sample_<column>(core,
sample)``: cores have different numbers of samples, so the ``sample`` dimension is as long as
the longest core and shorter cores are padded with the fill value (CF's incomplete
multidimensional array representation, CF-1.8 appendix H). Flags (true/false columns) are
``int8`` with ``flag_values = 0, 1``; text columns are strings ("" = none); numbers are
``float64`` with NaN as fill value. Ages before present carry ``units = "year"`` like the
dataset's ``age`` coordinate.
"""

from __future__ import annotations

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


def _attrs(column: str, units_of) -> dict:
    spec = output_table(SAMPLE_TABLE).column(column)
    doc = spec.doc if spec is not None else "as given in the samples file"
    if isinstance(spec, Family) and spec.example == "uk37":  # the raw proxy columns
        doc = f"raw value of {column} as given in the samples file (its units are in its name)"
    attrs = {"long_name": f"per-sample {column}: {doc}"}
    units = units_of(column)
    if units:
        attrs["units"] = units
    if column.endswith("_cal_bp"):
        attrs["comment"] = "calendar years before present (1950 CE); CE year = 1950 - value"
    return attrs


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
    from proxies.reconstruction.dated_samples import column_units

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
            data = np.full((len(core_ids), n_samples), "", dtype=object)
            attrs = {}
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
                data[index, :len(frame)] = ["" if v is None or v != v else str(v) for v in values]
        out[f"sample_{column}"] = xr.Variable(("core", "sample"), data,
                                              {**_attrs(column, column_units), **attrs})
    return out
