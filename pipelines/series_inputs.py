"""Dated series named in the run config (``[series.<name>]``): their settings, their files
read, and the problems ``downcore check`` reports for them.

Each ``[series.<name>]`` table is validated by
:class:`proxies.reconstruction.series_settings.SeriesSettings` (unknown keys with "did you
mean", types, bounds); its ``file`` is read by :func:`pipelines.dated_series.read_dated_table`
and its optional ``ensemble_file`` by :func:`pipelines.tables.read_table`. Problems name the
file, row and column (or the config key) and say how to fix them. Files are never modified.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from pipelines.dated_series import AGE_UNITS, DatedTable, read_dated_table
from proxies.problems import InputError, Problem

__all__ = ["SeriesInput", "series_specs", "read_series", "series_problems"]

_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]*$")


@dataclass(frozen=True)
class SeriesInput:
    """One dated series as read: the table and, when given, its age ensemble (n, M) [yr BP]."""

    name: str
    settings: object
    table: DatedTable
    member_ages: np.ndarray | None = None


def series_specs(config) -> dict:
    """``name -> SeriesSettings`` of every ``[series.<name>]`` table of ``config``.

    Raises
    ------
    InputError
        Every problem of every table (key names ``series.<name>.<key>``).
    """
    from proxies.reconstruction.series_settings import SeriesSettings

    where = str(config.path)
    specs, problems = {}, []
    for name, table in sorted((config.sections.get("series") or {}).items()):
        key = f"series.{name}"
        if not isinstance(table, dict):
            problems.append(Problem(where, f"'{key}' must be a table", f"write it as [{key}] with file = ...",
                                    column=key))
            continue
        if not _NAME.match(name):
            problems.append(Problem(where, f"series name {name!r} cannot name a folder of the run",
                                    "use letters, digits, '-', '_' or '.'", column=key))
            continue
        try:
            specs[name] = SeriesSettings.from_mapping(table, where=f"{where} [{key}]")
        except InputError as error:
            problems += [Problem(where, p.message, p.fix, column=f"{key}.{p.column}" if p.column else key)
                         for p in error.problems]
    if problems:
        raise InputError(problems)
    return specs


def _member_ages(config, name: str, spec, table: DatedTable) -> np.ndarray:
    from pipelines.tables import read_table

    path = config.resolve(spec.ensemble_file)
    frame = read_table(path)
    if len(frame) != table.age_yr.size:
        raise InputError(Problem(str(path), f"{len(frame)} rows, the series {name!r} has {table.age_yr.size} "
                                 "rows with age and value", "give one row per kept row of the series, in age order",
                                 column=f"series.{name}.ensemble_file"))
    problems = []
    for column in frame.columns:
        numbers = np.asarray(frame[column].map(_as_float), dtype=float)
        bad = np.flatnonzero(~np.isfinite(numbers))
        if bad.size:
            problems.append(Problem(str(path), f"{frame[column].iloc[bad[0]]!r} is not an age",
                                    "give a number in every cell", row=int(frame.index[bad[0]]), column=str(column)))
    if problems:
        raise InputError(problems)
    ages = frame.apply(lambda c: c.map(_as_float)).to_numpy(dtype=float) * AGE_UNITS[spec.age_units]
    return ages


def _as_float(cell) -> float:
    try:
        return float(cell)
    except (TypeError, ValueError):
        return float("nan")


def read_series(config, name: str, spec) -> SeriesInput:
    """Read one series (and its age ensemble) named in ``config``.

    Raises
    ------
    InputError
        Naming file, row and column, with a fix.
    """
    table = read_dated_table(config.resolve(spec.file), spec.column("age_column"), spec.column("value_column"),
                             age_units=spec.age_units, section=spec.section)
    members = _member_ages(config, name, spec, table) if spec.ensemble_file else None
    return SeriesInput(name, spec, table, members)


def series_problems(config, core_ids: set[str] = frozenset()) -> list[Problem]:
    """Every problem of the run's dated series (what ``downcore check`` reports): the tables'
    keys, their files, rows and columns, and names that a core id already uses."""
    try:
        specs = series_specs(config)
    except InputError as error:
        return list(error.problems)
    problems = []
    taken = {cid.lower() for cid in core_ids}
    for name, spec in specs.items():
        if name.lower() in taken:
            problems.append(Problem(str(config.path), f"series name {name!r} is also a core id",
                                    "give the series its own name", column=f"series.{name}"))
        try:
            read_series(config, name, spec)
        except InputError as error:
            problems.extend(error.problems)
    return problems
