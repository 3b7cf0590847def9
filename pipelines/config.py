"""The run config (TOML) -> :class:`RunConfig`.

``[run]`` (seed, ensemble, cores) and ``[curves]`` are read here; every other section is kept
raw in :attr:`RunConfig.sections` and validated by the stage's own ``XxxSettings.from_mapping``
(via :func:`stage_settings`), so config parsing is never duplicated in :mod:`pipelines`.

:func:`load_run_config` raises :class:`~proxies.problems.InputError` with every problem of the
file itself; :func:`check_run_config` additionally checks each listed core folder, the dates'
``curve`` names against ``[curves]``, duplicate core ids and each stage section.
"""

from __future__ import annotations

import dataclasses
import glob
import importlib
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from proxies.problems import InputError, Problem
from proxies.settings_spec import setting, settings_from_mapping

from pipelines.ingest import read_toml

__all__ = [
    "RunConfig",
    "load_run_config",
    "display_path",
    "parse_config_parts",
    "stage_settings",
    "STAGE_SETTINGS",
    "RunSettings",
]

#: sections kept raw for the stages and the report
RAW_SECTIONS = ("chronology", "training", "instrumental", "calibration", "reconstruction", "events", "report",
                "series")
TOP_LEVEL = ("run", "curves") + RAW_SECTIONS
#: stage -> "module:SettingsClass", imported only when needed
STAGE_SETTINGS: dict[str, str] = {
    "chronology": "proxies.chronology:ChronologySettings",
    "training": "proxies.calibration:TrainingSettings",
    "instrumental": "proxies.calibration:InstrumentalSettings",
    "calibration": "proxies.calibration:CalibrationSettings",
    "reconstruction": "proxies.reconstruction:ReconstructionSettings",
    "events": "proxies.events:EventSettings",
}


@dataclass(frozen=True)
class RunSettings:
    """The ``[run]`` section (declared with :func:`proxies.settings_spec.setting`)."""

    seed: int | None = setting(None, "run seed (required): every random draw derives from it and stable names",
                               kind=int, low=0, example="20261201")
    ensemble: int = setting(1000, "ensemble members M carried from dates to events", low=10, high=100_000)
    cores: tuple[str, ...] | None = setting(None, "core folders or glob patterns (required), relative to this file",
                                            kind="list[str]", example='["cores/*"]')


def _required_run_keys(values: dict) -> list[Problem]:
    fixes = {"seed": "add seed = <non-negative whole number>",
             "cores": 'add cores = ["cores/*"] (folders or glob patterns, relative to this file)'}
    problems = [Problem("", f"required key '{key}' is missing from [run]", fix, column=key)
                for key, fix in fixes.items() if values[key] is None]
    if values["cores"] is not None and len(values["cores"]) == 0:
        problems.append(Problem("", "cores = [] lists no core: there is nothing to check or run",
                                fixes["cores"].replace("add ", "write "), column="cores"))
    return problems


def _run_settings(run: dict, name: str, problems: list[Problem]) -> RunSettings | None:
    """``[run]`` validated by its declarations; problems name the file and ``run.<key>``."""
    if isinstance(run.get("cores"), str):
        run = {**run, "cores": [run["cores"]]}  # one pattern may be written without a list
    try:
        return settings_from_mapping(RunSettings, run, name, _required_run_keys)
    except InputError as error:
        found = [p for p in error.problems  # a wrong value is not also "missing"
                 if not (p.message.startswith("required key") and p.column in run)]
        problems.extend(dataclasses.replace(p, file=name, column=f"run.{p.column}") for p in found)
        return None


@dataclass(frozen=True)
class RunConfig:
    """A parsed run config.

    Attributes
    ----------
    path : Path
        The config file (absolute).
    seed : int
        Run seed (non-negative).
    ensemble : int
        Ensemble members M, 10..100 000 (default 1000).
    core_folders : tuple of Path
        Core folders matched by ``[run] cores`` (relative to the config file), sorted, unique.
    core_patterns : tuple of str
        ``[run] cores`` as written.
    curves : dict of str to Path
        Calibration-curve name -> existing file.
    sections : dict of str to dict
        Raw ``[chronology]``, ``[training]``, ``[instrumental]``, ``[calibration]``,
        ``[reconstruction]``, ``[events]``, ``[report]`` and ``[series]`` tables (absent ones are ``{}``).
    """

    path: Path
    seed: int
    ensemble: int
    core_folders: tuple[Path, ...]
    curves: dict[str, Path]
    sections: dict[str, dict] = field(default_factory=dict)
    core_patterns: tuple[str, ...] = ()

    def resolve(self, relative: str | Path) -> Path:
        """A path written in the config, relative to the config file's folder."""
        return (self.path.parent / relative).resolve()


