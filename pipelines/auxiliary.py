"""Readers for the auxiliary inputs of the calibration stage.

- ``[training.<name>]``: a modern training set -> :class:`proxies.calibration.TrainingSet`;
- ``[instrumental.<name>]``: an annual instrumental series ->
  :class:`proxies.calibration.InstrumentalSeries`.

Both read any table format :func:`pipelines.tables.read_table` reads and report every bad
cell with file, row and column. Each reader takes either ``(path, spec)`` or, as the flows
call it, ``(run_config, name)``.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from proxies.calibration import (InstrumentalSeries, InstrumentalSpec, TrainingSet,
                                 TrainingSpec)
from proxies.problems import InputError, Problem

from pipelines.tables import read_table

if TYPE_CHECKING:  # for the annotation only
    from pipelines.config import RunConfig

__all__ = ["read_training_set", "read_instrumental"]


def _numeric(table: pd.DataFrame, column: str, name: str, problems: list[Problem],
             required: bool = True, non_negative: bool = False) -> np.ndarray:
    """A column as floats, adding one problem per bad cell (empty cells are NaN)."""
    values = pd.to_numeric(table[column].map(lambda v: np.nan if v is None or v == "" else v),
                           errors="coerce").to_numpy(dtype=float)
    raw = table[column].to_numpy(dtype=object)
    for i, (value, cell) in enumerate(zip(values, raw)):
        row = int(table.index[i])
        empty = cell is None or (isinstance(cell, float) and np.isnan(cell)) or cell == ""
        if np.isnan(value) and not empty:
            problems.append(Problem(name, f"'{cell}' is not a number", "write a number",
                                    row=row, column=column))
        elif np.isnan(value) and required:
            problems.append(Problem(name, "empty cell", "fill in a value or remove the row",
                                    row=row, column=column))
        elif non_negative and value < 0:
            problems.append(Problem(name, f"negative value {value:g}",
                                    "abundances must be >= 0", row=row, column=column))
    return values


def _require_columns(table, columns, name):
    missing = [c for c in columns if c and c not in table.columns]
    if missing:
        raise InputError([Problem(name, f"column '{c}' not found",
                                  f"the table has: {', '.join(map(str, table.columns))}",
                                  column=c) for c in missing])


def _from_config(config: RunConfig, section: str, name: str, spec_class):
    where = str(config.path)
    tables = config.sections.get(section, {})
    if name not in tables:
        raise InputError(Problem(where, f"no [{section}.{name}] table", column=f"{section}.{name}"))
    spec = spec_class.from_mapping(name, tables[name], where)
    return config.resolve(spec.file), spec


def read_training_set(source, spec) -> TrainingSet | tuple[TrainingSet, TrainingSpec]:
    """Read a modern training set.

    Parameters
    ----------
    source : str, Path or RunConfig
        The table file, or the run config (then ``spec`` is the training set's name).
    spec : TrainingSpec or str

    Returns
    -------
    TrainingSet, or (TrainingSet, TrainingSpec) when called with a run config.

    The table holds one row per site: the target column, optional id/latitude/longitude
    columns and one numeric column per taxon (every other column; counts or percentages).
    """
    if not isinstance(source, (str, Path)):
        path, parsed = _from_config(source, "training", spec, TrainingSpec)
        return read_training_set(path, parsed), parsed
    path = Path(source)
    name = str(path)
    table = read_table(path, name)
    _require_columns(table, [spec.target, spec.id_column, spec.latitude_column,
                             spec.longitude_column], name)
    problems: list[Problem] = []
    target = _numeric(table, spec.target, name, problems)
    coords = {}
    for key in ("latitude_column", "longitude_column"):
        column = getattr(spec, key)
        coords[key] = _numeric(table, column, name, problems) if column else None
    meta = {spec.target, spec.id_column, spec.latitude_column, spec.longitude_column}
    taxa_columns = [c for c in table.columns if c not in meta]
    if len(taxa_columns) < 2:
        problems.append(Problem(name, "fewer than two taxon columns",
                                "every column other than the target, id and coordinates is a "
                                "taxon"))
    taxa = {c: _numeric(table, c, name, problems, required=False, non_negative=True)
            for c in taxa_columns}
    if problems:
        raise InputError(problems)
    frame = pd.DataFrame(taxa).fillna(0.0)
    empty = frame.sum(axis=1).to_numpy() <= 0
    if empty.any():
        raise InputError([Problem(name, "the site has no taxa", "remove the row or add counts",
                                  row=int(r)) for r in table.index[empty]])
    ids = table[spec.id_column].astype(str).to_numpy() if spec.id_column else \
        np.asarray(table.index, dtype=int)
    return TrainingSet(spec.name, frame, target, spec.target_name or spec.target, spec.units,
                       ids, coords["latitude_column"], coords["longitude_column"])


def read_instrumental(source, spec) -> InstrumentalSeries:
    """Read an annual instrumental series (one row per whole year CE).

    Parameters
    ----------
    source : str, Path or RunConfig
        The table file, or the run config (then ``spec`` is the series' name).
    spec : InstrumentalSpec or str
    """
    if not isinstance(source, (str, Path)):
        path, parsed = _from_config(source, "instrumental", spec, InstrumentalSpec)
        return read_instrumental(path, parsed)
    path = Path(source)
    name = str(path)
    table = read_table(path, name)
    _require_columns(table, [spec.year_column, spec.value_column], name)
    problems: list[Problem] = []
    years = _numeric(table, spec.year_column, name, problems)
    values = _numeric(table, spec.value_column, name, problems, required=False)
    for i, year in enumerate(years):
        if np.isfinite(year) and year != np.round(year):
            problems.append(Problem(name, f"year {year:g} is not a whole year",
                                    "give one row per calendar year CE (average sub-annual "
                                    "data first)", row=int(table.index[i]),
                                    column=spec.year_column))
    if problems:
        raise InputError(problems)
    order_ok = np.diff(years) > 0
    for i in np.flatnonzero(~order_ok):
        problems.append(Problem(name, f"year {years[i + 1]:g} does not follow {years[i]:g}",
                                "sort by year and remove duplicates",
                                row=int(table.index[i + 1]), column=spec.year_column))
    if problems:
        raise InputError(problems)
    return InstrumentalSeries(spec.name, spec.variable or spec.value_column, spec.units, years,
                              values)


def calibration_reference_problems(config) -> list[Problem]:
    """Every ``[calibration.<column>]`` that names a training set or instrumental series
    must name one that is configured (the sections and their files are checked by
    :mod:`pipelines.run_checks` and the settings classes)."""
    where = str(config.path)
    problems: list[Problem] = []
    for column, table in (config.sections.get("calibration") or {}).items():
        if not isinstance(table, dict):
            continue
        for key, section in (("training", "training"), ("series", "instrumental")):
            named = table.get(key)
            if isinstance(named, str) and named not in (config.sections.get(section) or {}):
                problems.append(Problem(f"{where} [calibration.{column}]",
                                        f"{key} '{named}' names no [{section}.{named}] section",
                                        f"add [{section}.{named}] or correct the name",
                                        column=key))
    return problems
