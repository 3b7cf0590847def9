"""Every problem of a run config, its stage sections and all its core folders: what
``downcore check`` reports, found with the code ``run`` uses (:mod:`pipelines.config` parses,
:mod:`pipelines.run_checks` makes the checks ``run`` makes before its first stage).
"""

from __future__ import annotations

import os
from pathlib import Path

from proxies.cores.model import Core
from proxies.problems import InputError, Problem

from pipelines.auxiliary import calibration_reference_problems
from pipelines.config import STAGE_SETTINGS, display_path, parse_config_parts, stage_settings
from pipelines.ingest import inspect_core, read_toml
from pipelines.run_checks import run_time_checks
from pipelines.series_inputs import series_problems

__all__ = ["check_run_config", "check_run_config_by_core"]


def check_run_config(path: str | Path, *, year: int | None = None) -> list[Problem]:
    """Every problem of a run config, its stage sections and all its core folders."""
    report = check_run_config_by_core(path, year=year)
    return [problem for _, problems in report.values() for problem in problems]


def check_run_config_by_core(
    path: str | Path, *, year: int | None = None, notes: list[str] | None = None
) -> dict[str, tuple[Core | None, list[Problem]]]:
    """Like :func:`check_run_config`, grouped and with the loaded cores.

    Returns ``{config path: (None, problems of the config), core folder: (core or None,
    problems of that core), ...}`` in that order, core folders sorted. Every section is
    checked even when another has problems; the checks ``run`` makes before its first stage
    (curve files and date ranges, age control, memory, calibration columns) are made here
    with the same code (:mod:`pipelines.run_checks`). ``notes`` receives what reading skipped.
    """
    path = Path(path)
    name = str(path)
    config, problems = parse_config_parts(path)  # problems of every section together, cores still checked
    grouped: dict[str, tuple[Core | None, list[Problem]]] = {name: (None, problems)}
    if config is None:
        return grouped
    default_curve = (config.sections.get("chronology") or {}).get("default_curve")
    for stage in STAGE_SETTINGS:
        if not config.sections.get(stage):
            continue
        try:
            stage_settings(config, stage)
        except InputError as error:
            problems.extend(error.problems)
    problems.extend(calibration_reference_problems(config))
    ids: dict[str, str] = {}
    for folder in config.core_folders:
        shown = display_path(folder)
        core, core_problems = inspect_core(shown, year=year, curve_names=set(config.curves),
                                           default_curve=default_curve if isinstance(default_curve, str) else None,
                                           notes=notes)
        core_id = core.id if core is not None else _declared_id(folder)
        key = core_id.lower() if core_id is not None else None  # folders differing in case only collide
        if key is not None and key in ids:
            core_problems.append(Problem(os.path.join(shown, "core.toml"),
                                         f"core id {core_id!r} is also used by {ids[key]}"
                                         " (ids differing only in upper/lower case share a folder on "
                                         "Windows and macOS)", "give every core its own id", column="core.id"))
        elif key is not None:
            ids[key] = shown
        grouped[shown] = (core, core_problems)
    problems.extend(series_problems(config, {core.id for core, _ in grouped.values() if core is not None}))
    run_time_checks(config, grouped, name)
    return grouped


def _declared_id(folder: Path) -> str | None:
    """The id written in a core folder's core.toml, even when the core has other problems."""
    mapping, _ = read_toml(folder / "core.toml", "core.toml")
    core = (mapping or {}).get("core")
    value = core.get("id") if isinstance(core, dict) else None
    return value if isinstance(value, str) else None