def display_path(path: Path) -> str:
    """Path relative to the working folder when below it, else absolute."""
    try:
        relative = os.path.relpath(path)
    except ValueError:
        return str(path)
    return str(path) if relative.startswith("..") else relative


def parse_config_parts(path: Path) -> tuple[RunConfig | None, list[Problem]]:
    """The config as far as it can be read, with every problem; ``None`` when unreadable."""
    name = str(path)
    mapping, problems = read_toml(path, name)
    if mapping is None:
        return None, problems
    for key in mapping:
        if key not in TOP_LEVEL:
            problems.append(Problem(name, f"unknown section [{key}]",
                                    "remove it or correct the spelling; allowed: " + ", ".join(TOP_LEVEL), column=key))
    run = mapping.get("run")
    if not isinstance(run, dict):
        problems.append(Problem(name, "the [run] section is missing", "add [run] with seed and cores", column="run"))
        run = {}
    settings = _run_settings(run, name, problems)
    patterns = settings.cores if settings is not None else run.get("cores")
    if isinstance(patterns, str):
        patterns = [patterns]
    if not isinstance(patterns, (list, tuple)) or not all(isinstance(p, str) for p in patterns):
        patterns = ()  # reported with [run]; the cores are still checked when they can be found
    folders = _core_folders(tuple(patterns), path, name, problems if settings is not None else [])
    curves = _curves(mapping.get("curves", {}), path, name, problems)
    sections = {}
    for key in RAW_SECTIONS:
        value = mapping.get(key, {})
        if not isinstance(value, dict):
            problems.append(Problem(name, f"'{key}' must be a [{key}] table", f"write it as [{key}]", column=key))
            value = {}
        sections[key] = value
    seed, ensemble = (settings.seed, settings.ensemble) if settings is not None else (0, 1000)
    config = RunConfig(path=path.resolve(), seed=seed, ensemble=ensemble, core_folders=folders, curves=curves,
                       sections=sections, core_patterns=tuple(patterns))
    return config, problems


def _parse(path: Path) -> tuple[RunConfig | None, list[Problem]]:
    config, problems = parse_config_parts(path)
    return (None, problems) if problems else (config, [])


def _core_folders(patterns: tuple[str, ...] | None, path: Path, name: str,
                  problems: list[Problem]) -> tuple[Path, ...]:
    base = path.resolve().parent
    found: set[Path] = set()
    for pattern in patterns or ():
        matches = [Path(m).resolve() for m in glob.glob(os.path.join(str(base), pattern))]
        folders = [m for m in matches if m.is_dir()]
        if not folders:
            problems.append(Problem(name, f"cores pattern {pattern!r} matches no folder",
                                    f"check the pattern; it is relative to {display_path(base)}", column="run.cores"))
        found.update(folders)
    return tuple(sorted(found, key=str))


def _curves(curves: Any, path: Path, name: str, problems: list[Problem]) -> dict[str, Path]:
    if not isinstance(curves, dict):
        problems.append(Problem(name, "'curves' must be a [curves] table of name = file",
                                'write [curves] then e.g. atmosphere = "curves/x.14c"', column="curves"))
        return {}
    result = {}
    for curve, file in curves.items():
        if not isinstance(file, str):
            problems.append(Problem(name, f"curve {curve!r} must name a file, got {file!r}",
                                    f'write {curve} = "path/to/curve-file"', column=f"curves.{curve}"))
            continue
        resolved = (path.resolve().parent / file).resolve()
        if not resolved.is_file():
            problems.append(Problem(name, f"curve file {file!r} not found",
                                    "check the path; it is relative to the config file", column=f"curves.{curve}"))
            continue
        result[curve] = resolved
    return result


def load_run_config(path: str | Path) -> RunConfig:
    """Read a run config; raise :class:`InputError` with every problem of the file itself.

    Core folders are found but not inspected (see :func:`check_run_config`).
    """
    config, problems = _parse(Path(path))
    if problems:
        raise InputError(problems)
    return config


def _settings_class(stage: str):
    if stage not in STAGE_SETTINGS:
        raise ValueError(f"unknown stage {stage!r}; known: {', '.join(STAGE_SETTINGS)}")
    module_name, class_name = STAGE_SETTINGS[stage].split(":")
    return getattr(importlib.import_module(module_name), class_name)


def stage_settings(config: RunConfig, stage: str):
    """The stage's Settings object built from its config section (defaults when absent).

    Calls ``cls.from_mapping(section, where="<config path> [<stage>]")``, which raises
    :class:`InputError` for unknown keys, wrong types or out-of-range values.
    """
    cls = _settings_class(stage)
    return cls.from_mapping(dict(config.sections.get(stage, {})), where=f"{config.path} [{stage}]")
