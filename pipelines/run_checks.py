"""What ``downcore run`` would refuse before (or in) its first stage, found by ``check``.

:func:`run_time_checks` is called by :func:`pipelines.config_problems.check_run_config_by_core` after
every core folder was read. It uses the very functions the run uses, so that check = run:

- every ``[curves]`` file is read with :func:`pipelines.curvefiles.read_curve_file_once` (parsed once per process, shared with the run);
- each core's dates are calibrated with
  :func:`proxies.chronology.stage.calibrate_core_dates` (the run's curve choice per date, each
  radiocarbon age against its curve's range after the reservoir offset, problems naming
  ``<core>/dates.csv``, row and column);
- age control, event layers and the memory the grids would need
  (:mod:`proxies.cores.datability`, also called by the chronology stage);
- each ``[calibration.<column>]`` must name a proxy column of at least one core;
- every ``[training.<name>]`` and ``[instrumental.<name>]`` is read with the run's readers
  (:mod:`pipelines.auxiliary`): its keys, its file and the file's columns and cells.
"""

from __future__ import annotations

from proxies.cores.datability import (age_control_problems, event_layer_problems, grid_memory_problems,
                                      machine_memory_bytes)
from proxies.problems import InputError, Problem
from proxies.settings_spec import did_you_mean

__all__ = ["run_time_checks"]


def _settings_or_none(config, stage: str):
    from pipelines.config import stage_settings

    try:
        return stage_settings(config, stage)
    except (InputError, ImportError, AttributeError):
        return None  # its problems were reported with the config


def _read_curves(config, name: str) -> tuple[dict, list[Problem]]:
    from pipelines.curvefiles import read_curve_file_once

    curves, problems = {}, []
    for curve, path in config.curves.items():
        try:
            curves[curve] = read_curve_file_once(path, curve)
        except InputError as error:
            problems.extend(Problem(p.file, f"curve {curve!r}: {p.message}", p.fix or "check the curve file",
                                    row=p.row, column=p.column or f"curves.{curve}") for p in error.problems)
    return curves, problems


def _curve_span(curves: dict) -> float | None:
    spans = []
    for curve in curves.values():
        cal = getattr(curve, "cal_bp", None)
        if cal is not None and len(cal):
            spans.append(float(max(cal) - min(cal)))
    return max(spans) if spans else None


def _core_problems(core, curves: dict, chronology, reconstruction, ensemble: int, where: str,
                   curves_ok: bool) -> list[Problem]:
    from proxies.chronology.stage import calibrate_core_dates, top_is_surface

    core_top = chronology.core_top if chronology is not None else True
    if chronology is not None:
        core_top = top_is_surface(core, chronology)
    problems = age_control_problems(core, core_top) + event_layer_problems(core)
    memory = grid_memory_problems(core, chronology, reconstruction, ensemble, machine_memory_bytes(), where,
                                  curve_span_yr=_curve_span(curves))
    problems += memory
    if chronology is not None and curves_ok and not memory:
        try:
            calibrate_core_dates(core, curves, chronology)
        except InputError as error:
            problems += error.problems
    return problems


def _calibration_columns(config, cores: list, name: str) -> list[Problem]:
    """``[calibration.<column>]`` tables that name no column of any core."""
    from proxies.calibration.settings import COUNTS_KEY

    columns = {column for core in cores for column in core.proxy_columns}
    problems = []
    for column in (config.sections.get("calibration") or {}):
        if column == COUNTS_KEY or column in columns:
            continue
        hint = did_you_mean(column, sorted(columns))
        problems.append(Problem(name, f"[calibration.{column}] names no proxy column of any core"
                                      + (f" ({hint})" if hint else ""),
                                "name the section after a samples column of a core: "
                                + (", ".join(sorted(columns)) or "(the cores have none)"),
                                column=f"calibration.{column}"))
    return problems


def _auxiliary_problems(config) -> list[Problem]:
    """Problems of the training sets and instrumental series, read as the run reads them."""
    from pipelines.auxiliary import read_instrumental, read_training_set

    problems = []
    for section, reader in (("training", read_training_set), ("instrumental", read_instrumental)):
        for entry in sorted(config.sections.get(section) or {}):
            try:
                reader(config, entry)
            except InputError as error:
                problems.extend(error.problems)
    return problems


def run_time_checks(config, grouped: dict, name: str) -> None:
    """Add the run-time problems to ``grouped`` (config problems first, then per core).

    Parameters
    ----------
    config : RunConfig
        As far as it could be read.
    grouped : dict
        ``{config name: (None, problems), core folder: (core or None, problems), ...}``;
        modified in place.
    name : str
        How problems name the run config.
    """
    config_problems = grouped[name][1]
    chronology = _settings_or_none(config, "chronology")
    reconstruction = _settings_or_none(config, "reconstruction")
    curves, curve_problems = _read_curves(config, name)
    config_problems.extend(curve_problems)
    # a section's key problems are found by the settings and again by the file reader: once
    config_problems.extend(p for p in _auxiliary_problems(config) if p not in config_problems)
    loaded = [core for key, (core, _) in grouped.items() if key != name and core is not None]
    if loaded and len(loaded) == len(grouped) - 1:
        config_problems.extend(_calibration_columns(config, loaded, name))
    for key, (core, problems) in grouped.items():
        if key == name or core is None:
            continue
        problems.extend(_core_problems(core, curves, chronology, reconstruction, config.ensemble, name,
                                       curves_ok=not curve_problems))
